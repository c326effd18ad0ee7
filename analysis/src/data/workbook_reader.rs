//! Excel workbooks (`.xlsx`) into a [`Frame`], through `calamine`.
//!
//! One sheet is read: the one named, or the only one. Its first non-empty row
//! names the columns; every row below it is a sale, and wholly empty rows are
//! passed over. Cells keep the type the workbook gives them (number, text,
//! true/false, date), and column types follow the values ([`super::cells`]).
//! A cell formatted as a date becomes a date; one that also holds a time of
//! day is kept as ISO 8601 text (`2025-03-14T09:30:00`), so that a time is
//! never dropped unnoticed. A cell holding a spreadsheet error (`#DIV/0!`,
//! `#N/A`, …) stops the load with the sheet and the cell named. The stamp's
//! hash is of the file's bytes, like a CSV file's.

use super::cells::{Cell, CellColumns};
use super::decoder_guard::decode_guarded;
use super::provenance::{sha256_hex, SourceKind, SourceStamp, HASH_OF_FILE_BYTES};
use super::{read_bytes, Frame, Provenance};
use crate::error::{Error, Result};
use calamine::{Data, Reader, Xlsx};
use chrono::NaiveDate;
use std::io::Cursor;
use std::path::Path;

/// The A1 name of a cell from its 0-based row and column (`(16, 2)` → `C17`).
pub(crate) fn cell_name(row: u32, column: u32) -> String {
    let mut letters = Vec::new();
    let mut n = column + 1;
    while n > 0 {
        let rem = ((n - 1) % 26) as u8;
        letters.push(char::from(b'A' + rem));
        n = (n - 1) / 26;
    }
    letters.iter().rev().collect::<String>() + &(row + 1).to_string()
}

/// Reads one sheet of an `.xlsx` workbook; `sheet: None` reads the only
/// sheet (a workbook of several sheets then asks for a name).
pub fn load_workbook(path: impl AsRef<Path>, sheet: Option<&str>) -> Result<Frame> {
    let path = path.as_ref();
    let bytes = read_bytes(path)?;
    let unreadable = |reason: String| Error::WorkbookUnreadable { path: path.to_path_buf(), reason };
    let damaged = |panic: String| unreadable(format!("the file is damaged (the decoder stopped: {panic})"));
    let mut workbook: Xlsx<_> =
        decode_guarded(|| Xlsx::new(Cursor::new(&bytes))).map_err(damaged)?.map_err(|e| unreadable(e.to_string()))?;
    let names = workbook.sheet_names();
    let sheet = match sheet {
        Some(name) if names.iter().any(|n| n == name) => name.to_string(),
        Some(name) => {
            return Err(Error::SheetNotFound { path: path.to_path_buf(), sheet: name.to_string(), available: names })
        }
        None => match names.as_slice() {
            [one] => one.clone(),
            [] => return Err(Error::EmptySource { path: path.to_path_buf(), what: "sheet" }),
            _ => {
                return Err(Error::SourceAmbiguous {
                    path: path.to_path_buf(),
                    what: "sheet",
                    available: names,
                    how: "`--sheet NAME`; in code `load_workbook(path, Some(\"NAME\"))`",
                })
            }
        },
    };
    let range = decode_guarded(|| workbook.worksheet_range(&sheet))
        .map_err(damaged)?
        .map_err(|e| unreadable(format!("sheet `{sheet}`: {e}")))?;
    let (first_row, first_column) = range.start().unwrap_or((0, 0));
    let cell_error = |row: usize, column: usize, problem: String| Error::WorkbookCell {
        path: path.to_path_buf(),
        sheet: sheet.clone(),
        cell: cell_name(first_row + row as u32, first_column + column as u32),
        problem,
    };

    let mut rows = range.rows().enumerate().filter(|(_, row)| row.iter().any(|c| !matches!(c, Data::Empty)));
    let Some((header_index, header)) = rows.next() else {
        return Err(Error::EmptySource { path: path.to_path_buf(), what: "sheet" });
    };
    let mut names: Vec<String> = Vec::with_capacity(header.len());
    for (column, cell) in header.iter().enumerate() {
        let name = match cell {
            Data::String(text) => text.trim().to_string(),
            Data::Empty => String::new(),
            other => other.to_string(),
        };
        if name.is_empty() {
            return Err(cell_error(
                header_index,
                column,
                "the header row has an empty name here; name every column that holds data".into(),
            ));
        }
        if names.contains(&name) {
            return Err(cell_error(
                header_index,
                column,
                format!("the column name `{name}` appears twice in the header row; rename one"),
            ));
        }
        names.push(name);
    }
    let mut columns = CellColumns::new(names);
    for (index, row) in rows {
        let mut cells = Vec::with_capacity(row.len());
        for (column, value) in row.iter().enumerate() {
            cells.push(match value {
                Data::Empty => Cell::Missing,
                Data::Int(v) => Cell::Integer(*v),
                Data::Float(v) => Cell::Real(*v),
                Data::String(text) => Cell::Text(text.clone()),
                Data::Bool(v) => Cell::Boolean(*v),
                Data::DateTimeIso(text) | Data::DurationIso(text) => Cell::Text(text.clone()),
                Data::DateTime(serial) if serial.is_duration() => Cell::Real(serial.as_f64()),
                Data::DateTime(serial) => {
                    let (y, m, d, hour, minute, second, milli) = serial.to_ymd_hms_milli();
                    let date = NaiveDate::from_ymd_opt(i32::from(y), u32::from(m), u32::from(d)).ok_or_else(|| {
                        cell_error(index, column, format!("the date {y}-{m:02}-{d:02} does not exist (the spreadsheet's 1900 leap-year quirk); correct the cell"))
                    })?;
                    if (hour, minute, second, milli) == (0, 0, 0, 0) {
                        Cell::Date(date)
                    } else {
                        Cell::Text(format!("{date}T{hour:02}:{minute:02}:{second:02}"))
                    }
                }
                Data::Error(kind) => {
                    return Err(cell_error(
                        index,
                        column,
                        format!("holds the spreadsheet error {kind}; correct the formula, or clear the cell to mark the value missing"),
                    ))
                }
            });
        }
        cells.resize(columns.names().len(), Cell::Missing);
        columns.push_row(cells);
    }
    let (data, _) = columns.finish()?;
    let mut stamp = SourceStamp::new(SourceKind::Workbook, HASH_OF_FILE_BYTES);
    stamp.sheet = Some(sheet);
    let provenance =
        Provenance::for_source(path.display().to_string(), sha256_hex(&bytes), data.height(), data.width(), stamp);
    Ok(Frame::from_parts(data, provenance, None))
}

#[cfg(test)]
mod tests {
    use super::cell_name;

    // A1 notation as the Office Open XML standard (ECMA-376, §18.3.1.4) defines cell references.
    #[test]
    fn cells_are_named_in_a1_notation() {
        assert_eq!(cell_name(0, 0), "A1");
        assert_eq!(cell_name(16, 2), "C17");
        assert_eq!(cell_name(0, 25), "Z1");
        assert_eq!(cell_name(0, 26), "AA1");
        assert_eq!(cell_name(9, 701), "ZZ10");
        assert_eq!(cell_name(0, 702), "AAA1");
    }
}
