//! Apache Parquet into a [`Frame`], through polars' Parquet reader.

use super::{read_bytes, Frame, Provenance};
use crate::error::{Error, Result};
use polars::prelude::{ParquetReader, SerReader};
use std::io::Cursor;
use std::path::Path;

/// Reads a Parquet file. The bytes are read once, hashed for the provenance
/// stamp, and decoded from memory. Parquet has no text lines, so errors name
/// data rows only.
pub fn load_parquet(path: impl AsRef<Path>) -> Result<Frame> {
    let path = path.as_ref();
    let bytes = read_bytes(path)?;
    let data = ParquetReader::new(Cursor::new(&bytes))
        .finish()
        .map_err(|e| Error::ParquetUnreadable { path: path.to_path_buf(), cause: e })?;
    let provenance = Provenance::for_file(path, &bytes, data.height(), data.width());
    Ok(Frame::from_parts(data, provenance, None))
}
