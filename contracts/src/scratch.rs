//! Scratch files for readers that take a path.
//!
//! The readers are called as users call them, on a file, so that the contract
//! covers the same code path. Each thread writes to its own file, in memory
//! (`/dev/shm`) where the machine has it, and reuses it for every input.

use std::path::PathBuf;

/// The folder of scratch files: `/dev/shm` when present, else the temp dir.
fn folder() -> PathBuf {
    let shm = PathBuf::from("/dev/shm");
    if shm.is_dir() {
        shm
    } else {
        std::env::temp_dir()
    }
}

/// Writes `data` to this thread's scratch file with extension `extension`
/// and returns its path. A failure to write is the machine's fault, not the
/// reader's, so it panics with the reason.
pub fn file_with(data: &[u8], extension: &str) -> PathBuf {
    let thread = format!("{:?}", std::thread::current().id()).replace(|c: char| !c.is_ascii_alphanumeric(), "");
    let path = folder().join(format!("plumbline-contract-{}-{thread}.{extension}", std::process::id()));
    if let Err(e) = std::fs::write(&path, data) {
        panic!("cannot write the scratch file {}: {e}", path.display());
    }
    path
}
