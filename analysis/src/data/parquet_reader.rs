//! Apache Parquet into a [`Frame`], through polars' Parquet reader.

use super::{read_bytes, sha256_hex, Frame, Provenance};
use crate::error::{Error, Result};
use polars::prelude::{ParquetReader, SerReader};
use std::io::Cursor;
use std::path::Path;

/// Reads a Parquet file. The bytes are read once, then hashed for the
/// provenance stamp on one thread while polars decodes them on the others.
/// Parquet has no text lines, so errors name data rows only.
pub fn load_parquet(path: impl AsRef<Path>) -> Result<Frame> {
    read_parquet(path.as_ref(), None)
}

/// Reads only `columns` of a Parquet file (Parquet stores each column apart,
/// so the others are never decoded) — what a fit needs of a wide file. The
/// provenance stamp still hashes every byte of the file and counts all its
/// columns. A column the file does not have makes this read the whole file,
/// so that the error a later step gives names the columns it does have.
pub fn load_parquet_columns(path: impl AsRef<Path>, columns: &[String]) -> Result<Frame> {
    read_parquet(path.as_ref(), Some(columns))
}

fn read_parquet(path: &Path, columns: Option<&[String]>) -> Result<Frame> {
    let bytes = read_bytes(path)?;
    let unreadable = |cause| Error::ParquetUnreadable { path: path.to_path_buf(), cause };
    let (sha256, decoded) = std::thread::scope(|scope| {
        let hashing = scope.spawn(|| sha256_hex(&bytes));
        let decoded = (|| {
            let mut reader = ParquetReader::new(Cursor::new(&bytes));
            let schema = reader.schema()?;
            let width = schema.len();
            let wanted: Option<Vec<String>> =
                columns.filter(|wanted| wanted.iter().all(|c| schema.contains(c.as_str()))).map(|wanted| {
                    schema
                        .iter_names()
                        .filter(|n| wanted.iter().any(|c| c == n.as_str()))
                        .map(|n| n.to_string())
                        .collect()
                });
            let reader = ParquetReader::new(Cursor::new(&bytes)).with_columns(wanted);
            reader.finish().map(|data| (data, width))
        })();
        // Hashing a byte slice cannot fail; a panic there is a bug, re-raised here.
        (hashing.join().unwrap_or_else(|e| std::panic::resume_unwind(e)), decoded)
    });
    let (data, width) = decoded.map_err(unreadable)?;
    let provenance = Provenance::for_file_hash(path, sha256, data.height(), width);
    Ok(Frame::from_parts(data, provenance, None))
}
