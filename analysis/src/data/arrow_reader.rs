//! Apache Arrow IPC files (`.arrow`, `.feather`, `.ipc`) into a [`Frame`],
//! through polars' own IPC reader.

use super::decoder_guard::{check_decoded, polars_guarded};
use super::provenance::{sha256_hex, SourceKind, SourceStamp, HASH_OF_FILE_BYTES};
use super::{read_bytes, Frame, MemoryBudget, Provenance};
use crate::error::{Error, Result};
use polars::prelude::{IpcReader, SerReader};
use std::io::Cursor;
use std::path::Path;

/// Reads an Arrow IPC file (the file format, also known as Feather v2). The
/// bytes are read once, hashed for the provenance stamp, and decoded from
/// memory. Arrow has no text lines, so errors name data rows only.
pub fn load_arrow(path: impl AsRef<Path>) -> Result<Frame> {
    let path = path.as_ref();
    // The file's bytes and the frame decoded from them are in memory at once;
    // uncompressed Arrow takes about its file size again once decoded.
    let file_size = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    MemoryBudget::current()?.check(
        file_size.saturating_mul(2),
        || format!("reading `{}` into memory", path.display()),
        "convert it to Parquet and read only the columns the model uses (`load_parquet_columns`), or raise the limit",
    )?;
    let bytes = read_bytes(path)?;
    let data = polars_guarded(|| {
        let data = IpcReader::new(Cursor::new(&bytes)).finish()?;
        check_decoded(&data).map(|()| data)
    })
    .map_err(|cause| Error::ArrowUnreadable { path: path.to_path_buf(), cause })?;
    super::dates::check_calendar_values(&data, &format!("`{}`", path.display()))?;
    let stamp = SourceStamp::new(SourceKind::ArrowIpc, HASH_OF_FILE_BYTES);
    let provenance =
        Provenance::for_source(path.display().to_string(), sha256_hex(&bytes), data.height(), data.width(), stamp);
    Ok(Frame::from_parts(data, provenance, None))
}
