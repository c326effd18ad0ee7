//! Where a frame came from: enough to tell, months later, whether a rerun saw
//! the same data.

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

/// The provenance stamp every loaded frame carries.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Provenance {
    /// The path the data was read from, as given by the user, or a label such
    /// as `(built in memory)` for frames made in code.
    pub path: String,
    /// Lower-case hex SHA-256 of the file's bytes (FIPS 180-4); empty for
    /// frames built in memory.
    pub sha256: String,
    /// Data rows (header excluded).
    pub rows: usize,
    /// Columns.
    pub cols: usize,
    /// When the file was read, UTC, RFC 3339 to the second.
    pub loaded_at: String,
    /// For a database, a workbook sheet or an Arrow file: what exactly was
    /// read. Absent for CSV and Parquet files, where the path and the hash of
    /// the file's bytes say it all.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub source: Option<SourceStamp>,
}

/// The kind of source a frame was read from, beyond a CSV or Parquet file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum SourceKind {
    /// A query to a PostgreSQL server.
    Postgresql,
    /// A table or query of an SQLite file (a GeoPackage is one).
    Sqlite,
    /// A sheet of an Excel workbook (`.xlsx`).
    Workbook,
    /// An Apache Arrow IPC file (`.arrow`, `.feather`).
    ArrowIpc,
}

/// What was read from a database, a workbook or an Arrow file: enough to read
/// the same thing again and to tell whether it changed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct SourceStamp {
    /// The kind of source.
    pub kind: SourceKind,
    /// PostgreSQL: `host:port` (or the socket directory) of the server.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub server: Option<String>,
    /// PostgreSQL: the database name.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub database: Option<String>,
    /// PostgreSQL: the user connected as (never the password).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub user: Option<String>,
    /// The query text, as sent.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub query: Option<String>,
    /// The query's parameters (`$1`, `$2`, … or `?1`, `?2`, …), as given.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub parameters: Vec<String>,
    /// SQLite: the table read whole.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub table: Option<String>,
    /// Workbook: the sheet read.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sheet: Option<String>,
    /// What `sha256` is the hash of: `file bytes`, or `result values` (the
    /// canonical encoding of `data::cells`, the same for the same rows
    /// whatever server or file they came from).
    pub hash_of: String,
    /// Columns of the source that were not read (e.g. a GeoPackage's
    /// geometry, held as binary), so that their absence is on record.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub not_read: Vec<String>,
    /// GeoPackage geometry columns read as places: each one's coordinate
    /// columns and spatial reference system (fit document version 4).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub geometry: Vec<GeometryRead>,
}

/// A GeoPackage geometry column read as one place per row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct GeometryRead {
    /// The geometry column.
    pub column: String,
    /// The columns its places were written to (`geom_lon`, `geom_lat` for
    /// degrees; `geom_x`, `geom_y` otherwise).
    pub place_columns: (String, String),
    /// What a place is: `point`, or the centroid of the shape (`polygon
    /// centroid`, …), by the geometry types met.
    pub place: String,
    /// The spatial reference system as the file names it (`EPSG:4326 WGS 84
    /// geodetic`), or `undefined` when the file gives none.
    pub srs: String,
    /// Whether the coordinates are longitude and latitude in degrees (a
    /// geographic system), so that distances need `--coordinates geographic`.
    pub degrees: bool,
}

/// `hash_of` for sources hashed by their bytes.
pub const HASH_OF_FILE_BYTES: &str = "file bytes";
/// `hash_of` for sources hashed by the values read.
pub const HASH_OF_RESULT_VALUES: &str = "result values";

impl SourceStamp {
    /// A stamp of `kind` with every detail empty; fill in what applies.
    pub fn new(kind: SourceKind, hash_of: &str) -> Self {
        Self {
            kind,
            server: None,
            database: None,
            user: None,
            query: None,
            parameters: Vec::new(),
            table: None,
            sheet: None,
            hash_of: hash_of.to_string(),
            not_read: Vec::new(),
            geometry: Vec::new(),
        }
    }
}

impl Provenance {
    /// Stamps bytes read from `path`.
    pub fn for_file(path: &std::path::Path, bytes: &[u8], rows: usize, cols: usize) -> Self {
        Self {
            path: path.display().to_string(),
            sha256: sha256_hex(bytes),
            rows,
            cols,
            loaded_at: now_utc(),
            source: None,
        }
    }

    /// Stamps a file whose bytes were hashed while they were streamed.
    pub(crate) fn for_file_hash(path: &std::path::Path, sha256: String, rows: usize, cols: usize) -> Self {
        Self { path: path.display().to_string(), sha256, rows, cols, loaded_at: now_utc(), source: None }
    }

    /// Stamps a frame that was built in code rather than read from a file.
    pub fn in_memory(label: &str, rows: usize, cols: usize) -> Self {
        Self { path: label.to_string(), sha256: String::new(), rows, cols, loaded_at: now_utc(), source: None }
    }

    /// Stamps a frame read from a database, a workbook or an Arrow file.
    /// `place` is the file path, or the server address for PostgreSQL.
    pub fn for_source(place: String, sha256: String, rows: usize, cols: usize, source: SourceStamp) -> Self {
        Self { path: place, sha256, rows, cols, loaded_at: now_utc(), source: Some(source) }
    }

    /// Where the data came from in words: the file path, or for a database
    /// or workbook what was read of it (`table "sales" of parcels.gpkg`,
    /// `query on postgresql://ana@db:5432/assessor`, `sheet "Q3" of sales.xlsx`).
    pub fn describe(&self) -> String {
        let Some(source) = &self.source else { return self.path.clone() };
        match (&source.table, &source.sheet, &source.query) {
            (Some(table), _, _) => format!("table \"{table}\" of {}", self.path),
            (_, Some(sheet), _) => format!("sheet \"{sheet}\" of {}", self.path),
            (_, _, Some(_)) => format!("query on {}", self.path),
            _ => self.path.clone(),
        }
    }

    /// The first 12 hex digits of the hash, for compact display.
    pub fn short_hash(&self) -> &str {
        &self.sha256[..self.sha256.len().min(12)]
    }
}

/// Lower-case hex SHA-256 digest.
pub fn sha256_hex(bytes: &[u8]) -> String {
    let digest = Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

fn now_utc() -> String {
    chrono::Utc::now().format("%Y-%m-%dT%H:%M:%SZ").to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    // FIPS 180-4 / NIST CSRC example: SHA-256("abc").
    #[test]
    fn sha256_of_abc_matches_fips_example() {
        assert_eq!(sha256_hex(b"abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    }
}
