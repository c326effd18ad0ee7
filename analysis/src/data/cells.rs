//! Typed values from databases and workbooks into frame columns, and the
//! canonical hash of what was read.
//!
//! A database or workbook hands over values that already have a storage type
//! (integer, real, text, date, boolean) but no column type a model can rely
//! on: SQLite lets every row of a column hold a different type, and a
//! workbook column is whatever its cells are. [`CellColumns`] collects the
//! values of each column and decides the column's type from all of them, by
//! the same rule the CSV reader follows:
//!
//! * integer while every present value is an integer (a boolean counts as
//!   the integer 0 or 1);
//! * number while every present value is an integer or a real;
//! * date while every present value is a date, or text that is an ISO 8601
//!   date (`YYYY-MM-DD`, as SQLite stores dates);
//! * text otherwise; numbers then keep the shortest text that reads back as
//!   the same value.
//!
//! ## Canonical encoding
//!
//! The provenance stamp of a query result is the SHA-256 of the values read,
//! in this encoding (our own, fixed; a change would be a new stamp version):
//! for each column in order, its name in UTF-8 and a zero byte; then for each
//! row in order, each value in column order as one tag byte and its payload —
//! `0` missing (no payload); `1` integer, 8 bytes little-endian; `2` real, the
//! 8 bytes of its IEEE 754 bit pattern little-endian; `3` text, its length as
//! 8 bytes little-endian then its UTF-8 bytes; `4` date, days since
//! 1970-01-01 as 4 bytes little-endian; `5` boolean, one byte 0 or 1. The
//! same rows in the same order with the same values give the same stamp,
//! whatever server or file they came from; any changed value, row or column
//! name changes it.

use super::dates::{parse_iso_date, to_epoch_days};
use crate::error::Result;
use chrono::NaiveDate;
use polars::prelude::{
    ChunkedBuilder, Column, DataFrame, DataType, Float64Type, Int32Type, Int64Type, IntoColumn, IntoSeries,
    PrimitiveChunkedBuilder, StringChunkedBuilder,
};
use sha2::{Digest, Sha256};

/// One value as a source stores it.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum Cell {
    /// No value.
    Missing,
    /// A whole number.
    Integer(i64),
    /// A floating-point number.
    Real(f64),
    /// Text.
    Text(String),
    /// A calendar date.
    Date(NaiveDate),
    /// True or false.
    Boolean(bool),
}

/// The columns of a result being read, with the running canonical hash.
pub(crate) struct CellColumns {
    names: Vec<String>,
    values: Vec<Vec<Cell>>,
    hasher: Sha256,
}

impl CellColumns {
    /// Starts a result with these column names (hashed at once).
    pub(crate) fn new(names: Vec<String>) -> Self {
        let mut hasher = Sha256::new();
        for name in &names {
            hasher.update(name.as_bytes());
            hasher.update([0u8]);
        }
        let values = names.iter().map(|_| Vec::new()).collect();
        Self { names, values, hasher }
    }

    /// The column names.
    pub(crate) fn names(&self) -> &[String] {
        &self.names
    }

    /// Appends one row; `row` holds one cell per column.
    pub(crate) fn push_row(&mut self, row: Vec<Cell>) {
        debug_assert_eq!(row.len(), self.names.len());
        for (column, cell) in self.values.iter_mut().zip(row) {
            hash_cell(&mut self.hasher, &cell);
            column.push(cell);
        }
    }

    /// Rows so far.
    pub(crate) fn height(&self) -> usize {
        self.values.first().map_or(0, Vec::len)
    }

    /// The typed frame and the lower-case hex SHA-256 of the canonical encoding.
    pub(crate) fn finish(self) -> Result<(DataFrame, String)> {
        let height = self.height();
        let sha256 = self.hasher.finalize().iter().map(|b| format!("{b:02x}")).collect();
        let columns: Vec<Column> =
            self.names.iter().zip(self.values).map(|(name, cells)| typed_column(name, cells)).collect();
        Ok((DataFrame::new(height, columns)?, sha256))
    }
}

fn hash_cell(hasher: &mut Sha256, cell: &Cell) {
    match cell {
        Cell::Missing => hasher.update([0u8]),
        Cell::Integer(v) => {
            hasher.update([1u8]);
            hasher.update(v.to_le_bytes());
        }
        Cell::Real(v) => {
            hasher.update([2u8]);
            hasher.update(v.to_bits().to_le_bytes());
        }
        Cell::Text(t) => {
            hasher.update([3u8]);
            hasher.update((t.len() as u64).to_le_bytes());
            hasher.update(t.as_bytes());
        }
        Cell::Date(d) => {
            hasher.update([4u8]);
            hasher.update(to_epoch_days(*d).to_le_bytes());
        }
        Cell::Boolean(b) => hasher.update([5u8, u8::from(*b)]),
    }
}

/// The column type the values call for (see the module documentation).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Kind {
    Integer,
    Number,
    Date,
    Text,
}

fn kind_of(cells: &[Cell]) -> Kind {
    let mut kind: Option<Kind> = None;
    for cell in cells {
        let this = match cell {
            Cell::Missing => continue,
            Cell::Integer(_) | Cell::Boolean(_) => Kind::Integer,
            Cell::Real(_) => Kind::Number,
            Cell::Date(_) => Kind::Date,
            Cell::Text(t) if parse_iso_date(t.trim()).is_some() => Kind::Date,
            Cell::Text(_) => return Kind::Text,
        };
        kind = Some(match (kind, this) {
            (None, k) => k,
            (Some(a), b) if a == b => a,
            (Some(Kind::Integer), Kind::Number) | (Some(Kind::Number), Kind::Integer) => Kind::Number,
            _ => return Kind::Text,
        });
    }
    // A column with no value at all reads as numbers, as in the CSV reader.
    kind.unwrap_or(Kind::Number)
}

fn typed_column(name: &str, cells: Vec<Cell>) -> Column {
    match kind_of(&cells) {
        Kind::Integer => {
            let mut b = PrimitiveChunkedBuilder::<Int64Type>::new(name.into(), cells.len());
            for cell in cells {
                b.append_option(match cell {
                    Cell::Integer(v) => Some(v),
                    Cell::Boolean(v) => Some(i64::from(v)),
                    _ => None,
                });
            }
            b.finish().into_series().into_column()
        }
        Kind::Number => {
            let mut b = PrimitiveChunkedBuilder::<Float64Type>::new(name.into(), cells.len());
            for cell in cells {
                b.append_option(match cell {
                    Cell::Integer(v) => Some(v as f64),
                    Cell::Real(v) => Some(v),
                    Cell::Boolean(v) => Some(f64::from(u8::from(v))),
                    _ => None,
                });
            }
            b.finish().into_series().into_column()
        }
        Kind::Date => {
            let mut b = PrimitiveChunkedBuilder::<Int32Type>::new(name.into(), cells.len());
            for cell in cells {
                b.append_option(match cell {
                    Cell::Date(d) => Some(to_epoch_days(d)),
                    Cell::Text(t) => parse_iso_date(t.trim()).map(to_epoch_days),
                    _ => None,
                });
            }
            let series = b.finish().into_series();
            // Int32 → Date is a cast polars defines for every value (days since the epoch).
            series.cast(&DataType::Date).unwrap_or(series).into_column()
        }
        Kind::Text => {
            let mut b = StringChunkedBuilder::new(name.into(), cells.len());
            for cell in cells {
                match cell {
                    Cell::Missing => b.append_null(),
                    Cell::Integer(v) => b.append_value(v.to_string()),
                    Cell::Real(v) => b.append_value(v.to_string()),
                    Cell::Text(t) => b.append_value(t),
                    Cell::Date(d) => b.append_value(d.format("%Y-%m-%d").to_string()),
                    Cell::Boolean(v) => b.append_value(v.to_string()),
                }
            }
            b.finish().into_series().into_column()
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn column_types_follow_the_values() {
        let mut columns = CellColumns::new(vec!["n".into(), "x".into(), "d".into(), "t".into()]);
        columns.push_row(vec![Cell::Integer(3), Cell::Integer(1), Cell::Text("2024-02-29".into()), Cell::Integer(7)]);
        columns.push_row(vec![Cell::Missing, Cell::Real(2.5), Cell::Missing, Cell::Text("Q-7".into())]);
        let (frame, _) = columns.finish().expect("frame");
        let types: Vec<DataType> = frame.columns().iter().map(|c| c.dtype().clone()).collect();
        assert_eq!(types, vec![DataType::Int64, DataType::Float64, DataType::Date, DataType::String]);
    }

    #[test]
    fn the_stamp_changes_with_any_value_and_not_otherwise() {
        let stamp = |price: i64| {
            let mut columns = CellColumns::new(vec!["price".into()]);
            columns.push_row(vec![Cell::Integer(price)]);
            columns.finish().expect("frame").1
        };
        assert_eq!(stamp(250_000), stamp(250_000));
        assert_ne!(stamp(250_000), stamp(250_001));
    }
}
