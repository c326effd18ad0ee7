//! Contracts of the table readers: delimited text, workbooks, Parquet, Arrow.
//!
//! Every reader, on any bytes:
//! - refuses with a typed error naming the place ([`crate::places`]), or
//! - returns a frame whose every column reads as numbers, dates and labels
//!   either with finite numbers or with a refusal naming the column and row,
//!   whose file lines (text sources) rise with the rows, and on which a
//!   least-squares fit of its first numeric columns ends in finite estimates
//!   or a typed refusal.
//!
//! A CSV file that is accepted must also read back the same after writing
//! the frame out again (values exactly, types, names, row count).

use crate::fitting::fits_with_finite_numbers_or_refuses;
use crate::places::assert_names_a_place;
use crate::scratch;
use plumbline::data::{load_arrow, load_csv, load_parquet, load_workbook, ColumnType, CsvOptions, Frame, TextEncoding};
use plumbline::model::ModelSpec;
use plumbline::polars::prelude::{AnyValue, DataType};

/// The CSV reader with options taken from the input's first two bytes
/// (delimiter, header, encoding, a missing-value marker, the non-finite
/// rule, forced types and date formats for the first two columns); the rest
/// is the file.
pub fn csv_table(data: &[u8]) {
    let (options, file) = csv_options(data);
    let path = scratch::file_with(file, "csv");
    let name = file_name(&path);
    match load_csv(&path, &options) {
        Err(error) => assert_names_a_place(&error, Some(&name), "CSV reader"),
        Ok(frame) => {
            check_frame(&frame, "CSV reader");
            check_source_lines(&frame);
            csv_round_trip(&frame, &options);
            fits_with_finite_numbers(&frame, "CSV reader");
        }
    }
}

/// The workbook reader on the input as an `.xlsx` file.
pub fn workbook(data: &[u8]) {
    let path = scratch::file_with(data, "xlsx");
    let name = file_name(&path);
    match load_workbook(&path, None) {
        Err(error) => assert_names_a_place(&error, Some(&name), "workbook reader"),
        Ok(frame) => {
            check_frame(&frame, "workbook reader");
            check_source_lines(&frame);
            fits_with_finite_numbers(&frame, "workbook reader");
        }
    }
}

/// The Parquet reader (first byte even) or the Arrow IPC reader (odd) on
/// the rest of the input.
pub fn columnar(data: &[u8]) {
    let Some((&selector, file)) = data.split_first() else { return };
    let (extension, what) = if selector % 2 == 0 { ("parquet", "Parquet reader") } else { ("arrow", "Arrow reader") };
    let path = scratch::file_with(file, extension);
    let name = file_name(&path);
    let loaded = if selector % 2 == 0 { load_parquet(&path) } else { load_arrow(&path) };
    match loaded {
        Err(error) => assert_names_a_place(&error, Some(&name), what),
        Ok(frame) => {
            check_frame(&frame, what);
            fits_with_finite_numbers(&frame, what);
        }
    }
}

fn file_name(path: &std::path::Path) -> String {
    path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default()
}

/// Delimiters the options byte chooses among.
const DELIMITERS: [u8; 4] = [b',', b';', b'\t', b'|'];

/// Date formats the forced types may give a column (both round-trip through
/// chrono's formatting for the years the reader accepts).
const DATE_FORMATS: [&str; 2] = ["%d/%m/%Y", "%m/%d/%Y"];

/// Options from the first two bytes, and the file after them.
fn csv_options(data: &[u8]) -> (CsvOptions, &[u8]) {
    let (flags, forced, file) = match data {
        [flags, forced, file @ ..] => (*flags, *forced, file),
        _ => (0, 0xFF, data),
    };
    let mut options = CsvOptions { delimiter: DELIMITERS[usize::from(flags & 0b11)], ..CsvOptions::default() };
    options.has_header = flags & 0b100 == 0;
    options.encoding = match (flags >> 3) & 0b11 {
        2 => TextEncoding::Latin1,
        3 => TextEncoding::Windows1252,
        _ => TextEncoding::Utf8,
    };
    if flags & 0b10_0000 != 0 {
        options = options.null_marker("NA");
    }
    if flags & 0b100_0000 != 0 {
        options = options.non_finite_as_missing();
    }
    for (index, name) in first_column_names(file, &options).into_iter().enumerate() {
        let choice = (forced >> (3 * index)) & 0b111;
        options = match choice {
            0 => options.column_type(name, ColumnType::Number),
            1 => options.column_type(name, ColumnType::Integer),
            2 => options.column_type(name, ColumnType::Text),
            3 => options.column_type(name, ColumnType::Date),
            4 => options.column_type(name, ColumnType::FormattedNumber),
            5 | 6 => options.date_format(name, DATE_FORMATS[usize::from(choice - 5)]),
            _ => options,
        };
    }
    (options, file)
}

/// The names of the first two columns as the header spells them (unquoted,
/// trimmed; `column_1`, `column_2` without a header). A crude split is enough:
/// a name the reader spells otherwise is refused as unknown, which is part of
/// the contract too.
fn first_column_names(file: &[u8], options: &CsvOptions) -> Vec<String> {
    if !options.has_header {
        return vec!["column_1".into(), "column_2".into()];
    }
    let first_line = file.split(|&b| b == b'\n').next().unwrap_or_default();
    String::from_utf8_lossy(first_line)
        .split(char::from(options.delimiter))
        .take(2)
        .map(|name| name.trim().trim_matches('"').to_string())
        .collect()
}

/// Every column read as numbers, dates and labels: finite numbers, or a
/// refusal naming the place.
fn check_frame(frame: &Frame, what: &str) {
    assert_eq!(
        frame.provenance().rows,
        frame.height(),
        "{what}: the provenance counts other rows than the frame holds"
    );
    for name in frame.column_names() {
        match frame.numeric_column(&name) {
            Ok(values) => {
                assert_eq!(values.len(), frame.height(), "{what}: column `{name}` read as numbers has another length");
                if let Some(bad) = values.iter().flatten().find(|v| !v.is_finite()) {
                    panic!("{what}: column `{name}` read as numbers holds {bad}, not refused and not missing");
                }
            }
            Err(error) => assert_names_a_place(&error, None, what),
        }
        if let Err(error) = frame.date_column(&name) {
            assert_names_a_place(&error, None, what);
        }
        match frame.label_column(&name) {
            Ok(labels) => assert_eq!(labels.len(), frame.height(), "{what}: labels of `{name}` have another length"),
            Err(error) => assert_names_a_place(&error, None, what),
        }
    }
}

/// Text sources give each row its file line; they rise with the rows.
fn check_source_lines(frame: &Frame) {
    let lines: Vec<u64> = (0..frame.height()).filter_map(|row| frame.source_line(row)).collect();
    if lines.is_empty() {
        return;
    }
    assert_eq!(lines.len(), frame.height(), "some rows have a file line and others none");
    assert!(lines.windows(2).all(|pair| pair[0] < pair[1]), "file lines do not rise with the rows: {lines:?}");
}

/// A least-squares fit of the first numeric column on the second (or on a
/// constant alone when there is one numeric column) ends in finite
/// estimates and standard errors, or in a typed refusal.
fn fits_with_finite_numbers(frame: &Frame, what: &str) {
    let numeric: Vec<String> = frame
        .column_names()
        .into_iter()
        .filter(|name| frame.numeric_column(name).is_ok_and(|values| values.iter().any(Option::is_some)))
        .take(2)
        .collect();
    let spec = match numeric.as_slice() {
        [] => return,
        [target] => ModelSpec::new(target.as_str()),
        [target, term, ..] => ModelSpec::new(target.as_str()).numeric(term.as_str()),
    };
    fits_with_finite_numbers_or_refuses(frame, &spec, what);
}

/// Writes the frame as a CSV file (UTF-8, every text and name quoted, numbers
/// in their shortest exact form, dates in the column's format) and reads it
/// with the same options: the same names, types and values must come back.
fn csv_round_trip(frame: &Frame, options: &CsvOptions) {
    let text = write_csv(frame, options);
    let path = scratch::file_with(text.as_bytes(), "round-trip.csv");
    let again_options = CsvOptions { encoding: TextEncoding::Utf8, ..options.clone() };
    let again = load_csv(&path, &again_options)
        .unwrap_or_else(|e| panic!("the CSV reader refuses what it wrote itself: {e}\n--- file ---\n{text}"));
    assert_eq!(again.column_names(), frame.column_names(), "names changed in the round trip\n{text}");
    assert_eq!(again.height(), frame.height(), "rows changed in the round trip\n{text}");
    for name in frame.column_names() {
        let (before, after) = (column(frame, &name), column(&again, &name));
        assert_eq!(before.dtype(), after.dtype(), "column `{name}` changed type in the round trip\n{text}");
        for (row, (a, b)) in before.iter().zip(after.iter()).enumerate() {
            assert!(same_value(&a, &b), "column `{name}` row {}: {a:?} came back as {b:?}\n{text}", row + 1);
        }
    }
}

fn column(frame: &Frame, name: &str) -> plumbline::polars::prelude::Series {
    match frame.column_by_name(name) {
        Ok(column) => column.as_materialized_series().clone(),
        Err(e) => panic!("a listed column cannot be fetched: {e}"),
    }
}

/// Equality of two values with NaN equal to NaN (a NaN read under the
/// refusing rule is kept, to be refused where it is used).
fn same_value(a: &AnyValue, b: &AnyValue) -> bool {
    match (a, b) {
        (AnyValue::Float64(x), AnyValue::Float64(y)) => x == y || (x.is_nan() && y.is_nan()),
        _ => a == b,
    }
}

/// The frame as CSV text in the options' delimiter, with a leading byte-order
/// mark (which the reader skips) so that a first name that itself begins with
/// one survives.
fn write_csv(frame: &Frame, options: &CsvOptions) -> String {
    let delimiter = char::from(options.delimiter).to_string();
    let names = frame.column_names();
    let columns: Vec<_> = names.iter().map(|name| column(frame, name)).collect();
    let mut out = String::from("\u{feff}");
    if options.has_header {
        out += &names.iter().map(|n| quoted(n)).collect::<Vec<_>>().join(&delimiter);
        out.push('\n');
    }
    for row in 0..frame.height() {
        let fields: Vec<String> = names
            .iter()
            .zip(&columns)
            .map(|(name, series)| field(&series.get(row).unwrap_or(AnyValue::Null), name, options))
            .collect();
        out += &fields.join(&delimiter);
        out.push('\n');
    }
    out
}

fn quoted(text: &str) -> String {
    format!("\"{}\"", text.replace('"', "\"\""))
}

/// One value as a field: missing as `""` (read as missing by the default
/// marker, and never a blank line that the reader would pass over).
fn field(value: &AnyValue, name: &str, options: &CsvOptions) -> String {
    match value {
        AnyValue::Null => quoted(""),
        AnyValue::Int64(v) => v.to_string(),
        AnyValue::Float64(v)
            if options.column_types.get(name) == Some(&ColumnType::FormattedNumber) && v.is_finite() =>
        {
            // A formatted number is read without exponents: the plain
            // decimal form, which Display gives exactly.
            v.to_string()
        }
        AnyValue::Float64(v) => format!("{v:?}"),
        AnyValue::Date(days) => {
            let date = chrono::NaiveDate::from_num_days_from_ce_opt(days + 719_163)
                .unwrap_or_else(|| panic!("a date column holds day {days}, outside the calendar"));
            match options.date_formats.get(name) {
                Some(format) => date.format(format).to_string(),
                None => date.format("%Y-%m-%d").to_string(),
            }
        }
        AnyValue::String(text) => quoted(text),
        AnyValue::StringOwned(text) => quoted(text),
        other => panic!("the CSV reader made a column of an unexpected type: {other:?} ({})", DataType::from(other)),
    }
}
