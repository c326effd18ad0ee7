//! Where a frame came from: enough to tell, months later, whether a rerun saw
//! the same data.

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

/// The provenance stamp every loaded frame carries.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Provenance {
    /// The path the data was read from, as given by the user, or a label such
    /// as `(built in memory)` for frames made in code.
    pub path: String,
    /// Lower-case hex SHA-256 of the file's bytes (FIPS 180-4); empty for
    /// frames built in memory.
    pub sha256: String,
    /// Data rows (header excluded).
    pub rows: usize,
    /// Columns.
    pub cols: usize,
    /// When the file was read, UTC, RFC 3339 to the second.
    pub loaded_at: String,
}

impl Provenance {
    /// Stamps bytes read from `path`.
    pub fn for_file(path: &std::path::Path, bytes: &[u8], rows: usize, cols: usize) -> Self {
        Self { path: path.display().to_string(), sha256: sha256_hex(bytes), rows, cols, loaded_at: now_utc() }
    }

    /// Stamps a file whose bytes were hashed while they were streamed.
    pub(crate) fn for_file_hash(path: &std::path::Path, sha256: String, rows: usize, cols: usize) -> Self {
        Self { path: path.display().to_string(), sha256, rows, cols, loaded_at: now_utc() }
    }

    /// Stamps a frame that was built in code rather than read from a file.
    pub fn in_memory(label: &str, rows: usize, cols: usize) -> Self {
        Self { path: label.to_string(), sha256: String::new(), rows, cols, loaded_at: now_utc() }
    }

    /// The first 12 hex digits of the hash, for compact display.
    pub fn short_hash(&self) -> &str {
        &self.sha256[..self.sha256.len().min(12)]
    }
}

/// Lower-case hex SHA-256 digest.
pub fn sha256_hex(bytes: &[u8]) -> String {
    let digest = Sha256::digest(bytes);
    digest.iter().map(|b| format!("{b:02x}")).collect()
}

fn now_utc() -> String {
    chrono::Utc::now().format("%Y-%m-%dT%H:%M:%SZ").to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    // FIPS 180-4 / NIST CSRC example: SHA-256("abc").
    #[test]
    fn sha256_of_abc_matches_fips_example() {
        assert_eq!(sha256_hex(b"abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    }
}
