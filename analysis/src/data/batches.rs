//! Row batches from files too large to load at once.
//!
//! A [`RowBatches`] names a CSV or Parquet file, or a directory of them, and
//! the columns a model reads; [`RowBatches::for_each_batch`] hands out frames
//! of at most `batch_rows` rows, file by file in name order, so memory is
//! bounded by one batch (and, for Parquet, the row groups it overlaps)
//! whatever the files' total size. Each pass rereads the files; a fit makes
//! three (see `fit::streamed`).
//!
//! Every batch is an ordinary [`Frame`]: numbers that are not finite are
//! refused (or read as missing) by the same rule as a loaded file, and CSV
//! rows keep their file lines for error messages. A batch's provenance names
//! its own file; [`RowBatches::fingerprint`] stamps the whole set.

use super::{unreadable, Frame, NonFinite, Provenance};
use crate::error::{Error, Result};
use polars::prelude::{Column, DataFrame, ParquetReader, SerReader};
use sha2::{Digest, Sha256};
use std::io::Read;
use std::path::{Path, PathBuf};

/// The file formats read in batches.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum BatchFormat {
    Csv,
    Parquet,
}

fn format_of(path: &Path) -> Option<BatchFormat> {
    match path.extension().and_then(|e| e.to_str()).map(str::to_ascii_lowercase).as_deref() {
        Some("csv") => Some(BatchFormat::Csv),
        Some("parquet") | Some("pq") => Some(BatchFormat::Parquet),
        _ => None,
    }
}

/// A file or directory of CSV / Parquet files read batch by batch.
#[derive(Debug, Clone)]
pub struct RowBatches {
    /// The path as given.
    place: PathBuf,
    /// The files, in name order.
    files: Vec<PathBuf>,
    /// Columns read as numbers.
    numbers: Vec<String>,
    /// Columns read as text labels.
    labels: Vec<String>,
    /// Rows per batch.
    batch_rows: usize,
    /// What batches do with non-finite numbers.
    non_finite: NonFinite,
}

impl RowBatches {
    /// Batches of `path` (a `.csv` / `.parquet` file, or a directory whose
    /// `.csv` and `.parquet` files are read in name order), reading only the
    /// columns in `numbers` and `labels`. CSV files must be UTF-8 with a
    /// header and `,` delimiters; an empty field is a missing value.
    pub fn open(path: impl AsRef<Path>, numbers: &[String], labels: &[String], batch_rows: usize) -> Result<Self> {
        let place = path.as_ref().to_path_buf();
        let files = if place.is_dir() {
            let entries = std::fs::read_dir(&place).map_err(|e| unreadable(&place, e))?;
            let mut files: Vec<PathBuf> = entries
                .filter_map(|e| e.ok().map(|e| e.path()))
                .filter(|p| p.is_file() && format_of(p).is_some())
                .collect();
            files.sort();
            if files.is_empty() {
                return Err(Error::NoDataFiles { path: place });
            }
            files
        } else {
            if format_of(&place).is_none() {
                return Err(Error::Specification(format!(
                    "`{}` is read in batches only as a `.csv` or `.parquet` file, or a directory of them",
                    place.display()
                )));
            }
            std::fs::metadata(&place).map_err(|e| unreadable(&place, e))?;
            vec![place.clone()]
        };
        if batch_rows == 0 {
            return Err(Error::OutOfRange {
                what: "the rows per batch".into(),
                requirement: "at least 1".into(),
                value: "0".into(),
            });
        }
        Ok(Self {
            place,
            files,
            numbers: numbers.to_vec(),
            labels: labels.to_vec(),
            batch_rows,
            non_finite: NonFinite::Refuse,
        })
    }

    /// Treats non-finite numbers as missing instead of refusing them.
    pub fn non_finite_as_missing(mut self) -> Self {
        self.non_finite = NonFinite::AsMissing;
        self
    }

    /// The files read, in order.
    pub fn files(&self) -> &[PathBuf] {
        &self.files
    }

    /// Rows per batch.
    pub fn batch_rows(&self) -> usize {
        self.batch_rows
    }

    /// Calls `visit` with every batch, in file and row order.
    pub fn for_each_batch(&self, mut visit: impl FnMut(&Frame) -> Result<()>) -> Result<()> {
        for file in &self.files {
            match format_of(file) {
                Some(BatchFormat::Parquet) => self.parquet_batches(file, &mut visit)?,
                _ => self.csv_batches(file, &mut visit)?,
            }
        }
        Ok(())
    }

    /// The provenance of the whole set: the path as given, and the SHA-256 of
    /// the files' SHA-256 digests in order (a single file: its own digest),
    /// with the total rows. Reads every byte once.
    pub fn fingerprint(&self, rows: usize) -> Result<Provenance> {
        fingerprint_files(&self.place, &self.files, rows, self.numbers.len() + self.labels.len())
    }

    fn wanted(&self) -> Vec<String> {
        let mut all: Vec<String> = self.numbers.iter().chain(&self.labels).cloned().collect();
        all.dedup();
        all
    }

    fn parquet_batches(&self, file: &Path, visit: &mut impl FnMut(&Frame) -> Result<()>) -> Result<()> {
        let open = || std::fs::File::open(file).map_err(|e| unreadable(file, e));
        let parquet_error = |cause| Error::ParquetUnreadable { path: file.to_path_buf(), cause };
        let mut reader = ParquetReader::new(open()?);
        let total = reader.num_rows().map_err(parquet_error)?;
        let mut start = 0;
        while start < total {
            let count = self.batch_rows.min(total - start);
            let data = ParquetReader::new(open()?)
                .with_columns(Some(self.wanted()))
                .with_slice(Some((start, count)))
                .finish()
                .map_err(parquet_error)?;
            let provenance = Provenance::for_file_hash(file, String::new(), data.height(), data.width());
            visit(&Frame::from_parts(data, provenance, None).with_non_finite(self.non_finite))?;
            start += count;
        }
        Ok(())
    }

    fn csv_batches(&self, file: &Path, visit: &mut impl FnMut(&Frame) -> Result<()>) -> Result<()> {
        let input = std::fs::File::open(file).map_err(|e| unreadable(file, e))?;
        let mut csv = csv::ReaderBuilder::new().has_headers(true).from_reader(std::io::BufReader::new(input));
        let malformed = |line: u64, reason: String| Error::CsvMalformed { path: file.to_path_buf(), line, reason };
        let header: Vec<String> =
            csv.headers().map_err(|e| malformed(1, e.to_string()))?.iter().map(|h| h.trim().to_string()).collect();
        let index_of = |name: &String| {
            header.iter().position(|h| h == name).ok_or_else(|| Error::ColumnNotFound {
                name: name.clone(),
                source_label: format!("`{}`", file.display()),
                suggestions: super::frame::closest_names(name, &header),
                available: header.clone(),
            })
        };
        let number_at: Vec<usize> = self.numbers.iter().map(index_of).collect::<Result<_>>()?;
        let label_at: Vec<usize> = self.labels.iter().map(index_of).collect::<Result<_>>()?;
        let mut record = csv::ByteRecord::new();
        loop {
            let mut numbers: Vec<Vec<Option<f64>>> = vec![Vec::with_capacity(self.batch_rows); number_at.len()];
            let mut labels: Vec<Vec<Option<String>>> = vec![Vec::with_capacity(self.batch_rows); label_at.len()];
            let mut lines = Vec::with_capacity(self.batch_rows);
            while lines.len() < self.batch_rows {
                let more = csv
                    .read_byte_record(&mut record)
                    .map_err(|e| malformed(e.position().map_or(0, |p| p.line()), e.to_string()))?;
                if !more {
                    break;
                }
                let line = record.position().map_or(0, |p| p.line());
                if record.len() != header.len() {
                    return Err(Error::CsvRagged {
                        path: file.to_path_buf(),
                        line,
                        expected: header.len(),
                        found: record.len(),
                    });
                }
                for (column, &at) in number_at.iter().enumerate() {
                    let text = std::str::from_utf8(&record[at]).unwrap_or("").trim();
                    let value = if text.is_empty() {
                        None
                    } else {
                        Some(fast_float2::parse::<f64, _>(text).map_err(|_| {
                            malformed(line, format!("`{}` should be a number but reads `{text}`", self.numbers[column]))
                        })?)
                    };
                    numbers[column].push(value);
                }
                for (column, &at) in label_at.iter().enumerate() {
                    let text = std::str::from_utf8(&record[at])
                        .map_err(|_| malformed(line, format!("`{}` is not valid UTF-8", self.labels[column])))?
                        .trim();
                    labels[column].push((!text.is_empty()).then(|| text.to_string()));
                }
                lines.push(line);
            }
            if lines.is_empty() {
                return Ok(());
            }
            let height = lines.len();
            let mut columns: Vec<Column> = Vec::with_capacity(number_at.len() + label_at.len());
            for (name, values) in self.numbers.iter().zip(numbers) {
                columns.push(Column::new(name.as_str().into(), values));
            }
            for (name, values) in self.labels.iter().zip(labels) {
                if !self.numbers.contains(name) {
                    columns.push(Column::new(name.as_str().into(), values));
                }
            }
            let data = DataFrame::new(height, columns)?;
            let provenance = Provenance::for_file_hash(file, String::new(), height, data.width());
            let last = height < self.batch_rows;
            visit(&Frame::from_parts(data, provenance, Some(lines)).with_non_finite(self.non_finite))?;
            if last {
                return Ok(());
            }
        }
    }
}

fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// The provenance stamp of data spread over `files` (given as `place`): the
/// SHA-256 of the one file, or of the files' digests in the order given;
/// `rows` and `columns` as read. Every reader of such data (row batches, a
/// query engine's partitions) stamps it this way, so their documents agree.
pub fn fingerprint_files(place: &Path, files: &[PathBuf], rows: usize, columns: usize) -> Result<Provenance> {
    let mut digests = Vec::with_capacity(files.len());
    for file in files {
        let mut hasher = Sha256::new();
        let mut input = std::fs::File::open(file).map_err(|e| unreadable(file, e))?;
        let mut buffer = vec![0u8; 1 << 20];
        loop {
            let read = input.read(&mut buffer).map_err(|e| unreadable(file, e))?;
            if read == 0 {
                break;
            }
            hasher.update(&buffer[..read]);
        }
        digests.push(hasher.finalize());
    }
    let sha256 = if digests.len() == 1 {
        hex(&digests[0])
    } else {
        let mut outer = Sha256::new();
        digests.iter().for_each(|d| outer.update(d));
        hex(&outer.finalize())
    };
    Ok(Provenance::for_file_hash(place, sha256, rows, columns))
}
