//! Command-line definitions. Flag names are our own.

use clap::{Args, Parser, Subcommand, ValueEnum};
use std::path::PathBuf;

/// Plumbline: documented, rerunnable regression studies for valuation analysts.
#[derive(Debug, Parser)]
#[command(name = "plumbline", version, about, long_about = None)]
pub struct Cli {
    /// What to do.
    #[command(subcommand)]
    pub command: Command,
}

/// Subcommands.
#[derive(Debug, Subcommand)]
pub enum Command {
    /// Serve the notebook protocol (what the kernelspec starts).
    Kernel(KernelArgs),
    /// Register the kernelspec where notebook front ends find it, and warm the engine cache.
    Install(InstallArgs),
    /// Fit a least-squares model to a CSV or Parquet file and print the result.
    Fit(Box<FitArgs>),
    /// Compare candidate models on one data file: side by side, nested tests, cross-validation.
    Compare(Box<CompareArgs>),
    /// Ratio study of values against sale prices: level, uniformity, vertical equity.
    Ratio(Box<RatioArgs>),
    /// Fit a model to the sales, then value every parcel of a (large) parcel
    /// file in batches, writing estimates and intervals to CSV or Parquet.
    Value(Box<ValueArgs>),
    /// One printable page per parcel for an appeal: the value built up from a
    /// typical home, and comparable sales adjusted to the parcel by the model.
    Appeal(Box<AppealArgs>),
    /// Execute a study notebook headlessly; save the executed notebook and an HTML report.
    Run(RunArgs),
    /// What moved between two runs: fit JSON files or executed notebooks.
    Diff(DiffArgs),
    /// Score the solver on the NIST StRD linear-regression datasets (log relative error).
    Accuracy(AccuracyArgs),
}

/// Output format of a report.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum Format {
    /// Aligned plain text for a terminal.
    Text,
    /// The machine-readable JSON document described in README.md.
    Json,
    /// A standalone HTML page (inline styles, no scripts) for a study file.
    Html,
}

/// Covariance estimators selectable on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum CovarianceArg {
    /// s²(XᵀWX)⁻¹.
    Classical,
    /// White (1980).
    Hc0,
    /// HC0 × n/(n−k).
    Hc1,
    /// Leverage-adjusted, 1/(1−h).
    Hc2,
    /// Leverage-adjusted, 1/(1−h)².
    Hc3,
}

/// Solver arithmetic selectable on the command line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum PrecisionArg {
    /// Extended for small or ill-conditioned designs, refined double otherwise.
    Auto,
    /// Refined double-precision QR.
    Double,
    /// Double-double QR.
    Extended,
}

/// Arguments of `plumbline fit`.
///
/// Terms enter the design in this order: `--terms`, `--poly`, `--orthogonal-poly`,
/// `--log`, `--center`, `--standardize`, `--category`, `--interact`.
#[derive(Debug, Args)]
pub struct FitArgs {
    /// Where the sales are: a data file (.csv, .tsv, .txt, .parquet, .arrow,
    /// .xlsx, .sqlite, .gpkg) or a PostgreSQL server
    /// (`postgresql://USER@HOST:PORT/DATABASE`, with `--query`).
    pub data: PathBuf,
    /// Target, intercept and weights.
    #[command(flatten)]
    pub model: ModelFlags,
    /// Numeric terms, comma-separated.
    #[arg(long, value_delimiter = ',')]
    pub terms: Vec<String>,
    /// Raw polynomial COL:DEGREE (columns COL, COL^2, …, COL^DEGREE, powers formed in extended precision).
    #[arg(long, value_name = "COL:DEGREE")]
    pub poly: Vec<String>,
    /// Orthogonal polynomial COL:DEGREE.
    #[arg(long, value_name = "COL:DEGREE")]
    pub orthogonal_poly: Vec<String>,
    /// Add log(COL) as a term.
    #[arg(long, value_name = "COL")]
    pub log: Vec<String>,
    /// Add COL − mean(COL) as a term.
    #[arg(long, value_name = "COL")]
    pub center: Vec<String>,
    /// Add (COL − mean)/sd as a term.
    #[arg(long, value_name = "COL")]
    pub standardize: Vec<String>,
    /// Categorical terms, comma-separated (coded as indicators against a reference level).
    #[arg(long, value_delimiter = ',')]
    pub category: Vec<String>,
    /// Reference level of a categorical term, COL=LEVEL (default: its most frequent level).
    #[arg(long, value_name = "COL=LEVEL")]
    pub reference: Vec<String>,
    /// Interaction A*B of two columns (a column listed in --category is categorical, else numeric).
    #[arg(long, value_name = "A*B")]
    pub interact: Vec<String>,
    /// A term built from a date column, in the compact term syntax:
    /// `months:sale_date:2023-01-01` or `days:sale_date:2023-01-01` (a time
    /// trend), `year:sale_date`, `quarter:sale_date`, `month:sale_date`
    /// (categories; `=LEVEL` names the reference) (repeatable).
    #[arg(long = "date-term", value_name = "TERM")]
    pub date_terms: Vec<String>,
    /// A location term, the distance of the coordinates in columns X, Y from
    /// a named place at (PX, PY): `dist:X:Y:PX:PY:NAME` (e.g.
    /// `dist:x:y:4.5:3.0:Lantern Green`), or its log, `logdist:…` (repeatable).
    #[arg(long = "location-term", value_name = "TERM")]
    pub location_terms: Vec<String>,
    /// Covariance estimator for standard errors.
    #[arg(long, value_enum, default_value_t = CovarianceArg::Classical)]
    pub cov: CovarianceArg,
    /// Cluster-robust standard errors by this column (overrides --cov).
    #[arg(long, value_name = "COL")]
    pub cluster: Option<String>,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = 0.95)]
    pub level: f64,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Solver arithmetic.
    #[arg(long, value_enum, default_value_t = PrecisionArg::Auto)]
    pub precision: PrecisionArg,
    /// Also predict the rows of this file (same columns as the terms), with
    /// confidence and prediction intervals at --level.
    #[arg(long, value_name = "FILE")]
    pub predict: Option<PathBuf>,
    /// How to read the data file.
    #[command(flatten)]
    pub input: InputFlags,
    /// What to read from a database or workbook.
    #[command(flatten)]
    pub source: SourceFlags,
    /// Also print assumption tests, collinearity and the rows to check.
    #[arg(long)]
    pub diagnose: bool,
    /// Also report every row's influence measures (JSON) — residuals, leverage,
    /// Cook's distance, DFFITS, DFBETAS.
    #[arg(long)]
    pub influence: bool,
    /// Column identifying rows (e.g. a parcel id) in flagged-row lists.
    #[arg(long, value_name = "COL")]
    pub id: Option<String>,
    /// Whether the model's misses cluster in space.
    #[command(flatten)]
    pub spatial: SpatialFlags,
    /// Read the data in batches of N rows and fit from the pieces, for a file
    /// (or a directory of .csv / .parquet files) larger than memory: memory
    /// stays bounded by one batch. A directory is always read this way
    /// (default 1,000,000 rows per batch). Classical, HC0 and HC1 errors only;
    /// no row-level results (--predict, --diagnose, --influence, --spatial-check).
    #[arg(long, value_name = "N")]
    pub batch_rows: Option<usize>,
    /// Fit the model separately within each group of this column (a market
    /// area, say), beside the pooled model, with the F tests of whether the
    /// groups need models of their own. A group too small to fit is listed
    /// with its reason. JSON output is the `plumbline.stratified-fit` document.
    #[arg(long, value_name = "COL")]
    pub by: Option<String>,
    /// Fit the model locally at every sale (geographically weighted
    /// regression), the sales' places in columns `X,Y` (`--coordinates
    /// geographic` for longitude,latitude). JSON output is the
    /// `plumbline.local-fit` document.
    #[arg(long, value_name = "X,Y")]
    pub local: Option<String>,
    /// The local fit's kernel.
    #[arg(long, value_enum, default_value_t = KernelArg::AdaptiveBisquare)]
    pub kernel: KernelArg,
    /// The local fit's bandwidth: a number of nearest sales (adaptive
    /// bisquare) or a distance (fixed Gaussian; km for geographic places), or
    /// `aicc` for the bandwidth of least AICc.
    #[arg(long, value_name = "N|DISTANCE|aicc", default_value = "aicc")]
    pub bandwidth: String,
    /// With --local: test whether each coefficient varies over space by
    /// shuffling the sales' places this many times (e.g. 99; each shuffle
    /// costs a local fit).
    #[arg(long, value_name = "SHUFFLES")]
    pub variation_test: Option<usize>,
    /// Seed of the variation test's shuffles.
    #[arg(long = "shuffle-seed", default_value_t = 20261205)]
    pub shuffle_seed: u64,
}

/// The kernel of a local fit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum KernelArg {
    /// Bisquare over the N nearest sales.
    AdaptiveBisquare,
    /// Gaussian over a fixed distance.
    FixedGaussian,
}

/// How coordinate columns locate a place.
#[derive(Debug, Clone, Copy, PartialEq, Eq, ValueEnum)]
pub enum CoordinatesArg {
    /// Projected coordinates (straight-line distances in their units).
    Planar,
    /// Longitude and latitude in degrees on WGS 84 (geodesic distances in km).
    Geographic,
}

/// Flags of the spatial check of a fit's residuals (Moran's I).
#[derive(Debug, Args)]
pub struct SpatialFlags {
    /// Moran's I of the residuals over the sales' places, given as the two
    /// coordinate columns `X,Y` (projected units, e.g. km east and north; or
    /// longitude,latitude with `--coordinates geographic`).
    #[arg(long = "spatial-check", value_name = "X,Y")]
    pub spatial_check: Option<String>,
    /// How the spatial check's columns locate a sale: `planar` (projected
    /// units) or `geographic` (longitude and latitude in degrees, WGS 84:
    /// geodesic distances in km). Columns named like longitude and latitude
    /// are refused as planar.
    #[arg(long, value_enum, default_value_t = CoordinatesArg::Planar)]
    pub coordinates: CoordinatesArg,
    /// Neighbours in the spatial check: the K nearest sales (default 8).
    #[arg(long, value_name = "K", conflicts_with = "band")]
    pub neighbours: Option<usize>,
    /// Neighbours in the spatial check: every sale within this distance (km
    /// for geographic coordinates).
    #[arg(long, value_name = "DISTANCE")]
    pub band: Option<f64>,
    /// Weigh each neighbour 1 instead of 1/count in the spatial check.
    #[arg(long)]
    pub binary_weights: bool,
    /// Location column (e.g. district) to summarise residuals by in the spatial check; with
    /// `--local`, the groups the maps of local coefficients are labelled with.
    #[arg(long, value_name = "COL")]
    pub location_groups: Option<String>,
}

/// Flags every model shares: the target, its transform, intercept and weights.
#[derive(Debug, Args)]
pub struct ModelFlags {
    /// Column to explain.
    #[arg(long)]
    pub target: String,
    /// Fit the natural log of the target.
    #[arg(long)]
    pub log_target: bool,
    /// Fit without an intercept (R² is then uncentered).
    #[arg(long)]
    pub no_intercept: bool,
    /// Case-weight column for weighted least squares.
    #[arg(long, value_name = "COL")]
    pub weights: Option<String>,
}

impl ModelFlags {
    /// A specification with these settings and no terms yet.
    pub fn base_spec(&self) -> plumbline::prelude::ModelSpec {
        let mut spec = plumbline::prelude::ModelSpec::new(self.target.clone());
        if self.log_target {
            spec = spec.log_target();
        }
        if self.no_intercept {
            spec = spec.without_intercept();
        }
        if let Some(w) = &self.weights {
            spec = spec.weights(w.clone());
        }
        spec
    }
}

/// Flags describing how to read a data file.
#[derive(Debug, Args)]
pub struct InputFlags {
    /// Field delimiter of a text file (one character; `\t` for tab).
    #[arg(long, default_value = ",")]
    pub delimiter: String,
    /// A field value meaning "missing" (repeatable; the empty field always is).
    #[arg(long = "null", value_name = "MARKER")]
    pub null_markers: Vec<String>,
    /// Column type override COL=number|integer|text|date|formatted-number
    /// (repeatable). `formatted-number` reads spreadsheet-style numbers such as
    /// `$250,000`, `250 000` or `12.5%` (read as 0.125).
    #[arg(long = "column-type", value_name = "COL=TYPE")]
    pub column_types: Vec<String>,
    /// Date format of a date column written otherwise than YYYY-MM-DD,
    /// COL=FORMAT with chrono's % codes, e.g. `sale_date=%d/%m/%Y` (repeatable).
    #[arg(long = "date-format", value_name = "COL=FORMAT")]
    pub date_formats: Vec<String>,
    /// Character encoding of a text file: utf-8, latin-1 or windows-1252.
    #[arg(long, default_value = "utf-8")]
    pub encoding: String,
    /// What to do with NaN or infinite numbers in columns the model uses:
    /// refuse (stop with the column, row and line) or missing (drop those rows
    /// like rows with an empty field, and say so in the report).
    #[arg(long = "non-finite", default_value = "refuse", value_name = "refuse|missing")]
    pub non_finite: String,
}

/// Flags choosing what to read from a database or a workbook.
#[derive(Debug, Args)]
pub struct SourceFlags {
    /// The query to run: required for a PostgreSQL server, optional for an
    /// SQLite file (instead of `--table`). Parameters are `$1`, `$2`, …
    /// (PostgreSQL) or `?1`, `?2`, … (SQLite), given by `--param`.
    #[arg(long, value_name = "SQL")]
    pub query: Option<String>,
    /// A value for the query's next parameter (repeatable, in order).
    #[arg(long = "param", value_name = "VALUE")]
    pub parameters: Vec<String>,
    /// The table of an SQLite file or GeoPackage to read whole (needed when
    /// it holds several).
    #[arg(long, value_name = "NAME")]
    pub table: Option<String>,
    /// The sheet of an Excel workbook to read (needed when it holds several).
    #[arg(long, value_name = "NAME")]
    pub sheet: Option<String>,
}

/// Arguments of `plumbline compare`.
///
/// Each `--model` is a term list in our compact syntax: comma-separated terms,
/// `area`, `log:area`, `pow:area:0.5`, `center:age`, `std:age`, `poly:age:2`,
/// `orth:age:2`, `cat:district`, `cat:district=Wickerholm`, and `A*B` for an
/// interaction. Models are named A, B, C… in the order given. All models are
/// fitted on the rows that have every column any of them uses.
#[derive(Debug, Args)]
pub struct CompareArgs {
    /// Where the sales are: a data file (.csv, .tsv, .txt, .parquet, .arrow,
    /// .xlsx, .sqlite, .gpkg) or a PostgreSQL server
    /// (`postgresql://USER@HOST:PORT/DATABASE`, with `--query`).
    pub data: PathBuf,
    /// Target, intercept and weights, shared by every candidate.
    #[command(flatten)]
    pub model: ModelFlags,
    /// A model's terms (repeat for each candidate; at least one).
    #[arg(long = "model", value_name = "TERMS", required = true)]
    pub models: Vec<String>,
    /// Covariance estimator for the standard errors shown.
    #[arg(long, value_enum, default_value_t = CovarianceArg::Classical)]
    pub cov: CovarianceArg,
    /// Cross-validate every model with this many folds.
    #[arg(long, value_name = "K")]
    pub folds: Option<usize>,
    /// Seed of the cross-validation split.
    #[arg(long, default_value_t = 20261202)]
    pub seed: u64,
    /// Column identifying rows, used to place rows in folds.
    #[arg(long, value_name = "COL")]
    pub id: Option<String>,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// How to read the data file.
    #[command(flatten)]
    pub input: InputFlags,
    /// What to read from a database or workbook.
    #[command(flatten)]
    pub source: SourceFlags,
}

/// Arguments of `plumbline value`.
#[derive(Debug, Args)]
pub struct ValueArgs {
    /// The sales and the model, exactly as for `plumbline fit` (`--batch-rows`
    /// and directories fit in batches; `--id` names the parcel id column
    /// copied into the output).
    #[command(flatten)]
    pub fit: FitArgs,
    /// The parcels to value: a .csv or .parquet file, or a directory of them,
    /// with the model's term columns (and the id column).
    #[arg(long, value_name = "FILE|DIR")]
    pub parcels: PathBuf,
    /// Where to write the values: a .csv or .parquet file (written whole or
    /// not at all).
    #[arg(long, value_name = "FILE")]
    pub out: PathBuf,
    /// Parcels read and valued per batch (memory is bounded by one batch).
    #[arg(long, value_name = "N", default_value_t = 100_000)]
    pub parcel_batch_rows: usize,
}

/// Arguments of `plumbline appeal`.
#[derive(Debug, Args)]
pub struct AppealArgs {
    /// The study's sales and the model, exactly as for `plumbline fit`
    /// (in memory); `--id` names the parcel id column of the sales and the
    /// parcels. `--format text|json|html` prints the pages.
    #[command(flatten)]
    pub fit: FitArgs,
    /// The parcel file (the roll): the model's term columns and the id column.
    #[arg(long, value_name = "FILE")]
    pub parcels: PathBuf,
    /// A parcel to explain, by id (repeatable).
    #[arg(long = "parcel", value_name = "ID")]
    pub parcel: Vec<String>,
    /// A CSV file listing parcels to explain, one id per row in the `--id` column.
    #[arg(long, value_name = "FILE")]
    pub parcel_list: Option<PathBuf>,
    /// The sales' date column (the model's time trend reads it).
    #[arg(long, value_name = "COL", default_value = "sale_date")]
    pub date_column: String,
    /// The date every value is estimated for (YYYY-MM-DD).
    #[arg(long, value_name = "DATE")]
    pub valuation_date: String,
    /// Comparables only from the subject's own group of this column (its market area).
    #[arg(long, value_name = "COL")]
    pub market_area: Option<String>,
    /// Parcel places, X,Y columns (planar unless `--coordinates geographic`):
    /// distances are shown, and `--max-distance` applies.
    #[arg(long, value_name = "X,Y")]
    pub places: Option<String>,
    /// The unit of planar places, as the pages write distances (e.g. km, m, ft).
    #[arg(long, value_name = "UNIT")]
    pub distance_unit: Option<String>,
    /// Comparables only within this distance of the subject (the places'
    /// units; km for geographic places).
    #[arg(long, value_name = "D")]
    pub max_distance: Option<f64>,
    /// Comparables only from sales in this many months before the valuation date.
    #[arg(long, value_name = "N", default_value_t = 24)]
    pub months_back: u32,
    /// Comparables shown per parcel.
    #[arg(long, value_name = "N", default_value_t = 5)]
    pub comparables: usize,
    /// Build each value up from this parcel instead of the typical home of the sales.
    #[arg(long, value_name = "ID")]
    pub reference_parcel: Option<String>,
    /// Also write the pages as a standalone, printable HTML file.
    #[arg(long, value_name = "PAGES.html")]
    pub html: Option<PathBuf>,
}

/// Arguments of `plumbline ratio`.
#[derive(Debug, Args)]
pub struct RatioArgs {
    /// Where the sales are (one row per sale): a data file (.csv, .tsv, .txt, .parquet, .arrow,
    /// .xlsx, .sqlite, .gpkg) or a PostgreSQL server
    /// (`postgresql://USER@HOST:PORT/DATABASE`, with `--query`).
    pub data: PathBuf,
    /// Column of values (assessed or model values).
    #[arg(long, value_name = "COL")]
    pub value: String,
    /// Column of (time-adjusted) sale prices.
    #[arg(long, value_name = "COL")]
    pub price: String,
    /// One row of statistics per level of this column (e.g. district).
    #[arg(long, value_name = "COL")]
    pub group: Option<String>,
    /// IQR multiplier of the outlier fences (1.5 usual, 3.0 extreme only).
    #[arg(long, default_value_t = 1.5)]
    pub trim: f64,
    /// Keep every ratio (no outlier trimming).
    #[arg(long)]
    pub no_trim: bool,
    /// Property class for the COD range: residential-homogeneous, residential-heterogeneous,
    /// income-urban, income-rural, vacant-land, other.
    #[arg(long, default_value = "residential-homogeneous")]
    pub class: String,
    /// Confidence level of the intervals.
    #[arg(long, default_value_t = 0.95)]
    pub level: f64,
    /// Also the ratio statistics in this many price tiers of equal count (2–20).
    #[arg(long, value_name = "N")]
    pub tiers: Option<usize>,
    /// What the tiers rank sales by.
    #[arg(long, value_enum, default_value_t = TierByArg::Blend)]
    pub tier_by: TierByArg,
    /// Also the value accuracy figures: share within ±10 % and ±20 % of
    /// price, forecast standard deviation, error bands.
    #[arg(long)]
    pub accuracy: bool,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// How to read the data file.
    #[command(flatten)]
    pub input: InputFlags,
    /// What to read from a database or workbook.
    #[command(flatten)]
    pub source: SourceFlags,
}

/// What price tiers rank sales by.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum TierByArg {
    /// The sale price.
    Price,
    /// The value.
    Value,
    /// ½ price + ½ value ÷ median ratio (the PRB's basis).
    Blend,
}

/// Arguments of `plumbline kernel`.
#[derive(Debug, Args)]
pub struct KernelArgs {
    /// The connection file written by the front end.
    #[arg(long, required_unless_present = "standby")]
    pub connection_file: Option<PathBuf>,
    /// Prepare an engine and wait for the next kernel to hand its connection
    /// file over (started by kernels themselves; see README, "Standby kernels").
    #[arg(long, hide = true, conflicts_with = "connection_file")]
    pub standby: bool,
}

/// Arguments of `plumbline install`.
#[derive(Debug, Args)]
pub struct InstallArgs {
    /// Install for the current user (the default).
    #[arg(long, conflicts_with = "prefix")]
    pub user: bool,
    /// Install under PREFIX/share/jupyter/kernels (e.g. a virtual environment).
    #[arg(long, value_name = "PREFIX")]
    pub prefix: Option<PathBuf>,
    /// Remove the kernelspec instead.
    #[arg(long)]
    pub uninstall: bool,
    /// Skip compiling the engine's dependency cache.
    #[arg(long)]
    pub no_warm: bool,
}

/// Arguments of `plumbline run`.
///
/// Cells run in order with the notebook's folder as the working directory; the
/// run stops at the first failing cell. The input notebook is never changed
/// unless `--in-place` is given.
#[derive(Debug, Args)]
pub struct RunArgs {
    /// The notebook to run (.ipynb, format 4).
    pub notebook: PathBuf,
    /// Set an input declared in the study's inputs cell (the code cell whose
    /// first line is `// plumbline: study inputs`) for this run; repeatable.
    #[arg(long = "set", value_name = "NAME=VALUE")]
    pub set: Vec<String>,
    /// Where to save the executed notebook [default: NOTEBOOK with `.run.ipynb`, beside it].
    #[arg(short = 'o', long, value_name = "OUT.ipynb")]
    pub output: Option<PathBuf>,
    /// Save the executed notebook over the input notebook.
    #[arg(long, conflicts_with = "output")]
    pub in_place: bool,
    /// Also write a standalone HTML report of the run here.
    #[arg(long, value_name = "REPORT.html")]
    pub html: Option<PathBuf>,
    /// Print no progress lines.
    #[arg(short = 'q', long)]
    pub quiet: bool,
}

/// Arguments of `plumbline diff`.
#[derive(Debug, Args)]
pub struct DiffArgs {
    /// The earlier run (`plumbline fit --format json` output, or an executed .ipynb).
    pub old: PathBuf,
    /// The later run.
    pub new: PathBuf,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
}

/// Arguments of `plumbline accuracy`.
#[derive(Debug, Args)]
pub struct AccuracyArgs {
    /// Folder holding the NIST StRD CSV files and `certified.json`.
    #[arg(long, default_value = "../shared/reference/nist-strd")]
    pub reference: PathBuf,
    /// Output format.
    #[arg(long, value_enum, default_value_t = Format::Text)]
    pub format: Format,
    /// Solver arithmetic.
    #[arg(long, value_enum, default_value_t = PrecisionArg::Auto)]
    pub precision: PrecisionArg,
}
