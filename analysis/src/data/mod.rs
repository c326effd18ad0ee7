//! Loading data into frames, with provenance and column profiles.
//!
//! * [`Frame`] — a polars `DataFrame` plus where it came from ([`Provenance`])
//!   and, for text files, the file line of every data row, so that an error can
//!   point at the exact line to fix.
//! * [`CsvOptions`] / [`load_csv`] — delimited text with delimiter, header,
//!   null markers and per-column type overrides.
//!   Streams the file into typed columns (numbers, integers, text, dates),
//!   in UTF-8, Latin-1 or Windows-1252.
//! * [`load_parquet`] — Apache Parquet through polars; [`load_arrow`] —
//!   Arrow IPC (Feather) files through polars.
//! * [`load_postgres`] — a query to a PostgreSQL server; [`load_sqlite`] — a
//!   table or query of an SQLite file or GeoPackage; [`load_workbook`] — a
//!   sheet of an Excel workbook. Each stamps its frame with what exactly was
//!   read ([`SourceStamp`]).
//! * [`NonFinite`] — what a frame does with NaN and infinite values where they
//!   are used (refuse, by default, or treat as missing); [`dates`] — calendar
//!   dates and the sale-date arithmetic of date terms.
//! * [`profile()`] — a per-column summary (type, missing, min/median/max, levels).
//! * [`Screen`] — rows kept by a stated rule, with a record of the rows set aside.
//! * [`MemoryBudget`] — the most memory one load or design may take, so that
//!   a file larger than memory ends in a message, not a killed process.
//! * [`RowBatches`] — a CSV or Parquet file, or a directory of them, read in
//!   bounded batches for fits of data larger than memory.

mod arrow_reader;
mod batches;
mod cells;
mod csv_reader;
pub mod dates;
mod decoder_guard;
mod frame;
#[cfg(feature = "sqlite")]
mod geopackage;
mod memory;
mod parquet_reader;
mod postgres_reader;
pub mod profile;
mod provenance;
mod screen;
#[cfg(feature = "sqlite")]
mod sqlite_reader;
mod text_encoding;
mod values;
mod workbook_reader;

pub use arrow_reader::load_arrow;
pub use batches::{fingerprint_files, RowBatches};
pub use csv_reader::{load_csv, ColumnType, CsvOptions};
pub use frame::Frame;
pub use memory::{MemoryBudget, MEMORY_LIMIT_VARIABLE};
pub use parquet_reader::{load_parquet, load_parquet_columns};
pub use postgres_reader::load_postgres;
pub use profile::{profile, ColumnProfile};
pub use provenance::{sha256_hex, GeometryRead, Provenance, SourceKind, SourceStamp};
pub use screen::{ExcludedRow, Screen};
#[cfg(feature = "sqlite")]
pub use sqlite_reader::{load_sqlite, SqlRead};
pub use text_encoding::TextEncoding;
pub use values::{parse_formatted_number, NonFinite};
pub use workbook_reader::load_workbook;

use crate::error::{Error, Result};
use std::path::Path;

/// Loads a file, choosing the reader from its extension: `.parquet` /
/// `.pq` through [`load_parquet`], `.csv` / `.txt` through [`load_csv`] with
/// default options, `.tsv` / `.tab` as tab-delimited text, `.arrow` /
/// `.feather` / `.ipc` through [`load_arrow`], `.xlsx` (its only sheet)
/// through [`load_workbook`], and `.sqlite` / `.sqlite3` / `.db` / `.gpkg`
/// (its only table) through [`load_sqlite`]. A workbook of several sheets or
/// a database of several tables asks for the one to read.
pub fn load(path: impl AsRef<Path>) -> Result<Frame> {
    let path = path.as_ref();
    let extension = path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase);
    match extension.as_deref() {
        Some("parquet") | Some("pq") => load_parquet(path),
        Some("csv") | Some("txt") => load_csv(path, &CsvOptions::default()),
        Some("tsv") | Some("tab") => load_csv(path, &CsvOptions { delimiter: b'\t', ..CsvOptions::default() }),
        Some("arrow") | Some("feather") | Some("ipc") => load_arrow(path),
        Some("xlsx") | Some("xlsm") => load_workbook(path, None),
        #[cfg(feature = "sqlite")]
        Some("sqlite") | Some("sqlite3") | Some("db") | Some("gpkg") => {
            load_sqlite(path, &sqlite_reader::only_table(path)?)
        }
        _ => Err(Error::UnknownFormat { path: path.to_path_buf() }),
    }
}

/// Reads a whole file, turning an I/O failure into an actionable error.
pub(crate) fn read_bytes(path: &Path) -> Result<Vec<u8>> {
    std::fs::read(path).map_err(|e| unreadable(path, e))
}

/// The error for a data file that cannot be opened or read.
pub(crate) fn unreadable(path: &Path, cause: std::io::Error) -> Error {
    Error::FileUnreadable {
        path: path.to_path_buf(),
        cause,
        cwd: std::env::current_dir().map(|d| d.display().to_string()).unwrap_or_else(|_| "?".into()),
    }
}
