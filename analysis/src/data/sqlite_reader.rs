//! SQLite files — and GeoPackages, which are SQLite files — into a
//! [`Frame`], through `rusqlite` with the SQLite library built in.
//!
//! A table is read whole, or a query with parameters (`?1`, `?2`, … bound as
//! text, which SQLite compares by its type-affinity rules). The file is
//! opened read-only. Column types follow the values ([`super::cells`]);
//! dates stored as ISO 8601 text become date columns. A GeoPackage geometry
//! column becomes two coordinate columns, each row's point or the centroid of
//! its polygon ([`super::geopackage`]): `geom_lon`, `geom_lat` when its
//! reference system is in degrees, `geom_x`, `geom_y` otherwise; the stamp
//! names the reference system. Other binary columns are not read, and the
//! stamp lists them. The stamp's hash is of the values read, not the file's
//! bytes, so that an unrelated table's change or a `VACUUM` does not look
//! like new sales.

use super::cells::{Cell, CellColumns};
use super::geopackage::{self, Place};
use super::provenance::{GeometryRead, SourceKind, SourceStamp, HASH_OF_RESULT_VALUES};
use super::{Frame, Provenance};
use crate::error::{Error, Result};
use rusqlite::types::ValueRef;
use std::path::Path;

/// What to read from a database file: a whole table, or a query.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SqlRead {
    /// Every row and column of one table (or view).
    Table(String),
    /// A `SELECT` with its parameters, given as text.
    Query {
        /// The query text.
        sql: String,
        /// The values of `?1`, `?2`, … (SQLite) or `$1`, `$2`, … (PostgreSQL).
        parameters: Vec<String>,
    },
}

impl SqlRead {
    /// Reads the table `name` whole.
    pub fn table(name: impl Into<String>) -> Self {
        Self::Table(name.into())
    }

    /// Runs `sql` with no parameters.
    pub fn query(sql: impl Into<String>) -> Self {
        Self::Query { sql: sql.into(), parameters: Vec::new() }
    }

    /// The same query with one more parameter.
    pub fn parameter(self, value: impl Into<String>) -> Self {
        match self {
            Self::Query { sql, mut parameters } => {
                parameters.push(value.into());
                Self::Query { sql, parameters }
            }
            table => table,
        }
    }
}

/// Tables of SQLite and GeoPackage bookkeeping, never the data sought.
fn is_internal_table(name: &str) -> bool {
    name.starts_with("sqlite_") || name.starts_with("gpkg_") || name.starts_with("rtree_")
}

/// The user tables and views of an open database, sorted.
fn user_tables(connection: &rusqlite::Connection, path: &Path) -> Result<Vec<String>> {
    let failed = |cause| Error::Sqlite { path: path.to_path_buf(), action: "list its tables".into(), cause };
    let mut statement = connection
        .prepare("SELECT name FROM sqlite_master WHERE type IN ('table', 'view') ORDER BY name")
        .map_err(failed)?;
    let names = statement.query_map([], |row| row.get::<_, String>(0)).map_err(failed)?;
    let mut tables = Vec::new();
    for name in names {
        let name = name.map_err(failed)?;
        if !is_internal_table(&name) {
            tables.push(name);
        }
    }
    Ok(tables)
}

/// Reads a table or query of an SQLite file (`.sqlite`, `.db`, or a
/// GeoPackage `.gpkg`). A query error, a missing table or a value SQLite
/// cannot hand over stops the load; no partial frame is returned.
pub fn load_sqlite(path: impl AsRef<Path>, what: &SqlRead) -> Result<Frame> {
    let path = path.as_ref();
    if !path.is_file() {
        let cause = std::fs::metadata(path)
            .err()
            .unwrap_or_else(|| std::io::Error::new(std::io::ErrorKind::InvalidInput, "not a file"));
        return Err(super::unreadable(path, cause));
    }
    let connection = rusqlite::Connection::open_with_flags(
        path,
        rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY | rusqlite::OpenFlags::SQLITE_OPEN_NO_MUTEX,
    )
    .map_err(|cause| Error::Sqlite { path: path.to_path_buf(), action: "open it".into(), cause })?;
    let mut stamp = SourceStamp::new(SourceKind::Sqlite, HASH_OF_RESULT_VALUES);
    let (sql, parameters) = match what {
        SqlRead::Table(table) => {
            let tables = user_tables(&connection, path)?;
            if !tables.contains(table) {
                return Err(Error::TableNotFound { path: path.to_path_buf(), table: table.clone(), available: tables });
            }
            stamp.table = Some(table.clone());
            (format!("SELECT * FROM \"{}\"", table.replace('"', "\"\"")), Vec::new())
        }
        SqlRead::Query { sql, parameters } => {
            stamp.query = Some(sql.clone());
            stamp.parameters = parameters.clone();
            (sql.clone(), parameters.clone())
        }
    };
    let failed = |action: &str| {
        let action = action.to_string();
        move |cause| Error::Sqlite { path: path.to_path_buf(), action, cause }
    };
    let mut statement = connection.prepare(&sql).map_err(failed("prepare the query"))?;
    let names: Vec<String> = statement.column_names().into_iter().map(str::to_string).collect();
    let width = names.len();
    let mut rows = statement.query(rusqlite::params_from_iter(parameters.iter())).map_err(failed("run the query"))?;
    let mut cells: Vec<Vec<Cell>> = Vec::new();
    let mut binary: Vec<BinaryColumn> = vec![BinaryColumn::None; width];
    let mut places: Vec<Vec<Option<Place>>> = vec![Vec::new(); width];
    while let Some(row) = rows.next().map_err(failed("read the result"))? {
        let mut values = Vec::with_capacity(width);
        for (index, kind) in binary.iter_mut().enumerate() {
            let value = row.get_ref(index).map_err(failed("read the result"))?;
            let mut place = None;
            values.push(match value {
                ValueRef::Null => Cell::Missing,
                ValueRef::Integer(v) => Cell::Integer(v),
                ValueRef::Real(v) => Cell::Real(v),
                ValueRef::Text(bytes) => match std::str::from_utf8(bytes) {
                    Ok(text) => Cell::Text(text.to_string()),
                    Err(_) => Cell::Text(String::from_utf8_lossy(bytes).into_owned()),
                },
                ValueRef::Blob(bytes) => {
                    *kind = match (*kind, geopackage::is_geometry(bytes)) {
                        (BinaryColumn::Opaque, _) | (_, false) => BinaryColumn::Opaque,
                        (previous, true) => {
                            let (srs_id, decoded) = geopackage::decode(bytes).map_err(|why| {
                                Error::Specification(format!(
                                    "the geometry in column `{}` of result row {} cannot be read: {why}",
                                    names[index],
                                    cells.len() + 1
                                ))
                            })?;
                            place = decoded;
                            match previous {
                                BinaryColumn::Geometry(id) if id != srs_id => {
                                    return Err(Error::Specification(format!(
                                        "column `{}` holds geometries in two spatial reference systems ({id} and \
                                         {srs_id}); read one system at a time (a query with a WHERE on the layer)",
                                        names[index]
                                    )))
                                }
                                _ => BinaryColumn::Geometry(srs_id),
                            }
                        }
                    };
                    Cell::Missing
                }
            });
            places[index].push(place);
        }
        cells.push(values);
    }
    let kept: Vec<usize> = (0..width).filter(|&i| binary[i] == BinaryColumn::None).collect();
    stamp.not_read = (0..width).filter(|&i| binary[i] == BinaryColumn::Opaque).map(|i| names[i].clone()).collect();
    let mut column_names: Vec<String> = kept.iter().map(|&i| names[i].clone()).collect();
    let mut geometry_columns: Vec<usize> = Vec::new();
    for (i, kind) in binary.iter().enumerate() {
        let BinaryColumn::Geometry(srs_id) = *kind else { continue };
        let (srs, degrees) = geopackage::reference_system(&connection, srs_id)?;
        let suffixes = if degrees { ("lon", "lat") } else { ("x", "y") };
        let place_columns = (format!("{}_{}", names[i], suffixes.0), format!("{}_{}", names[i], suffixes.1));
        for name in [&place_columns.0, &place_columns.1] {
            if names.contains(name) {
                return Err(Error::Specification(format!(
                    "the places of geometry column `{}` would be written to `{name}`, which the source has already; \
                     rename that column (a query with `AS`)",
                    names[i]
                )));
            }
        }
        let mut kinds: Vec<&str> = places[i].iter().flatten().map(|p| p.kind).collect();
        kinds.sort_unstable();
        kinds.dedup();
        column_names.push(place_columns.0.clone());
        column_names.push(place_columns.1.clone());
        stamp.geometry.push(GeometryRead {
            column: names[i].clone(),
            place_columns,
            place: if kinds.is_empty() { "no place (every geometry empty)".into() } else { kinds.join(", ") },
            srs,
            degrees,
        });
        geometry_columns.push(i);
    }
    let mut columns = CellColumns::new(column_names);
    for (r, row) in cells.into_iter().enumerate() {
        let mut row = row;
        let mut values: Vec<Cell> = kept.iter().map(|&i| std::mem::replace(&mut row[i], Cell::Missing)).collect();
        for &i in &geometry_columns {
            match places[i][r] {
                Some(place) => values.extend([Cell::Real(place.x), Cell::Real(place.y)]),
                None => values.extend([Cell::Missing, Cell::Missing]),
            }
        }
        columns.push_row(values);
    }
    let (data, sha256) = columns.finish()?;
    let provenance = Provenance::for_source(path.display().to_string(), sha256, data.height(), data.width(), stamp);
    Ok(Frame::from_parts(data, provenance, None))
}

/// What the binary values of a column turned out to be.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum BinaryColumn {
    /// No binary value seen (so far).
    None,
    /// GeoPackage geometries, all in this spatial reference system.
    Geometry(i32),
    /// Some other binary value: the column is not read.
    Opaque,
}

/// The one table of a database file, for [`super::load`]; several tables
/// are an error that lists them.
pub(crate) fn only_table(path: &Path) -> Result<SqlRead> {
    let connection = rusqlite::Connection::open_with_flags(path, rusqlite::OpenFlags::SQLITE_OPEN_READ_ONLY)
        .map_err(|cause| Error::Sqlite { path: path.to_path_buf(), action: "open it".into(), cause })?;
    let tables = user_tables(&connection, path)?;
    match tables.as_slice() {
        [one] => Ok(SqlRead::table(one.clone())),
        [] => Err(Error::EmptySource { path: path.to_path_buf(), what: "table" }),
        _ => Err(Error::SourceAmbiguous {
            path: path.to_path_buf(),
            what: "table",
            available: tables,
            how: "`--table NAME`; in code `load_sqlite(path, &SqlRead::table(\"NAME\"))`",
        }),
    }
}
