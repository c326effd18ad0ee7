//! Shared helpers of the cross-crate tests: where the external reference data
//! live, and scratch files.

use std::path::PathBuf;

/// The repository root.
pub fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// The external reference folder (`../shared/reference` beside the checkout,
/// or `$PLUMBLINE_REFERENCE_DIR`). Panics with instructions when it is absent:
/// a check against external data must never pass silently without the data.
pub fn reference_dir() -> PathBuf {
    let dir = std::env::var_os("PLUMBLINE_REFERENCE_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| repo_root().join("..").join("shared").join("reference"));
    if !dir.join("nist-strd").join("certified.json").is_file() {
        panic!(
            "\n\n*** EXTERNAL REFERENCE DATA MISSING ***\nexpected {}/nist-strd/certified.json.\n\
             The accuracy tests check against NIST StRD certified values and cannot run without them.\n\
             Place the shared/ folder beside the checkout or set PLUMBLINE_REFERENCE_DIR.\n",
            dir.display()
        );
    }
    dir
}

/// A fresh scratch folder, unique to this call (tests run in parallel threads).
pub fn scratch_dir(name: &str) -> PathBuf {
    static CALLS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let call = CALLS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let dir = std::env::temp_dir().join(format!("plumbline-test-{}-{call}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("create scratch dir");
    dir
}

/// Writes `body` to `dir/name` and returns the path.
pub fn write_file(dir: &std::path::Path, name: &str, body: &str) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, body).expect("write scratch file");
    path
}
