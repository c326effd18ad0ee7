//! `plumbline fit`: one model, one data file, a report on stdout.

use super::CommandError;
use crate::cli::{
    CoordinatesArg, CovarianceArg, FitArgs, Format, InputFlags, KernelArg, PrecisionArg, SourceFlags, SpatialFlags,
};
use plumbline::diagnose::SpatialOptions;
use plumbline::documents::{to_pretty_json, FitDiagnostics, FitDocument, Versioned};
use plumbline::prelude::*;
use std::collections::BTreeMap;

/// Splits `COL<sep>VALUE`, naming the flag in the error.
pub(crate) fn split_pair<'a>(
    text: &'a str,
    separator: char,
    flag: &str,
    shape: &str,
) -> Result<(&'a str, &'a str), CommandError> {
    text.split_once(separator)
        .map(|(a, b)| (a.trim(), b.trim()))
        .filter(|(a, b)| !a.is_empty() && !b.is_empty())
        .ok_or_else(|| CommandError::Usage(format!("--{flag} expects {shape}, got `{text}`")))
}

fn degree(text: &str, flag: &str) -> Result<(String, u32), CommandError> {
    let (column, degree) = split_pair(text, ':', flag, "COL:DEGREE such as `age:2`")?;
    let degree = degree
        .parse::<u32>()
        .map_err(|_| CommandError::Usage(format!("--{flag}: the degree in `{text}` must be a whole number")))?;
    Ok((column.to_string(), degree))
}

/// The CSV options the flags describe.
pub fn csv_options(args: &InputFlags) -> Result<CsvOptions, CommandError> {
    let delimiter = match args.delimiter.as_str() {
        "\\t" | "tab" => b'\t',
        d if d.len() == 1 => d.as_bytes()[0],
        d => return Err(CommandError::Usage(format!("--delimiter must be one character (or `\\t`), got `{d}`"))),
    };
    let mut options = CsvOptions { delimiter, ..CsvOptions::default() };
    for marker in &args.null_markers {
        options = options.null_marker(marker.clone());
    }
    for pair in &args.column_types {
        let (column, ty) = split_pair(pair, '=', "column-type", "COL=TYPE such as `parcel=text`")?;
        let ty: ColumnType = ty.parse().map_err(|given: String| {
            CommandError::Analysis(Error::UnknownColumnType { column: column.to_string(), given })
        })?;
        options = options.column_type(column, ty);
    }
    for pair in &args.date_formats {
        let (column, format) = split_pair(pair, '=', "date-format", "COL=FORMAT such as `sale_date=%d/%m/%Y`")?;
        options = options.date_format(column, format);
    }
    options.encoding = args.encoding.parse().map_err(CommandError::Usage)?;
    options.non_finite = non_finite_rule(args)?;
    Ok(options)
}

/// The `--non-finite` rule, for every source type.
pub fn non_finite_rule(args: &InputFlags) -> Result<NonFinite, CommandError> {
    args.non_finite.parse().map_err(|e: String| CommandError::Usage(format!("--non-finite: {e}")))
}

/// The model the flags describe.
pub fn model_spec(args: &FitArgs) -> Result<ModelSpec, CommandError> {
    let mut spec = args.model.base_spec();
    let references: BTreeMap<&str, &str> = args
        .reference
        .iter()
        .map(|r| split_pair(r, '=', "reference", "COL=LEVEL such as `district=Tidewright Quay`"))
        .collect::<Result<_, _>>()?;
    for column in references.keys() {
        if !args.category.iter().any(|c| c == column) {
            return Err(CommandError::Usage(format!(
                "--reference names `{column}`, which is not listed in --category"
            )));
        }
    }
    let category_term = |column: &str| {
        let term = Term::category(column);
        match references.get(column) {
            Some(level) => term.reference(*level),
            None => term,
        }
    };
    let side = |column: &str| {
        if args.category.iter().any(|c| c == column) {
            category_term(column)
        } else {
            Term::numeric(column)
        }
    };
    for column in args.terms.iter().filter(|c| !c.is_empty()) {
        spec = spec.term(Term::numeric(column.trim()));
    }
    for text in &args.poly {
        let (column, d) = degree(text, "poly")?;
        spec = spec.term(Term::numeric(column).polynomial(d));
    }
    for text in &args.orthogonal_poly {
        let (column, d) = degree(text, "orthogonal-poly")?;
        spec = spec.term(Term::numeric(column).orthogonal_polynomial(d));
    }
    for column in &args.log {
        spec = spec.term(Term::numeric(column.trim()).log());
    }
    for column in &args.center {
        spec = spec.term(Term::numeric(column.trim()).center());
    }
    for column in &args.standardize {
        spec = spec.term(Term::numeric(column.trim()).standardize());
    }
    for column in args.category.iter().filter(|c| !c.is_empty()) {
        spec = spec.term(category_term(column.trim()));
    }
    for text in &args.interact {
        let (a, b) = split_pair(text, '*', "interact", "A*B such as `living_area*district`")?;
        spec = spec.term(side(a).times(side(b)));
    }
    for text in &args.location_terms {
        for term in plumbline::model::parse_term_list(text)? {
            if !matches!(term, Term::Distance { .. }) {
                return Err(CommandError::Usage(format!(
                    "--location-term expects a distance term such as `dist:x:y:4.5:3.0:Lantern Green` (or `geodist:LON:LAT:PLON:PLAT:NAME` for degrees), got `{text}`"
                )));
            }
            spec = spec.term(term);
        }
    }
    for text in &args.date_terms {
        for term in plumbline::model::parse_term_list(text)? {
            if !matches!(term, Term::Date { .. }) {
                return Err(CommandError::Usage(format!(
                    "--date-term expects a date term such as `months:sale_date:2023-01-01` or `quarter:sale_date`, got `{text}`"
                )));
            }
            spec = spec.term(term);
        }
    }
    Ok(spec)
}

/// The covariance estimator the flags describe (`--cluster` wins over `--cov`).
pub fn covariance(cov: CovarianceArg, cluster: Option<&String>) -> CovarianceKind {
    match (cluster, cov) {
        (Some(c), _) => CovarianceKind::Cluster(c.clone()),
        (None, CovarianceArg::Classical) => CovarianceKind::Classical,
        (None, CovarianceArg::Hc0) => CovarianceKind::Hc0,
        (None, CovarianceArg::Hc1) => CovarianceKind::Hc1,
        (None, CovarianceArg::Hc2) => CovarianceKind::Hc2,
        (None, CovarianceArg::Hc3) => CovarianceKind::Hc3,
    }
}

/// The fit options the flags describe.
pub fn fit_options(args: &FitArgs) -> FitOptions {
    FitOptions {
        covariance: covariance(args.cov, args.cluster.as_ref()),
        precision: precision(args.precision),
        rank_tolerance: None,
    }
}

/// Maps the command-line precision flag to the library's.
pub fn precision(arg: PrecisionArg) -> Precision {
    match arg {
        PrecisionArg::Auto => Precision::Auto,
        PrecisionArg::Double => Precision::Double,
        PrecisionArg::Extended => Precision::Extended,
    }
}

/// Whether `data` names a PostgreSQL server rather than a file.
fn is_postgres(data: &str) -> bool {
    data.starts_with("postgresql://") || data.starts_with("postgres://")
}

/// Loads the sales from a file or a server: text files with the input flags,
/// databases and workbooks with the source flags (`None` for a second file,
/// such as `--predict`'s, which is always read whole). A source flag that
/// does not apply to the source is refused rather than ignored.
pub fn load_with_flags(
    data: &std::path::Path,
    args: &InputFlags,
    source: Option<&SourceFlags>,
) -> Result<Frame, CommandError> {
    load_columns_with_flags(data, args, source, None)
}

/// The frame columns a fit with these flags reads: the model's (target,
/// terms, weights) and those of `--cluster`, `--id`, `--spatial-check`,
/// `--location-groups` and `--by`.
fn columns_for_fit(args: &FitArgs, spec: &ModelSpec) -> Vec<String> {
    let (numbers, labels) = plumbline::model::design::columns_read(spec);
    let mut columns: Vec<String> = numbers.into_iter().chain(labels).collect();
    let spatial: Vec<String> =
        args.spatial.spatial_check.iter().flat_map(|pair| pair.split(',').map(|c| c.trim().to_string())).collect();
    let extra = [&args.cluster, &args.id, &args.spatial.location_groups, &args.by];
    for column in extra.into_iter().flatten().cloned().chain(spatial) {
        if !columns.contains(&column) {
            columns.push(column);
        }
    }
    columns
}

/// Loads the sales for a fit: as [`load_with_flags`], but a columnar file
/// (Parquet) gives only the columns the fit reads (`columns_for_fit`).
pub fn load_for_fit(args: &FitArgs, spec: &ModelSpec) -> Result<Frame, CommandError> {
    load_columns_with_flags(&args.data, &args.input, Some(&args.source), Some(&columns_for_fit(args, spec)))
}

/// [`load_with_flags`], reading only `columns` where the format allows it.
pub(crate) fn load_columns_with_flags(
    data: &std::path::Path,
    args: &InputFlags,
    source: Option<&SourceFlags>,
    columns: Option<&[String]>,
) -> Result<Frame, CommandError> {
    let shown = data.to_string_lossy();
    let extension = data.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase();
    let kind = if is_postgres(&shown) {
        "postgres"
    } else {
        match extension.as_str() {
            "sqlite" | "sqlite3" | "db" | "gpkg" => "sqlite",
            "xlsx" | "xlsm" => "workbook",
            "parquet" | "pq" => "parquet",
            "arrow" | "feather" | "ipc" => "arrow",
            _ => "text",
        }
    };
    if let Some(flags) = source {
        let refuse = |flag: &str, applies: &str| {
            Err(CommandError::Usage(format!("{flag} applies to {applies}, not to `{shown}`")))
        };
        if flags.query.is_some() && !matches!(kind, "postgres" | "sqlite") {
            return refuse("--query", "a PostgreSQL server or an SQLite file");
        }
        if !flags.parameters.is_empty() && flags.query.is_none() {
            return Err(CommandError::Usage("--param gives a value to a --query parameter; add the --query".into()));
        }
        if flags.table.is_some() && kind != "sqlite" {
            return refuse("--table", "an SQLite file or GeoPackage");
        }
        if flags.table.is_some() && flags.query.is_some() {
            return Err(CommandError::Usage("give either --table or --query, not both".into()));
        }
        if flags.sheet.is_some() && kind != "workbook" {
            return refuse("--sheet", "an Excel workbook (.xlsx)");
        }
    }
    let rule = non_finite_rule(args)?;
    let frame = match kind {
        "postgres" => {
            let query = source.and_then(|f| f.query.as_deref()).ok_or_else(|| {
                CommandError::Usage(format!(
                    "`{}` is a PostgreSQL server; say what to read with --query \"SELECT …\"",
                    shown.split('@').next_back().unwrap_or("")
                ))
            })?;
            let parameters: Vec<&str> =
                source.map(|f| f.parameters.iter().map(String::as_str).collect()).unwrap_or_default();
            load_postgres(&shown, query, &parameters)?
        }
        "sqlite" => match source {
            Some(SourceFlags { table: Some(table), .. }) => load_sqlite(data, &SqlRead::table(table))?,
            Some(SourceFlags { query: Some(query), parameters, .. }) => {
                load_sqlite(data, &SqlRead::Query { sql: query.clone(), parameters: parameters.clone() })?
            }
            _ => load(data)?,
        },
        "workbook" => load_workbook(data, source.and_then(|f| f.sheet.as_deref()))?,
        "parquet" => match columns {
            Some(columns) => plumbline::data::load_parquet_columns(data, columns)?,
            None => load_parquet(data)?,
        },
        "arrow" => load_arrow(data)?,
        _ => return Ok(load_csv(data, &csv_options(args)?)?),
    };
    Ok(frame.with_non_finite(rule))
}

/// The spatial check the flags ask for, if any.
fn spatial_options(flags: &SpatialFlags, local: bool) -> Result<Option<SpatialOptions>, CommandError> {
    let Some(columns) = &flags.spatial_check else {
        if flags.neighbours.is_some()
            || flags.band.is_some()
            || flags.binary_weights
            || flags.location_groups.is_some()
            || (flags.coordinates != CoordinatesArg::Planar && !local)
        {
            return Err(CommandError::Usage(
                "--neighbours, --band, --binary-weights, --location-groups and --coordinates shape the spatial check; add --spatial-check X,Y".into(),
            ));
        }
        return Ok(None);
    };
    let (x, y) = split_pair(columns, ',', "spatial-check", "X,Y such as `x,y`")?;
    let mut options = SpatialOptions::new(x, y);
    if flags.coordinates == CoordinatesArg::Geographic {
        options = options.geographic();
    }
    if let Some(k) = flags.neighbours {
        options = options.nearest(k);
    }
    if let Some(distance) = flags.band {
        options = options.within(distance);
    }
    if flags.binary_weights {
        options = options.binary();
    }
    if let Some(column) = &flags.location_groups {
        options = options.grouped_by(column.as_str());
    }
    Ok(Some(options))
}

/// Runs `plumbline fit`; returns the report to print. Nothing is printed
/// unless every step succeeded, so a failure never leaves partial JSON.
pub fn run(args: &FitArgs) -> Result<String, CommandError> {
    if let Some(column) = &args.by {
        return run_by_group(args, column);
    }
    if let Some(places) = &args.local {
        return run_local(args, places);
    }
    if args.variation_test.is_some() {
        return Err(CommandError::Usage("--variation-test applies to a local fit; add --local X,Y".into()));
    }
    if let Some(batch_rows) = batch_rows(args) {
        return run_in_batches(args, batch_rows);
    }
    let spec = model_spec(args)?;
    let frame = load_for_fit(args, &spec)?;
    let model = fit_with(&frame, &spec, &fit_options(args))?;
    let predictions = match &args.predict {
        Some(path) => Some(model.predict(&load_with_flags(path, &args.input, None)?, args.level)?),
        None => None,
    };
    let diagnostics = if args.diagnose {
        Some((model.assumption_tests(), model.collinearity(), model.flagged_rows(&frame, args.id.as_deref())?))
    } else {
        None
    };
    let spatial = match spatial_options(&args.spatial, args.local.is_some())? {
        Some(options) => Some(model.spatial_check(&frame, &options)?),
        None => None,
    };
    match args.format {
        Format::Text => {
            let mut text = plumbline::render::fit_text(&model, args.level)?;
            if let Some(check) = &spatial {
                use plumbline::render::Report;
                text.push('\n');
                text.push_str(check.bundle().get("text/plain").unwrap_or_default());
            }
            if let Some((tests, collinearity, flags)) = &diagnostics {
                text.push('\n');
                text.push_str(&plumbline::render::tests_text(tests));
                text.push('\n');
                text.push_str(&plumbline::render::collinearity_text(collinearity));
                text.push('\n');
                text.push_str(&plumbline::render::flags_text(flags, 25));
            }
            if let Some(p) = &predictions {
                text.push('\n');
                text.push_str(&plumbline::render::predictions_text(p));
            }
            Ok(text)
        }
        Format::Html => {
            use plumbline::render::{AssumptionTests, Report};
            let html_of = |b: plumbline::render::MimeBundle| b.get("text/html").unwrap_or_default().to_string();
            let mut cards = vec![plumbline::render::fit_html(&model, args.level)?];
            if let Some((tests, collinearity, flags)) = &diagnostics {
                cards.push(html_of(AssumptionTests(tests.clone()).bundle()));
                cards.push(html_of(collinearity.bundle()));
                cards.push(html_of(flags.bundle()));
            }
            if let Some(p) = &predictions {
                cards.push(html_of(p.bundle()));
            }
            if let Some(check) = &spatial {
                cards.push(html_of(check.bundle()));
            }
            Ok(plumbline::render::html::page(&format!("Fit of {}", model.spec().target_label()), &cards))
        }
        Format::Json => {
            let document = FitDocument {
                summary: model.summary(args.level)?,
                predictions,
                diagnostics: diagnostics.map(|(tests, collinearity, flagged_rows)| FitDiagnostics {
                    tests,
                    collinearity,
                    flagged_rows,
                }),
                influence: args.influence.then(|| model.influence()),
                spatial,
            };
            Ok(to_pretty_json(&document, "fit document")?)
        }
    }
}

/// Batch rows when the flags ask for a fit in batches (`--batch-rows`, or a directory).
pub fn batch_rows(args: &FitArgs) -> Option<usize> {
    args.batch_rows.or_else(|| args.data.is_dir().then_some(DEFAULT_BATCH_ROWS))
}

/// The models by group the flags describe (`--by COL`), in memory or in batches.
pub fn fit_by_group(args: &FitArgs, column: &str) -> Result<StratifiedFit, CommandError> {
    let refused = [
        (args.predict.is_some(), "--predict"),
        (args.diagnose, "--diagnose"),
        (args.influence, "--influence"),
        (args.spatial.spatial_check.is_some(), "--spatial-check"),
    ];
    if let Some((_, flag)) = refused.iter().find(|(given, _)| *given) {
        return Err(CommandError::Usage(format!(
            "{flag} applies to one model; with --by, fit the group of interest alone (filter its rows) for {flag}"
        )));
    }
    let spec = model_spec(args)?;
    let options = fit_options(args);
    Ok(match batch_rows(args) {
        Some(rows) => {
            refuse_in_memory_flags(args)?;
            plumbline::strata::fit_batches_by(&args.data, &spec, &options, rows, non_finite_rule(&args.input)?, column)?
        }
        None => {
            let frame = load_for_fit(args, &spec)?;
            plumbline::strata::fit_by_with(&frame, &spec, column, &options)?
        }
    })
}

/// `plumbline fit --by COL`: the models by group as text, HTML or the
/// `plumbline.stratified-fit` document.
fn run_by_group(args: &FitArgs, column: &str) -> Result<String, CommandError> {
    report_by_group(args, &fit_by_group(args, column)?)
}

/// Models by group as the flags ask: text, HTML or the set document.
pub fn report_by_group(args: &FitArgs, fitted: &StratifiedFit) -> Result<String, CommandError> {
    let column = fitted.column();
    let summary = fitted.summary(args.level)?;
    Ok(match args.format {
        Format::Text => plumbline::render::stratified_text(&summary),
        Format::Html => plumbline::render::html::page(
            &format!("Models by {column}"),
            &[plumbline::render::stratified_html(&summary)],
        ),
        Format::Json => to_pretty_json(&Versioned::new(summary), "stratified-fit document")?,
    })
}

/// `plumbline fit --local X,Y`: geographically weighted regression, as text,
/// HTML or the `plumbline.local-fit` document.
fn run_local(args: &FitArgs, places: &str) -> Result<String, CommandError> {
    let fitted = fit_local_with_flags(args, local_options(args, places)?)?;
    Ok(match args.format {
        Format::Text => plumbline::render::local_text(fitted.summary()),
        Format::Html => plumbline::render::html::page("Local fit", &[plumbline::render::local_html(fitted.summary())]),
        Format::Json => to_pretty_json(&Versioned::new(fitted.summary().clone()), "local-fit document")?,
    })
}

/// The local fit the flags describe (with its variation test when asked).
pub fn fit_local_with_flags(
    args: &FitArgs,
    options: plumbline::local::LocalOptions,
) -> Result<plumbline::local::LocalFit, CommandError> {
    let spec = model_spec(args)?;
    let frame = load_for_fit(args, &spec)?;
    let fitted = plumbline::local::fit_local(&frame, &spec, &options)?;
    Ok(match args.variation_test {
        Some(shuffles) => fitted.with_variation_test(shuffles, args.shuffle_seed)?,
        None => fitted,
    })
}

/// The local-fit options the flags describe (`--local X,Y` and its flags).
pub fn local_options(args: &FitArgs, places: &str) -> Result<plumbline::local::LocalOptions, CommandError> {
    use plumbline::local::{Bandwidth, BandwidthChoice, Kernel, LocalOptions};
    let refused = [
        (args.predict.is_some(), "--predict"),
        (args.diagnose, "--diagnose"),
        (args.influence, "--influence"),
        (args.spatial.spatial_check.is_some(), "--spatial-check (the local fit reports Moran's I of both models)"),
        (args.batch_rows.is_some() || args.data.is_dir(), "--batch-rows or a directory"),
        (args.by.is_some(), "--by"),
    ];
    if let Some((_, flag)) = refused.iter().find(|(given, _)| *given) {
        return Err(CommandError::Usage(format!("{flag} does not combine with --local")));
    }
    let (x, y) = split_pair(places, ',', "local", "X,Y such as `x,y` or `Longitude,Latitude`")?;
    let mut options = LocalOptions::new(x, y);
    if args.spatial.coordinates == CoordinatesArg::Geographic {
        options = options.geographic();
    }
    if let Some(column) = &args.spatial.location_groups {
        options = options.labelled_by(column.as_str());
    }
    options.kernel = match args.kernel {
        KernelArg::AdaptiveBisquare => Kernel::AdaptiveBisquare,
        KernelArg::FixedGaussian => Kernel::FixedGaussian,
    };
    options.bandwidth = match (args.bandwidth.trim(), options.kernel) {
        ("aicc", _) => BandwidthChoice::LeastAicc,
        (text, Kernel::AdaptiveBisquare) => {
            BandwidthChoice::Given(Bandwidth::Neighbours(text.parse().map_err(|_| {
                CommandError::Usage(format!(
                    "--bandwidth for the adaptive kernel is a whole number of nearest sales (or `aicc`), got `{text}`"
                ))
            })?))
        }
        (text, Kernel::FixedGaussian) => BandwidthChoice::Given(Bandwidth::Distance(text.parse().map_err(|_| {
            CommandError::Usage(format!("--bandwidth for the Gaussian kernel is a distance (or `aicc`), got `{text}`"))
        })?)),
    };
    Ok(options)
}

/// Rows per batch when a directory is fitted without `--batch-rows`: about
/// 8 bytes × columns × 10⁶ of numbers per batch (160 MB at 20 columns).
const DEFAULT_BATCH_ROWS: usize = 1_000_000;

/// `plumbline fit` on data read in batches (`--batch-rows`, or a directory).
fn run_in_batches(args: &FitArgs, batch_rows: usize) -> Result<String, CommandError> {
    check_fit_from_pieces(args)?;
    let spec = model_spec(args)?;
    let fit =
        plumbline::fit::fit_batches(&args.data, &spec, &fit_options(args), batch_rows, non_finite_rule(&args.input)?)?;
    report_assembled(args, &fit)
}

/// Refuses the flags a fit assembled from pieces (row batches, or a query
/// engine's partitions) cannot honour: row-level results, in-memory sources
/// and text-file options, HTML.
pub fn check_fit_from_pieces(args: &FitArgs) -> Result<(), CommandError> {
    let refused = [
        (args.predict.is_some(), "--predict"),
        (args.diagnose, "--diagnose"),
        (args.influence, "--influence"),
        (args.spatial.spatial_check.is_some(), "--spatial-check"),
    ];
    if let Some((_, flag)) = refused.iter().find(|(given, _)| *given) {
        return Err(CommandError::Usage(format!(
            "{flag} needs the data in memory, but this fit reads it in batches (--batch-rows, or a directory); \
             load a single file without --batch-rows, or leave the flag out"
        )));
    }
    refuse_in_memory_flags(args)?;
    if args.format == Format::Html {
        return Err(CommandError::Usage(
            "a fit read in batches is reported as text or JSON (--format text|json)".into(),
        ));
    }
    Ok(())
}

/// A fit assembled from pieces as the flags ask: text or the fit document.
pub fn report_assembled(args: &FitArgs, fit: &plumbline::fit::AssembledFit) -> Result<String, CommandError> {
    match args.format {
        Format::Json => Ok(to_pretty_json(&FitDocument::from(fit.summary(args.level)?), "fit document")?),
        _ => Ok(plumbline::render::assembled_fit_text(fit, args.level)?),
    }
}

/// Refuses the source and text-file flags a reader of batches cannot honour.
fn refuse_in_memory_flags(args: &FitArgs) -> Result<(), CommandError> {
    let refused = [
        (
            args.source.query.is_some() || args.source.table.is_some() || args.source.sheet.is_some(),
            "--query/--table/--sheet",
        ),
        (
            args.input.delimiter != ","
                || !args.input.null_markers.is_empty()
                || !args.input.column_types.is_empty()
                || !args.input.date_formats.is_empty()
                || args.input.encoding != "utf-8",
            "the text-file flags (--delimiter, --null, --column-type, --date-format, --encoding)",
        ),
    ];
    match refused.iter().find(|(given, _)| *given) {
        Some((_, flag)) => Err(CommandError::Usage(format!(
            "{flag} needs the data in memory, but this fit reads it in batches (--batch-rows, or a directory); \
             load a single file without --batch-rows, or leave the flag out"
        ))),
        None => Ok(()),
    }
}
