//! Delimited text (CSV, TSV) into a [`Frame`], streamed into typed columns.
//!
//! We parse with the `csv` crate rather than polars' reader because it reports
//! the exact file line of every record, which our errors need (a ragged row,
//! a value that is not a number, a byte that is not UTF-8), and because
//! polars' reader pulls a large streaming and cloud-I/O stack that a desktop
//! analysis never uses.
//!
//! ## How a file is read
//!
//! One pass over the file, through a buffered reader that hashes every byte
//! for the provenance stamp on the way (the file is never held whole in
//! memory). Each field is decoded (see [`TextEncoding`]) and parsed once into
//! its column's typed builder — polars' own builders, so the finished columns
//! are the builders' buffers, not copies. Peak memory is about the finished
//! columns plus one record.
//!
//! Types are inferred per column from every value, not a sample: integer while
//! every present value is an `i64`, number while every one is an `f64`, date
//! while every one is an ISO 8601 date, text otherwise. An integer column that
//! meets a fractional value becomes a number column (each integer converted,
//! exactly below 2⁵³). A column that meets text after numbers or dates becomes
//! text; its earlier values were not kept as written, so those columns alone
//! are read again in a second pass. A column meant to be numeric that holds a
//! typo thus loads as text, and using it as a number reports the row, the
//! line and the value.

use super::dates::{parse_date, parse_iso_date, to_epoch_days, ISO_DATE_FORMAT};
use super::text_encoding::{InvalidUtf8, TextEncoding};
use super::values::{number_hint, parse_formatted_number, NonFinite};
use super::{Frame, MemoryBudget, Provenance};
use crate::error::{Error, Result};
use polars::prelude::{
    ChunkedBuilder, Column, DataFrame, Float64Type, Int32Type, Int64Type, IntoColumn, IntoSeries,
    PrimitiveChunkedBuilder, StringChunkedBuilder,
};
use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::io::Read;
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
    /// A calendar date, ISO 8601 `YYYY-MM-DD` unless [`CsvOptions::date_format`]
    /// gives the column another form.
    Date,
    /// A number written as a spreadsheet shows it — currency sign, digit
    /// grouping, percent sign — read by [`super::parse_formatted_number`] and
    /// stored as a 64-bit float.
    FormattedNumber,
}

impl std::str::FromStr for ColumnType {
    type Err = String;
    fn from_str(s: &str) -> std::result::Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "number" | "float" | "f64" => Ok(Self::Number),
            "integer" | "int" | "i64" => Ok(Self::Integer),
            "text" | "string" | "str" => Ok(Self::Text),
            "date" => Ok(Self::Date),
            "formatted-number" | "formatted" => Ok(Self::FormattedNumber),
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
    /// chrono format strings of date columns written in another form than
    /// ISO 8601 (e.g. `%d/%m/%Y`), by column name; naming a column here makes
    /// it a date column.
    pub date_formats: BTreeMap<String, String>,
    /// The file's character encoding (default UTF-8).
    pub encoding: TextEncoding,
    /// What the loaded frame does with non-finite numbers where they are used
    /// (default: refuse them).
    pub non_finite: NonFinite,
}

impl Default for CsvOptions {
    fn default() -> Self {
        Self {
            delimiter: b',',
            has_header: true,
            null_markers: vec![String::new()],
            column_types: BTreeMap::new(),
            date_formats: BTreeMap::new(),
            encoding: TextEncoding::Utf8,
            non_finite: NonFinite::Refuse,
        }
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

    /// Reads `column` as dates written in the chrono `format` (e.g. `%d/%m/%Y`).
    pub fn date_format(mut self, column: impl Into<String>, format: impl Into<String>) -> Self {
        let column = column.into();
        self.column_types.insert(column.clone(), ColumnType::Date);
        self.date_formats.insert(column, format.into());
        self
    }

    /// Sets the file's character encoding.
    pub fn encoding(mut self, encoding: TextEncoding) -> Self {
        self.encoding = encoding;
        self
    }

    /// Treats non-finite numbers (NaN, ±infinity, overflowing literals) as
    /// missing values instead of refusing them.
    pub fn non_finite_as_missing(mut self) -> Self {
        self.non_finite = NonFinite::AsMissing;
        self
    }
}

/// Reads a delimited text file (see the module documentation for how types
/// are inferred and how the file is streamed).
pub fn load_csv(path: impl AsRef<Path>, options: &CsvOptions) -> Result<Frame> {
    let path = path.as_ref();
    let mut reader = read_header(path, options)?;
    let names = std::mem::take(&mut reader.names);
    check_overrides(path, &names, options)?;

    let mut columns: Vec<ColumnBuilder> = names
        .iter()
        .map(|name| {
            let format = options.date_formats.get(name).cloned();
            let forced = options.column_types.get(name).copied().or(format.as_ref().map(|_| ColumnType::Date));
            match forced {
                Some(ty) => ColumnBuilder::forced(name, ty, format),
                None => ColumnBuilder::Undecided { missing: 0 },
            }
        })
        .collect();
    let context = ReadContext { path, options, names: &names };
    let mut lines: Vec<u64> = Vec::new();
    let mut late_text: Vec<usize> = Vec::new();

    let budget = MemoryBudget::current()?;
    let mut memory = 0u64;
    if let Some((first, line)) = reader.pending_first.take() {
        context.push_record(&first, line, &mut columns, &mut lines, &mut late_text)?;
    }
    let sha256 = read_in_two_stages(reader.csv, |record| {
        let line = record.position().map_or(0, |p| p.line());
        context.push_record(record, line, &mut columns, &mut lines, &mut late_text)?;
        memory += record_memory(record);
        if lines.len().is_multiple_of(MEMORY_CHECK_RECORDS) {
            budget.check(
                memory,
                || format!("reading `{}` (stopped at line {line}, with the rest still to read)", path.display()),
                "read only the columns the model uses (`load_parquet_columns` for Parquet), fit the file in row \
                 batches (`plumbline fit` on a folder, `fit_batches`), or raise the limit",
            )?;
        }
        Ok(())
    })?;

    if !late_text.is_empty() {
        context.reread_as_text(&late_text, &mut columns)?;
    }
    let height = lines.len();
    let data_columns: Vec<Column> = columns.into_iter().zip(&names).map(|(c, name)| c.finish(name, height)).collect();
    let data = DataFrame::new(height, data_columns)?;
    let provenance = Provenance::for_file_hash(path, sha256, height, names.len());
    Ok(Frame::from_parts(data, provenance, Some(lines)).with_non_finite(options.non_finite))
}

/// Records between two checks of the memory taken against the budget.
const MEMORY_CHECK_RECORDS: usize = 4096;

/// The memory one record takes once loaded, over-estimated so that the check
/// errs on the side of a message: its bytes (text kept as written) plus a
/// 16-byte slot per field (polars' string view; a number takes 8) plus its
/// 8-byte file line.
fn record_memory(record: &csv::ByteRecord) -> u64 {
    (record.as_slice().len() + 16 * record.len() + 8) as u64
}

/// Records per batch handed from the splitting thread to the parsing one.
const BATCH_RECORDS: usize = 4096;

/// Runs the rest of `csv` through `consume`, record by record in file order,
/// on two threads: a scoped thread reads the file, hashes it and splits it
/// into records (the `csv` state machine); the calling thread parses the
/// fields. Batches travel through a bounded channel (at most four in flight)
/// and return empty for reuse. Returns the file's SHA-256.
///
/// Errors keep file order: the records before a malformed one are all
/// consumed first, and a failing `consume` stops the reading thread (its
/// channel closes).
fn read_in_two_stages(
    mut csv: csv::Reader<HashingReader>,
    mut consume: impl FnMut(&csv::ByteRecord) -> Result<()>,
) -> Result<String> {
    use std::sync::mpsc::{channel, sync_channel};
    let path = csv.get_ref().path.clone();
    std::thread::scope(|scope| {
        let (full_tx, full_rx) = sync_channel::<Vec<csv::ByteRecord>>(4);
        let (empty_tx, empty_rx) = channel::<Vec<csv::ByteRecord>>();
        let splitter_path = path.clone();
        let splitter = scope.spawn(move || -> Result<String> {
            loop {
                let mut batch = empty_rx.try_recv().unwrap_or_default();
                batch.resize_with(BATCH_RECORDS, csv::ByteRecord::new);
                let mut filled = 0;
                while filled < BATCH_RECORDS && next_record(&mut csv, &mut batch[filled], &splitter_path)? {
                    filled += 1;
                }
                let last = filled < BATCH_RECORDS;
                batch.truncate(filled);
                // A closed channel means the parsing side stopped at an error.
                if full_tx.send(batch).is_err() || last {
                    break;
                }
            }
            Ok(csv.into_inner().finish_hash())
        });
        for batch in full_rx {
            batch.iter().try_for_each(&mut consume)?;
            let _ = empty_tx.send(batch);
        }
        splitter.join().unwrap_or_else(|_| {
            Err(Error::CsvMalformed { path, line: 0, reason: "the reading thread stopped unexpectedly".into() })
        })
    })
}

/// A file opened for reading, hashing every byte read through it, and
/// noting the line ends the `csv` parser's line count misses.
///
/// The parser ends a record at `\r\n`, `\n` or a lone `\r` (old Mac files,
/// and some spreadsheet exports), but counts lines by the `\n`s it has
/// consumed; and a record after `\r\n` starts at that `\n`, not yet
/// consumed. So every row of a Windows file would name the line before its
/// own, and every row of a file of lone `\r`s line 1 (both found by the CSV
/// fuzz target). The lone `\r`s and the `\n`s of `\r\n` are noted here as
/// they pass, and [`physical_line`] corrects the parser's line with them,
/// so that every row's line is the one an editor shows.
struct HashingReader {
    file: std::fs::File,
    hasher: Sha256,
    path: std::path::PathBuf,
    /// Bytes read so far.
    offset: u64,
    /// A `\r` that was the last byte read: lone or not, the next byte says.
    pending_cr: Option<u64>,
    /// Offsets of lone `\r`s not yet passed by a record.
    lone_crs: std::collections::VecDeque<u64>,
    /// Lone `\r`s already passed by the records read.
    lone_crs_passed: u64,
    /// Offsets of the `\n`s of `\r\n` not yet passed by a record.
    crlf_newlines: std::collections::VecDeque<u64>,
}

impl Read for HashingReader {
    fn read(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        let n = self.file.read(buf)?;
        let bytes = &buf[..n];
        self.hasher.update(bytes);
        if let Some(cr) = self.pending_cr.take() {
            match bytes.first() {
                Some(b'\n') => self.crlf_newlines.push_back(self.offset),
                _ => self.lone_crs.push_back(cr),
            }
        }
        for (i, _) in bytes.iter().enumerate().filter(|(_, &b)| b == b'\r') {
            match bytes.get(i + 1) {
                Some(b'\n') => self.crlf_newlines.push_back(self.offset + i as u64 + 1),
                Some(_) => self.lone_crs.push_back(self.offset + i as u64),
                None if n > 0 => self.pending_cr = Some(self.offset + i as u64),
                None => {}
            }
        }
        if n == 0 {
            // The end of the file: a last `\r` was lone.
            self.lone_crs.extend(self.pending_cr.take());
        }
        self.offset += n as u64;
        Ok(n)
    }
}

impl HashingReader {
    fn open(path: &Path) -> Result<Self> {
        let file = std::fs::File::open(path).map_err(|e| super::unreadable(path, e))?;
        Ok(Self {
            file,
            hasher: Sha256::new(),
            path: path.to_path_buf(),
            offset: 0,
            pending_cr: None,
            lone_crs: std::collections::VecDeque::new(),
            lone_crs_passed: 0,
            crlf_newlines: std::collections::VecDeque::new(),
        })
    }

    /// The line ends the parser has not counted at a record starting at
    /// byte `byte`: the lone carriage returns before it, and one more when it
    /// starts at the `\n` of a `\r\n`. Positions must be asked for in file
    /// order (records are read in order).
    fn uncounted_line_ends(&mut self, byte: u64) -> u64 {
        while self.lone_crs.front().is_some_and(|&cr| cr < byte) {
            self.lone_crs.pop_front();
            self.lone_crs_passed += 1;
        }
        while self.crlf_newlines.front().is_some_and(|&newline| newline < byte) {
            self.crlf_newlines.pop_front();
        }
        self.lone_crs_passed + u64::from(self.crlf_newlines.front() == Some(&byte))
    }

    /// Reads what is left (nothing, after a complete parse) and returns the
    /// lower-case hex SHA-256 of the whole file.
    fn finish_hash(mut self) -> String {
        let _ = std::io::copy(&mut self, &mut std::io::sink());
        self.hasher.finalize().iter().map(|b| format!("{b:02x}")).collect()
    }
}

/// The file line of `position` as an editor counts it: the parser's line
/// plus the line ends it has not counted ([`HashingReader`]).
fn physical_line(csv: &mut csv::Reader<HashingReader>, position: &csv::Position) -> u64 {
    position.line() + csv.get_mut().uncounted_line_ends(position.byte())
}

/// Reads the next record into `record` with its position's line made the
/// editor's line ([`physical_line`]); `false` at the end of the file.
fn next_record(csv: &mut csv::Reader<HashingReader>, record: &mut csv::ByteRecord, path: &Path) -> Result<bool> {
    match csv.read_byte_record(record) {
        Ok(false) => Ok(false),
        Ok(true) => {
            if let Some(position) = record.position().cloned() {
                let mut fixed = position.clone();
                fixed.set_line(physical_line(csv, &position));
                record.set_position(Some(fixed));
            }
            Ok(true)
        }
        Err(e) => {
            let line = match e.position().cloned() {
                Some(position) => physical_line(csv, &position),
                None => 0,
            };
            Err(Error::CsvMalformed { path: path.to_path_buf(), line, reason: e.to_string() })
        }
    }
}

/// A reader positioned after the header: the column names, and the first
/// record when the file has no header (it is data then).
struct HeaderRead {
    csv: csv::Reader<HashingReader>,
    names: Vec<String>,
    pending_first: Option<(csv::ByteRecord, u64)>,
}

fn read_header(path: &Path, options: &CsvOptions) -> Result<HeaderRead> {
    let mut csv = csv::ReaderBuilder::new()
        .delimiter(options.delimiter)
        .has_headers(false)
        .flexible(true)
        .buffer_capacity(1 << 16)
        .from_reader(HashingReader::open(path)?);
    let no_columns = || Error::NoColumns { path: path.to_path_buf(), delimiter: options.delimiter as char };
    let mut record = csv::ByteRecord::new();
    if !next_record(&mut csv, &mut record, path)? {
        return Err(no_columns());
    }
    let line = record.position().map_or(1, |p| p.line());
    let (names, pending_first) = if options.has_header {
        let mut names = Vec::with_capacity(record.len());
        for (i, field) in record.iter().enumerate() {
            let text = options
                .encoding
                .decode(field)
                .map_err(|bad| not_utf8(path, line, &format!("header field {}", i + 1), &bad))?;
            names.push(text.trim().to_string());
        }
        (names, None)
    } else {
        ((1..=record.len()).map(|i| format!("column_{i}")).collect(), Some((record, line)))
    };
    if names.is_empty() || (names.len() == 1 && names[0].is_empty()) {
        return Err(no_columns());
    }
    for (i, name) in names.iter().enumerate() {
        if names[..i].contains(name) {
            return Err(Error::DuplicateColumn { path: path.to_path_buf(), name: name.clone() });
        }
    }
    Ok(HeaderRead { csv, names, pending_first })
}

fn check_overrides(path: &Path, names: &[String], options: &CsvOptions) -> Result<()> {
    for wanted in options.column_types.keys().chain(options.date_formats.keys()) {
        if !names.contains(wanted) {
            return Err(Error::ColumnNotFound {
                name: wanted.clone(),
                source_label: format!("`{}` (named in a column-type or date-format option)", path.display()),
                suggestions: super::frame::closest_names(wanted, names),
                available: names.to_vec(),
            });
        }
    }
    Ok(())
}

fn not_utf8(path: &Path, line: u64, place: &str, bad: &InvalidUtf8) -> Error {
    Error::NotUtf8 {
        path: path.to_path_buf(),
        line,
        place: place.to_string(),
        byte_in_field: bad.byte_in_field,
        byte: bad.byte,
        preview: bad.preview.clone(),
    }
}

/// A record of a single empty field in a file of several columns: a blank line.
fn is_blank(record: &csv::ByteRecord, width: usize) -> bool {
    width > 1 && record.len() == 1 && record.get(0).is_some_and(<[u8]>::is_empty)
}

/// What every record needs to know about the file.
struct ReadContext<'a> {
    path: &'a Path,
    options: &'a CsvOptions,
    names: &'a [String],
}

impl ReadContext<'_> {
    fn is_null(&self, value: &str) -> bool {
        self.options.null_markers.iter().any(|m| m == value)
    }

    /// [`Self::is_null`] on undecoded bytes. Exact for ASCII markers; a
    /// non-ASCII marker in another encoding than UTF-8 may not match here,
    /// but such a field is not a number either and takes the decoding path.
    fn is_null_bytes(&self, value: &[u8]) -> bool {
        self.options.null_markers.iter().any(|m| m.as_bytes() == value)
    }

    /// Parses one data record into the column builders; records in
    /// `late_text` the columns that just turned from numbers or dates to text.
    fn push_record(
        &self,
        record: &csv::ByteRecord,
        line: u64,
        columns: &mut [ColumnBuilder],
        lines: &mut Vec<u64>,
        late_text: &mut Vec<usize>,
    ) -> Result<()> {
        if is_blank(record, columns.len()) {
            return Ok(());
        }
        if record.len() != columns.len() {
            return Err(Error::CsvRagged {
                path: self.path.to_path_buf(),
                line,
                expected: columns.len(),
                found: record.len(),
            });
        }
        let row = lines.len();
        for (index, (column, field)) in columns.iter_mut().zip(record.iter()).enumerate() {
            // Fast path for the common case, a number in a number column: parse
            // the bytes directly. Anything else (a null marker, text, a byte
            // that is not ASCII) takes the full path below, which decodes.
            if let ColumnBuilder::Number(b) = column {
                let bytes = field.trim_ascii();
                if !self.is_null_bytes(bytes) {
                    if let Some(v) = parse_f64(bytes) {
                        b.append_value(v);
                        continue;
                    }
                }
            }
            let name = &self.names[index];
            let text = self
                .options
                .encoding
                .decode(field)
                .map_err(|bad| not_utf8(self.path, line, &format!("column `{name}`"), &bad))?;
            let value = text.trim();
            let value = if self.is_null(value) { None } else { Some(value) };
            if column.push(name, value, row, line)? {
                late_text.push(index);
            }
        }
        lines.push(line);
        Ok(())
    }

    /// Reads the columns at `indices` again, as text (second pass).
    fn reread_as_text(&self, indices: &[usize], columns: &mut [ColumnBuilder]) -> Result<()> {
        let mut builders: Vec<(usize, StringChunkedBuilder)> = indices
            .iter()
            .map(|&i| (i, StringChunkedBuilder::new(self.names[i].as_str().into(), INITIAL_CAPACITY)))
            .collect();
        let mut reader = read_header(self.path, self.options)?;
        let mut push = |record: &csv::ByteRecord| {
            if is_blank(record, columns.len()) {
                return;
            }
            for (index, builder) in &mut builders {
                // Every field decoded in the first pass, so this cannot fail.
                let text = self.options.encoding.decode(record.get(*index).unwrap_or_default()).unwrap_or_default();
                let value = text.trim();
                builder.append_option((!self.is_null(value)).then_some(value));
            }
        };
        if let Some((first, _)) = reader.pending_first.take() {
            push(&first);
        }
        let mut record = csv::ByteRecord::new();
        while next_record(&mut reader.csv, &mut record, self.path)? {
            push(&record);
        }
        for (index, builder) in builders {
            columns[index] = ColumnBuilder::Text(builder);
        }
        Ok(())
    }
}

/// Initial capacity of a column builder; builders grow by doubling, which for
/// large buffers glibc serves by remapping pages rather than copying them.
const INITIAL_CAPACITY: usize = 1024;

/// One column being filled, in the narrowest type its values so far allow.
enum ColumnBuilder {
    /// Only missing values so far (their count); type undecided.
    Undecided {
        missing: usize,
    },
    Integer(PrimitiveChunkedBuilder<Int64Type>),
    Number(PrimitiveChunkedBuilder<Float64Type>),
    Date(PrimitiveChunkedBuilder<Int32Type>),
    Text(StringChunkedBuilder),
    /// Numbers or dates that met text; the values are re-read as text afterwards.
    PendingText,
    /// A type fixed by the user: every value must parse as it, or loading
    /// fails at that line. `format` is the date format of a date column.
    Forced {
        ty: ColumnType,
        format: String,
        builder: Box<ColumnBuilder>,
    },
}

impl ColumnBuilder {
    fn forced(name: &str, ty: ColumnType, format: Option<String>) -> Self {
        let field = name.into();
        let builder = match ty {
            ColumnType::Integer => Self::Integer(PrimitiveChunkedBuilder::new(field, INITIAL_CAPACITY)),
            ColumnType::Number | ColumnType::FormattedNumber => {
                Self::Number(PrimitiveChunkedBuilder::new(field, INITIAL_CAPACITY))
            }
            ColumnType::Date => Self::Date(PrimitiveChunkedBuilder::new(field, INITIAL_CAPACITY)),
            ColumnType::Text => Self::Text(StringChunkedBuilder::new(field, INITIAL_CAPACITY)),
        };
        Self::Forced { ty, format: format.unwrap_or_else(|| ISO_DATE_FORMAT.to_string()), builder: Box::new(builder) }
    }

    /// Appends one value (`None` when missing) of column `name`, data row `row`
    /// at file line `line`. Returns `true` when the column has just become
    /// text after holding numbers or dates.
    fn push(&mut self, name: &str, value: Option<&str>, row: usize, line: u64) -> Result<bool> {
        let appended = match (&mut *self, value) {
            (Self::Forced { ty, format, builder }, value) => {
                push_forced(builder, *ty, format, name, value, row, line)?;
                true
            }
            (Self::Undecided { missing }, None) => {
                *missing += 1;
                true
            }
            (Self::Undecided { .. }, Some(_)) => false,
            (Self::Integer(b), v) => append_parsed(b, v, |t| t.parse::<i64>().ok()),
            (Self::Number(b), v) => append_parsed(b, v, |t| parse_f64(t.as_bytes())),
            (Self::Date(b), v) => append_parsed(b, v, |t| parse_iso_date(t).map(to_epoch_days)),
            (Self::Text(b), v) => {
                b.append_option(v);
                true
            }
            (Self::PendingText, _) => true,
        };
        match (appended, value) {
            (false, Some(text)) => Ok(self.widen(name, text)),
            _ => Ok(false),
        }
    }

    /// Moves to a wider type that holds `text` as well as every earlier value
    /// and appends `text`; returns `true` when that type is text and the
    /// earlier values must be re-read.
    fn widen(&mut self, name: &str, text: &str) -> bool {
        let field = || name.into();
        match std::mem::replace(self, Self::PendingText) {
            Self::Undecided { missing } => {
                *self = if let Ok(v) = text.parse::<i64>() {
                    let mut b = PrimitiveChunkedBuilder::<Int64Type>::new(field(), INITIAL_CAPACITY.max(missing + 1));
                    (0..missing).for_each(|_| b.append_null());
                    b.append_value(v);
                    Self::Integer(b)
                } else if let Some(v) = parse_f64(text.as_bytes()) {
                    let mut b = PrimitiveChunkedBuilder::<Float64Type>::new(field(), INITIAL_CAPACITY.max(missing + 1));
                    (0..missing).for_each(|_| b.append_null());
                    b.append_value(v);
                    Self::Number(b)
                } else if let Some(d) = parse_iso_date(text) {
                    let mut b = PrimitiveChunkedBuilder::<Int32Type>::new(field(), INITIAL_CAPACITY.max(missing + 1));
                    (0..missing).for_each(|_| b.append_null());
                    b.append_value(to_epoch_days(d));
                    Self::Date(b)
                } else {
                    let mut b = StringChunkedBuilder::new(field(), INITIAL_CAPACITY.max(missing + 1));
                    (0..missing).for_each(|_| b.append_null());
                    b.append_value(text);
                    Self::Text(b)
                };
                false
            }
            Self::Integer(b) => match parse_f64(text.as_bytes()) {
                Some(value) => {
                    // Every earlier value was an integer; `as f64` rounds to
                    // nearest, exactly as parsing its digits as f64 would.
                    let integers = b.finish();
                    let mut numbers = PrimitiveChunkedBuilder::<Float64Type>::new(field(), 2 * integers.len() + 1);
                    integers.iter().for_each(|v| numbers.append_option(v.map(|v| v as f64)));
                    numbers.append_value(value);
                    *self = Self::Number(numbers);
                    false
                }
                None => true,
            },
            // Numbers or dates that met text.
            _ => true,
        }
    }

    fn finish(self, name: &str, height: usize) -> Column {
        match self {
            // A column with no value at all loads as an all-missing integer column.
            Self::Undecided { missing } => {
                let mut b = PrimitiveChunkedBuilder::<Int64Type>::new(name.into(), missing);
                (0..missing).for_each(|_| b.append_null());
                b.finish().into_column()
            }
            Self::Integer(b) => b.finish().into_column(),
            Self::Number(b) => b.finish().into_column(),
            Self::Date(b) => b.finish().into_series().into_date().into_column(),
            Self::Text(b) => b.finish().into_column(),
            // Replaced by the second pass before finishing.
            Self::PendingText => Column::full_null(name.into(), height, &polars::prelude::DataType::String),
            Self::Forced { builder, .. } => builder.finish(name, height),
        }
    }
}

/// A decimal number (or `NaN`, `inf`, `infinity`, signed) written in ASCII,
/// correctly rounded to f64 — Eisel–Lemire with a big-decimal fallback, by
/// `fast-float2` (the parser polars' own CSV reader uses), which reads bytes
/// without a UTF-8 check. A literal beyond the f64 range gives ±∞, as the
/// standard library's parser does.
fn parse_f64(bytes: &[u8]) -> Option<f64> {
    fast_float2::parse::<f64, _>(bytes).ok()
}

/// Appends a missing value, or a present one that `parse` reads; returns
/// `false` (appending nothing) when `parse` cannot read it.
fn append_parsed<T: polars::prelude::PolarsNumericType>(
    builder: &mut PrimitiveChunkedBuilder<T>,
    value: Option<&str>,
    parse: impl Fn(&str) -> Option<T::Native>,
) -> bool {
    match value {
        None => builder.append_null(),
        Some(text) => match parse(text) {
            Some(v) => builder.append_value(v),
            None => return false,
        },
    }
    true
}

/// Appends a value to a column whose type the user fixed, refusing one that
/// does not parse as that type.
fn push_forced(
    builder: &mut ColumnBuilder,
    ty: ColumnType,
    format: &str,
    name: &str,
    value: Option<&str>,
    row: usize,
    line: u64,
) -> Result<()> {
    let not_numeric = |text: &str| Error::NotNumeric {
        column: name.to_string(),
        row: row + 1,
        line: Some(line),
        value: text.to_string(),
        hint: number_hint(name, text),
    };
    match builder {
        ColumnBuilder::Integer(b) => {
            b.append_option(value.map(|t| t.parse::<i64>().map_err(|_| not_numeric(t))).transpose()?)
        }
        ColumnBuilder::Number(b) if ty == ColumnType::FormattedNumber => {
            b.append_option(value.map(|t| parse_formatted_number(t).ok_or_else(|| not_numeric(t))).transpose()?)
        }
        ColumnBuilder::Number(b) => {
            b.append_option(value.map(|t| parse_f64(t.as_bytes()).ok_or_else(|| not_numeric(t))).transpose()?)
        }
        ColumnBuilder::Date(b) => {
            let parsed = value.map(|t| {
                parse_date(t, format).map(to_epoch_days).ok_or_else(|| Error::BadDate {
                    column: name.to_string(),
                    row: row + 1,
                    line: Some(line),
                    value: t.to_string(),
                    format: format.to_string(),
                })
            });
            b.append_option(parsed.transpose()?)
        }
        ColumnBuilder::Text(b) => b.append_option(value),
        _ => {}
    }
    Ok(())
}
