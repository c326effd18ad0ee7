//! The one error type of the analysis crate.
//!
//! Every variant carries what a user needs to fix the input: the file, the
//! column, the row (1-based data row, and the file line where the source has
//! lines), the offending value, and a suggestion where one can be made.

use std::path::PathBuf;

/// Everything that can go wrong between a file on disk and a fitted model.
///
/// Non-exhaustive: new failure kinds arrive with new data sources, so match
/// with a wildcard arm. Causes from below (I/O, Parquet, JSON) are kept and
/// reachable through [`std::error::Error::source`].
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// The data file does not exist or cannot be opened.
    #[error("cannot open data file `{path}`: {cause}. Check the path (relative paths start from `{cwd}`).")]
    FileUnreadable {
        /// The path as given.
        path: PathBuf,
        /// The operating system's reason.
        #[source]
        cause: std::io::Error,
        /// The working directory relative paths start from.
        cwd: String,
    },

    /// A directory given as data holds no file read in batches.
    #[error("the directory `{path}` holds no `.csv` or `.parquet` file to read")]
    NoDataFiles {
        /// The directory, as given.
        path: PathBuf,
    },

    /// The file's extension names no format we read, and none was given.
    #[error("cannot tell the format of `{path}` from its extension; use a `.csv`, `.tsv`, `.txt`, `.parquet`, `.arrow`, `.xlsx`, `.sqlite` or `.gpkg` file, or load it with an explicit reader")]
    UnknownFormat {
        /// The file, as given.
        path: PathBuf,
    },

    /// A CSV record could not be read (bad quoting, invalid UTF-8, I/O).
    #[error("`{path}` line {line}: {reason}")]
    CsvMalformed {
        /// The file, as given.
        path: PathBuf,
        /// The 1-based line of the file, where the source has lines.
        line: u64,
        /// What went wrong.
        reason: String,
    },

    /// A CSV record has a different number of fields than the header.
    #[error("`{path}` line {line} has {found} fields but the header has {expected}; check for a stray delimiter or an unquoted text field")]
    CsvRagged {
        /// The file, as given.
        path: PathBuf,
        /// The 1-based line of the file, where the source has lines.
        line: u64,
        /// Fields in the header.
        expected: usize,
        /// Fields on the line.
        found: usize,
    },

    /// The file holds no header or no columns.
    #[error("`{path}` holds no columns; is it empty, or is the delimiter wrong (we used `{delimiter}`)?")]
    NoColumns {
        /// The file, as given.
        path: PathBuf,
        /// The field delimiter used.
        delimiter: char,
    },

    /// The same column name appears twice in a header.
    #[error("`{path}` has the column name `{name}` twice; rename one of them")]
    DuplicateColumn {
        /// The file, as given.
        path: PathBuf,
        /// The name as given.
        name: String,
    },

    /// A Parquet file could not be decoded.
    #[error("cannot read Parquet file `{path}`: {cause}")]
    ParquetUnreadable {
        /// The path as given.
        path: PathBuf,
        /// The decoder's reason.
        #[source]
        cause: polars::error::PolarsError,
    },

    /// A column named by the user is not in the frame.
    #[error("no column `{name}` in {source_label}{}; the columns are: {}", suggestion_text(.suggestions), .available.join(", "))]
    ColumnNotFound {
        /// The name as given.
        name: String,
        /// Where the frame came from.
        source_label: String,
        /// Close matches among the columns.
        suggestions: Vec<String>,
        /// Every column of the frame.
        available: Vec<String>,
    },

    /// A value that should be a number is not one.
    #[error("column `{column}` must be numeric, but data row {row}{} holds `{value}`; {}", line_text(*.line), .hint.clone().unwrap_or_else(|| "correct that value, or mark it missing with a null marker".into()))]
    NotNumeric {
        /// The column concerned.
        column: String,
        /// The 1-based data row (header excluded).
        row: usize,
        /// The 1-based line of the file, where the source has lines.
        line: Option<u64>,
        /// The offending value.
        value: String,
        /// What to do, when more specific than the default advice.
        hint: Option<String>,
    },

    /// A number the model uses is NaN or infinite (or was written beyond the
    /// range of a 64-bit float).
    #[error("column `{column}` holds a value that is not a finite number at data row {row}{}: {value}{}; correct it, or treat such values as missing (command line `--non-finite missing`; library `CsvOptions::non_finite_as_missing()` or `Frame::non_finite_as_missing()`)", line_text(*.line), overflow_note(*.value))]
    NonFinite {
        /// The column concerned.
        column: String,
        /// The 1-based data row (header excluded).
        row: usize,
        /// The 1-based line of the file, where the source has lines.
        line: Option<u64>,
        /// The offending value.
        value: f64,
    },

    /// A field of a text file is not valid in the file's encoding.
    #[error("`{path}` line {line}, {place}: byte {byte_in_field} of the field (0x{byte:02X}) is not valid UTF-8 (the field reads `{preview}`); the file is probably in an office program's encoding: load it with `--encoding windows-1252` (or `latin-1`; library: `CsvOptions::encoding(TextEncoding::Windows1252)`)")]
    NotUtf8 {
        /// The file, as given.
        path: PathBuf,
        /// The 1-based line of the file.
        line: u64,
        /// Which field of the line.
        place: String,
        /// 1-based position of the bad byte within the field.
        byte_in_field: usize,
        /// The bad byte.
        byte: u8,
        /// The field as far as it could be read.
        preview: String,
    },

    /// A value of a date column is not a date in the column's format.
    #[error("column `{column}` holds dates written as `{format}`, but data row {row}{} holds `{value}`; correct that value, or give the column's format (`--date-format {column}=FORMAT`, e.g. `%d/%m/%Y`)", line_text(*.line))]
    BadDate {
        /// The column concerned.
        column: String,
        /// The 1-based data row (header excluded).
        row: usize,
        /// The 1-based line of the file, where the source has lines.
        line: Option<u64>,
        /// The offending value.
        value: String,
        /// The date format expected (chrono `strftime` syntax).
        format: String,
    },

    /// A date column was used where numbers are needed.
    #[error("column `{column}` holds dates, not numbers; use it through a date term (months or days since a reference date, year, quarter or month of the year), e.g. `Term::months_since(\"{column}\", \"2023-01-01\")` or `months:{column}:2023-01-01`")]
    DatesNotNumbers {
        /// The column concerned.
        column: String,
    },

    /// A column used as dates does not hold dates.
    #[error("column `{column}` is used as a date but holds {found}; load it as a date column (`--column-type {column}=date`, or `--date-format {column}=FORMAT`)")]
    NotDates {
        /// The column concerned.
        column: String,
        /// The type the column holds instead.
        found: String,
    },

    /// A column the model needs has no value at all.
    #[error("column `{column}` is missing on every row, so it cannot be used in a model")]
    ColumnAllMissing {
        /// The column concerned.
        column: String,
    },

    /// A schema override names a type we do not know.
    #[error("unknown column type `{given}` for `{column}`; use one of: number, integer, text, date, formatted-number")]
    UnknownColumnType {
        /// The column concerned.
        column: String,
        /// The type name given.
        given: String,
    },

    /// A transform met a value outside its domain (e.g. log of a non-positive number).
    #[error("{transform} of column `{column}` needs {requirement}, but data row {row}{} holds {value}; drop or correct that row, or choose another transform", line_text(*.line))]
    TransformDomain {
        /// The transform applied.
        transform: String,
        /// The column concerned.
        column: String,
        /// What the value must satisfy.
        requirement: String,
        /// The 1-based data row (header excluded).
        row: usize,
        /// The 1-based line of the file, where the source has lines.
        line: Option<u64>,
        /// The offending value.
        value: f64,
    },

    /// A column to be standardized has no spread.
    #[error("column `{column}` is constant ({value}) over the rows used, so it cannot be {action}")]
    ConstantColumn {
        /// The column concerned.
        column: String,
        /// The one value the column holds.
        value: f64,
        /// What was to be done with the column.
        action: String,
    },

    /// The reference level asked for a category does not occur.
    #[error("reference level `{level}` does not occur in column `{column}` (levels: {})", .levels.join(", "))]
    UnknownLevel {
        /// The column concerned.
        column: String,
        /// The level asked for.
        level: String,
        /// The levels that occur.
        levels: Vec<String>,
    },

    /// A weight is zero, negative or not finite.
    #[error("weight column `{column}` must be positive and finite, but data row {row}{} holds {value}", line_text(*.line))]
    BadWeight {
        /// The column concerned.
        column: String,
        /// The 1-based data row (header excluded).
        row: usize,
        /// The 1-based line of the file, where the source has lines.
        line: Option<u64>,
        /// The offending value.
        value: f64,
    },

    /// The model specification itself is inconsistent.
    #[error("model specification: {0}")]
    Specification(String),

    /// Every row was dropped for missing values.
    #[error("no rows left to fit: every row misses at least one model column ({detail})")]
    AllRowsDropped {
        /// Which columns, and why.
        detail: String,
    },

    /// Fewer usable rows than coefficients.
    #[error("{rows} rows but {columns} coefficients to estimate; a least-squares fit needs more rows than coefficients (drop terms or add data)")]
    TooFewRows {
        /// Usable rows.
        rows: usize,
        /// Coefficients to estimate.
        columns: usize,
    },

    /// The state of a fit from pieces, received from another process or
    /// partition, cannot be read.
    #[error("the {kind} state of a fit from pieces cannot be read: {detail}")]
    DamagedState {
        /// Which state (coding, factor, residual sums).
        kind: String,
        /// What is wrong with it.
        detail: String,
    },

    /// The target does not vary, so there is nothing to explain.
    #[error("target `{target}` has the same value ({value}) on every row used; there is no variation to explain")]
    ConstantTarget {
        /// The target column.
        target: String,
        /// The one value the target holds.
        value: f64,
    },

    /// No column of the design survived the rank test.
    #[error("the design has no linearly independent column: {detail}")]
    SingularDesign {
        /// Which columns, and why.
        detail: String,
    },

    /// An argument outside its allowed range (confidence level, degree, …).
    #[error("{what} must be {requirement}, got {value}")]
    OutOfRange {
        /// What was checked.
        what: String,
        /// What the value must satisfy.
        requirement: String,
        /// The value given.
        value: String,
    },

    /// New data for prediction lacks what the model needs.
    #[error("prediction data: {0}")]
    Prediction(String),

    /// Two fits cannot be compared as asked.
    #[error("cannot compare these fits: {0}")]
    Comparison(String),

    /// A chart could not be drawn.
    #[error("could not draw the chart: {0}")]
    Plot(String),

    /// A chart that reads the data beside the fit was given another frame.
    #[error("the frame given ({given}) is not the one the model was fitted to ({fitted}); pass the frame the fit read, so that each residual is matched to its own sale")]
    FrameMismatch {
        /// The frame the model was fitted to.
        fitted: String,
        /// The frame passed.
        given: String,
    },

    /// A value a calculation needs on every row it uses is missing or not finite.
    #[error("data row {row}{} has no usable `{column}`, which {purpose} needs; fill it in, or leave the row out of the frame first", line_text(*.line))]
    MissingValue {
        /// The column concerned.
        column: String,
        /// The 1-based data row.
        row: usize,
        /// The 1-based line of the file, where the source has lines.
        line: Option<u64>,
        /// What needs the value.
        purpose: String,
    },

    /// A result could not be written as its machine-readable JSON document.
    #[error("could not write the {what} as JSON: {cause}")]
    Serialization {
        /// Which document.
        what: &'static str,
        /// The encoder's reason.
        #[source]
        cause: serde_json::Error,
    },

    /// A machine-readable document could not be read back as its type: not
    /// JSON, a field missing or of the wrong type, or a schema version this
    /// build does not know.
    #[error("cannot read {what}: {reason}")]
    Document {
        /// Which document, and where it came from.
        what: String,
        /// What is wrong with it, and what to do.
        reason: String,
    },

    /// A PostgreSQL server could not be reached, refused the login, rejected
    /// the query, or dropped the connection while the result was read. No
    /// frame is returned in any of these cases.
    #[error("PostgreSQL server {server}: could not {action}: {}{}", postgres_reason(.cause), postgres_hint(.cause))]
    Postgres {
        /// `host:port` and database, as connected to.
        server: String,
        /// What was being done (`connect`, `prepare the query`, `read the result`).
        action: &'static str,
        /// The driver's reason (the server's message, when it sent one).
        #[source]
        cause: postgres::Error,
    },

    /// A PostgreSQL connection string could not be understood.
    #[error("cannot understand the PostgreSQL connection `{given}`: {reason}; write it as `postgresql://USER@HOST:PORT/DATABASE` (the password in PGPASSWORD, or in the URL)")]
    PostgresAddress {
        /// The connection string, password removed.
        given: String,
        /// What is wrong with it.
        reason: String,
    },

    /// An SQLite file (or GeoPackage) could not be opened or queried.
    #[cfg(feature = "sqlite")]
    #[error("SQLite file `{path}`: could not {action}: {cause}")]
    Sqlite {
        /// The file, as given.
        path: PathBuf,
        /// What was being done.
        action: String,
        /// The library's reason.
        #[source]
        cause: rusqlite::Error,
    },

    /// A table named for reading is not in the database file.
    #[error("`{path}` has no table `{table}`; its tables are: {}", .available.join(", "))]
    TableNotFound {
        /// The file, as given.
        path: PathBuf,
        /// The table asked for.
        table: String,
        /// The tables it has (internal tables left out).
        available: Vec<String>,
    },

    /// A database or workbook holds several tables or sheets and none was named.
    #[error("`{path}` holds several {what}s ({}); name the one to read ({how})", .available.join(", "))]
    SourceAmbiguous {
        /// The file, as given.
        path: PathBuf,
        /// `table` or `sheet`.
        what: &'static str,
        /// The tables or sheets it has.
        available: Vec<String>,
        /// How to name one on the command line and in code.
        how: &'static str,
    },

    /// A database or workbook holds no table or sheet with data.
    #[error("`{path}` holds no {what} with data")]
    EmptySource {
        /// The file, as given.
        path: PathBuf,
        /// `table` or `sheet`.
        what: &'static str,
    },

    /// A query parameter does not fit the type the query gives it.
    #[error("query parameter {index} is `{value}`, but the query uses it as {expected}; {hint}")]
    QueryParameter {
        /// 1-based parameter number (`$1` is 1).
        index: usize,
        /// The value given.
        value: String,
        /// The type the query gives the parameter.
        expected: String,
        /// What to do.
        hint: String,
    },

    /// A query returns a column of a type we do not read.
    #[error("{source_label}: column `{column}` is of type {type_name}, which is not read; cast it in the query (e.g. `{column}::float8`, `{column}::date` or `{column}::text`)")]
    UnsupportedColumnType {
        /// Where the result came from.
        source_label: String,
        /// The column.
        column: String,
        /// Its type in the database.
        type_name: String,
    },

    /// An Excel workbook could not be opened or read.
    #[error("cannot read the workbook `{path}`: {reason}")]
    WorkbookUnreadable {
        /// The file, as given.
        path: PathBuf,
        /// The reader's reason.
        reason: String,
    },

    /// A sheet named for reading is not in the workbook.
    #[error("the workbook `{path}` has no sheet `{sheet}`; its sheets are: {}", .available.join(", "))]
    SheetNotFound {
        /// The file, as given.
        path: PathBuf,
        /// The sheet asked for.
        sheet: String,
        /// The sheets it has.
        available: Vec<String>,
    },

    /// A cell of a workbook cannot be read as data.
    #[error("the workbook `{path}`, sheet `{sheet}`, cell {cell}: {problem}")]
    WorkbookCell {
        /// The file, as given.
        path: PathBuf,
        /// The sheet.
        sheet: String,
        /// The cell in A1 notation.
        cell: String,
        /// What is wrong and what to do.
        problem: String,
    },

    /// An Apache Arrow IPC file could not be decoded.
    #[error("cannot read Arrow IPC file `{path}`: {cause}")]
    ArrowUnreadable {
        /// The file, as given.
        path: PathBuf,
        /// The decoder's reason.
        #[source]
        cause: polars::error::PolarsError,
    },

    /// A load or a design would take more memory than the budget allows
    /// (see [`crate::data::MemoryBudget`]); refused before the memory is taken.
    #[error("{what} would need about {} of memory, more than the {} one step may take ({budget_source}); {advice}", bytes_text(*.needed), bytes_text(*.budget))]
    OverMemory {
        /// What would take the memory, e.g. "reading `sales.csv`".
        what: String,
        /// The estimate, in bytes.
        needed: u64,
        /// The budget, in bytes.
        budget: u64,
        /// Where the budget came from.
        budget_source: String,
        /// How to do the same with less memory.
        advice: String,
    },

    /// Reference data for an accuracy check is missing or malformed.
    #[error("reference data: {0}")]
    ReferenceData(String),

    /// Polars reported an error while building or reading a frame.
    #[error("data frame error: {0}")]
    Frame(#[from] polars::error::PolarsError),
}

/// The server's own message when it sent one (the driver's `Display` says
/// only "db error"), else the driver's reason and its cause.
fn postgres_reason(cause: &postgres::Error) -> String {
    match cause.as_db_error() {
        Some(db) => {
            let mut text = db.message().to_string();
            if let Some(detail) = db.detail() {
                text.push_str(&format!(" ({detail})"));
            }
            if let Some(hint) = db.hint() {
                text.push_str(&format!("; the server suggests: {hint}"));
            }
            text
        }
        None => match std::error::Error::source(cause) {
            Some(inner) => format!("{cause} ({inner})"),
            None => cause.to_string(),
        },
    }
}

/// What to do about a PostgreSQL failure, by its kind.
fn postgres_hint(cause: &postgres::Error) -> &'static str {
    use postgres::error::SqlState;
    match cause.code() {
        Some(code) if *code == SqlState::INVALID_PASSWORD || *code == SqlState::INVALID_AUTHORIZATION_SPECIFICATION => {
            ". Check the user and password (in the URL, or in PGPASSWORD)"
        }
        Some(code) if *code == SqlState::ADMIN_SHUTDOWN || *code == SqlState::CRASH_SHUTDOWN => {
            ". The server closed the connection while the result was being read; nothing was loaded. Rerun when the server is back"
        }
        Some(code) if *code == SqlState::INVALID_CATALOG_NAME => ". Check the database name at the end of the URL",
        Some(_) => ". Check the query (run it in the database's own client to see it fail the same way)",
        None if cause.is_closed() => {
            ". The connection closed while the result was being read; nothing was loaded. Rerun when the server is back"
        }
        None => ". Check that the server is running and that host and port are right",
    }
}

fn suggestion_text(suggestions: &[String]) -> String {
    match suggestions {
        [] => String::new(),
        [one] => format!(" — did you mean `{one}`?"),
        many => format!(" — did you mean one of `{}`?", many.join("`, `")),
    }
}

fn overflow_note(value: f64) -> &'static str {
    if value.is_infinite() {
        " (an infinite value, or a number beyond ±1.8e308 written in the file)"
    } else {
        ""
    }
}

/// Bytes as people read them: `1.5 GB`, `820 MB`, `12 kB` (powers of 1024,
/// as memory is counted).
fn bytes_text(bytes: u64) -> String {
    let b = bytes as f64;
    let (gib, mib) = ((1u64 << 30) as f64, (1u64 << 20) as f64);
    if b >= gib {
        format!("{:.1} GB", b / gib)
    } else if b >= mib {
        format!("{:.0} MB", b / mib)
    } else {
        format!("{:.0} kB", (b / 1024.0).max(1.0))
    }
}

fn line_text(line: Option<u64>) -> String {
    line.map(|l| format!(" (file line {l})")).unwrap_or_default()
}

/// Shorthand for results of this crate.
pub type Result<T, E = Error> = std::result::Result<T, E>;
