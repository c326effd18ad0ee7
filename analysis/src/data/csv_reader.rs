//! Delimited text (CSV, TSV) into a [`Frame`].
//!
//! We parse with the `csv` crate rather than polars' reader because it reports
//! the exact file line of every record, which our errors need (a ragged row,
//! a value that is not a number), and because polars' reader pulls a large
//! streaming and cloud-I/O stack that a desktop analysis never uses.

use super::{read_bytes, Frame, Provenance};
use crate::error::{Error, Result};
use polars::prelude::{Column, DataFrame};
use std::collections::BTreeMap;
use std::path::Path;

/// How a column is stored after loading.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColumnType {
    /// 64-bit floating point.
    Number,
    /// 64-bit signed integer.
    Integer,
    /// Text, kept as written (use for codes such as parcel numbers or ZIPs).
    Text,
}

impl std::str::FromStr for ColumnType {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "number" | "float" | "f64" => Ok(Self::Number),
            "integer" | "int" | "i64" => Ok(Self::Integer),
            "text" | "string" | "str" => Ok(Self::Text),
            other => Err(other.to_string()),
        }
    }
}

/// Options for [`load_csv`].
#[derive(Debug, Clone)]
pub struct CsvOptions {
    /// Field delimiter (default `,`).
    pub delimiter: u8,
    /// Whether the first record names the columns (default `true`); without a
    /// header the columns are called `column_1`, `column_2`, ….
    pub has_header: bool,
    /// Field values (after trimming spaces) that mean "missing". The default is
    /// the empty field only; add markers such as `NA`, `n/a` or `-` as the
    /// source uses them.
    pub null_markers: Vec<String>,
    /// Column types to use instead of inference, by column name.
    pub column_types: BTreeMap<String, ColumnType>,
}

impl Default for CsvOptions {
    fn default() -> Self {
        Self { delimiter: b',', has_header: true, null_markers: vec![String::new()], column_types: BTreeMap::new() }
    }
}

impl CsvOptions {
    /// Adds a missing-value marker.
    pub fn null_marker(mut self, marker: impl Into<String>) -> Self {
        self.null_markers.push(marker.into());
        self
    }

    /// Fixes the type of one column instead of inferring it.
    pub fn column_type(mut self, column: impl Into<String>, ty: ColumnType) -> Self {
        self.column_types.insert(column.into(), ty);
        self
    }
}

/// Reads a delimited text file.
///
/// Types are inferred per column from every value (not a sample): integer if
/// every present value parses as an `i64`, number if every one parses as an
/// `f64`, text otherwise. A column meant to be numeric that holds a typo thus
/// loads as text, and using it as a numeric term reports the row and value.
pub fn load_csv(path: impl AsRef<Path>, options: &CsvOptions) -> Result<Frame> {
    let path = path.as_ref();
    let bytes = read_bytes(path)?;
    let body = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(&bytes);
    let mut reader = csv::ReaderBuilder::new()
        .delimiter(options.delimiter)
        .has_headers(false)
        .flexible(true)
        .from_reader(body);

    let malformed = |line: u64, e: &csv::Error| Error::CsvMalformed {
        path: path.to_path_buf(),
        line,
        reason: e.to_string(),
    };

    let mut records = reader.records();
    let names: Vec<String>;
    let mut fields: Vec<Vec<String>> = Vec::new();
    let mut lines: Vec<u64> = Vec::new();

    let mut pending_first: Option<(csv::StringRecord, u64)> = None;
    match records.next() {
        None => return Err(Error::NoColumns { path: path.to_path_buf(), delimiter: options.delimiter as char }),
        Some(Err(e)) => return Err(malformed(e.position().map(|p| p.line()).unwrap_or(1), &e)),
        Some(Ok(record)) => {
            let line = record.position().map(|p| p.line()).unwrap_or(1);
            if options.has_header {
                names = record.iter().map(|s| s.trim().to_string()).collect();
            } else {
                names = (1..=record.len()).map(|i| format!("column_{i}")).collect();
                pending_first = Some((record, line));
            }
        }
    }
    if names.is_empty() || (names.len() == 1 && names[0].is_empty()) {
        return Err(Error::NoColumns { path: path.to_path_buf(), delimiter: options.delimiter as char });
    }
    for (i, name) in names.iter().enumerate() {
        if names[..i].contains(name) {
            return Err(Error::DuplicateColumn { path: path.to_path_buf(), name: name.clone() });
        }
    }
    fields.resize_with(names.len(), Vec::new);

    let mut push = |record: &csv::StringRecord, line: u64| -> Result<()> {
        if record.len() == 1 && record.get(0).is_some_and(str::is_empty) && names.len() > 1 {
            return Ok(()); // a blank line
        }
        if record.len() != names.len() {
            return Err(Error::CsvRagged { path: path.to_path_buf(), line, expected: names.len(), found: record.len() });
        }
        for (column, value) in fields.iter_mut().zip(record.iter()) {
            column.push(value.to_string());
        }
        lines.push(line);
        Ok(())
    };
    if let Some((record, line)) = pending_first.take() {
        push(&record, line)?;
    }
    for record in records {
        let record = record.map_err(|e| malformed(e.position().map(|p| p.line()).unwrap_or(0), &e))?;
        let line = record.position().map(|p| p.line()).unwrap_or(0);
        push(&record, line)?;
    }

    for wanted in options.column_types.keys() {
        if !names.contains(wanted) {
            return Err(Error::ColumnNotFound {
                name: wanted.clone(),
                source_label: format!("`{}` (named in a column-type override)", path.display()),
                suggestions: super::frame::closest_names(wanted, &names),
                available: names.clone(),
            });
        }
    }

    let height = lines.len();
    let mut columns = Vec::with_capacity(names.len());
    for (name, raw) in names.iter().zip(fields) {
        let is_null = |v: &str| options.null_markers.iter().any(|m| m == v.trim());
        let forced = options.column_types.get(name).copied();
        columns.push(build_column(name, &raw, forced, &is_null, &lines)?);
    }
    let data = DataFrame::new(height, columns)?;
    let provenance = Provenance::for_file(path, &bytes, height, names.len());
    Ok(Frame::from_parts(data, provenance, Some(lines)))
}

fn build_column(
    name: &str,
    raw: &[String],
    forced: Option<ColumnType>,
    is_null: &dyn Fn(&str) -> bool,
    lines: &[u64],
) -> Result<Column> {
    let present = || raw.iter().map(|v| v.trim()).filter(|v| !is_null(v));
    let ty = forced.unwrap_or_else(|| {
        if present().all(|v| v.parse::<i64>().is_ok()) {
            ColumnType::Integer
        } else if present().all(|v| v.parse::<f64>().is_ok()) {
            ColumnType::Number
        } else {
            ColumnType::Text
        }
    });
    let not_numeric = |row: usize, value: &str| Error::NotNumeric {
        column: name.to_string(),
        row: row + 1,
        line: lines.get(row).copied(),
        value: value.to_string(),
    };
    Ok(match ty {
        ColumnType::Integer => {
            let mut values = Vec::with_capacity(raw.len());
            for (row, v) in raw.iter().enumerate() {
                let v = v.trim();
                values.push(if is_null(v) { None } else { Some(v.parse::<i64>().map_err(|_| not_numeric(row, v))?) });
            }
            Column::new(name.into(), values)
        }
        ColumnType::Number => {
            let mut values = Vec::with_capacity(raw.len());
            for (row, v) in raw.iter().enumerate() {
                let v = v.trim();
                values.push(if is_null(v) { None } else { Some(v.parse::<f64>().map_err(|_| not_numeric(row, v))?) });
            }
            Column::new(name.into(), values)
        }
        ColumnType::Text => {
            let values: Vec<Option<&str>> = raw.iter().map(|v| if is_null(v) { None } else { Some(v.as_str()) }).collect();
            Column::new(name.into(), values)
        }
    })
}
