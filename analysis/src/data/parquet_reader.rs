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
    let path = path.as_ref();
    let bytes = read_bytes(path)?;
    let (sha256, decoded) = std::thread::scope(|scope| {
        let hashing = scope.spawn(|| sha256_hex(&bytes));
        let decoded = ParquetReader::new(Cursor::new(&bytes)).finish();
        // Hashing a byte slice cannot fail; a panic there is a bug, re-raised here.
        (hashing.join().unwrap_or_else(|e| std::panic::resume_unwind(e)), decoded)
    });
    let data = decoded.map_err(|e| Error::ParquetUnreadable { path: path.to_path_buf(), cause: e })?;
    let provenance = Provenance::for_file_hash(path, sha256, data.height(), data.width());
    Ok(Frame::from_parts(data, provenance, None))
}
