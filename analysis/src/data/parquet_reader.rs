//! Apache Parquet into a [`Frame`], through polars' Parquet reader.

use super::decoder_guard::{check_decoded, polars_guarded};
use super::{read_bytes, sha256_hex, Frame, MemoryBudget, Provenance};
use crate::error::{Error, Result};
use polars::io::parquet::read::FileMetadata;
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

/// What to do when a Parquet file is larger than the memory budget.
const PARQUET_ADVICE: &str = "read only the columns the model uses (`load_parquet_columns`; the command line \
     does so), fit the file in row batches (`plumbline fit` on a folder, `fit_batches`), or raise the limit";

fn read_parquet(path: &Path, columns: Option<&[String]>) -> Result<Frame> {
    let budget = MemoryBudget::current()?;
    let reading = || format!("reading `{}` into memory", path.display());
    let file_size = std::fs::metadata(path).map(|m| m.len()).unwrap_or(0);
    budget.check(file_size, reading, PARQUET_ADVICE)?;
    let bytes = read_bytes(path)?;
    let unreadable = |cause| Error::ParquetUnreadable { path: path.to_path_buf(), cause };
    let mut reader = ParquetReader::new(Cursor::new(&bytes));
    let schema = polars_guarded(|| reader.schema()).map_err(unreadable)?;
    let width = schema.len();
    let wanted: Option<Vec<String>> =
        columns.filter(|wanted| wanted.iter().all(|c| schema.contains(c.as_str()))).map(|wanted| {
            schema.iter_names().filter(|n| wanted.iter().any(|c| c == n.as_str())).map(|n| n.to_string()).collect()
        });
    let decoded_size = {
        let metadata = polars_guarded(|| reader.get_metadata().cloned()).map_err(unreadable)?;
        let names: Vec<String> = match &wanted {
            Some(names) => names.clone(),
            None => schema.iter_names().map(|n| n.to_string()).collect(),
        };
        uncompressed_size(&metadata, &names)
    };
    budget.check(file_size.saturating_add(decoded_size), reading, PARQUET_ADVICE)?;
    let (sha256, decoded) = std::thread::scope(|scope| {
        let hashing = scope.spawn(|| sha256_hex(&bytes));
        let decoded = polars_guarded(|| {
            let data = ParquetReader::new(Cursor::new(&bytes)).with_columns(wanted).finish()?;
            check_decoded(&data).map(|()| data)
        });
        // Hashing a byte slice cannot fail; a panic there is a bug, re-raised here.
        (hashing.join().unwrap_or_else(|e| std::panic::resume_unwind(e)), decoded)
    });
    let data = decoded.map_err(unreadable)?;
    super::dates::check_calendar_values(&data, &format!("`{}`", path.display()))?;
    let provenance = Provenance::for_file_hash(path, sha256, data.height(), width);
    Ok(Frame::from_parts(data, provenance, None))
}

/// The uncompressed size the file's metadata gives for the columns `names`,
/// over every row group: about the memory their decoded values take. A
/// negative size (a damaged file) counts as none; the sum saturates.
fn uncompressed_size(metadata: &FileMetadata, names: &[String]) -> u64 {
    let mut total = 0u64;
    for group in &metadata.row_groups {
        let chunks = group.parquet_columns();
        for name in names {
            for &index in group.columns_idxs_under_root_iter(name).unwrap_or(&[]) {
                let size = chunks.get(index).map_or(0, |c| c.uncompressed_size().max(0) as u64);
                total = total.saturating_add(size);
            }
        }
    }
    total
}
