//! Replays every committed fuzz input through its target's contract, on
//! stable Rust, in the test command: the corpus the fuzzer grew
//! (`fuzz/corpus/TARGET/`) and the inputs of past findings
//! (`fuzz/regressions/TARGET/`, one file per finding). A regression thus
//! fails CI without a nightly build.

use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};

fn fuzz_folder() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("..").join("fuzz")
}

/// The files of `folder`, sorted by name; none when it does not exist.
fn inputs(folder: &Path) -> Vec<PathBuf> {
    let Ok(entries) = std::fs::read_dir(folder) else { return Vec::new() };
    let mut files: Vec<PathBuf> = entries.filter_map(|e| e.ok()).map(|e| e.path()).filter(|p| p.is_file()).collect();
    files.sort();
    files
}

#[test]
fn every_committed_input_keeps_its_contract() {
    let mut failures = Vec::new();
    let mut counts = Vec::new();
    for (target, contract) in plumbline_contracts::TARGETS {
        let corpus = inputs(&fuzz_folder().join("corpus").join(target));
        assert!(
            !corpus.is_empty(),
            "no committed corpus for fuzz target `{target}` under fuzz/corpus/{target}/; run `fuzz/run` and commit the minimised corpus"
        );
        let regressions = inputs(&fuzz_folder().join("regressions").join(target));
        counts.push(format!("{target}: {} corpus, {} regressions", corpus.len(), regressions.len()));
        for path in corpus.iter().chain(&regressions) {
            let data = std::fs::read(path).unwrap_or_else(|e| panic!("cannot read {}: {e}", path.display()));
            if let Err(panic) = catch_unwind(AssertUnwindSafe(|| contract(&data))) {
                let reason = panic
                    .downcast_ref::<String>()
                    .cloned()
                    .or_else(|| panic.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_default();
                failures.push(format!("{target}, {}: {reason}", path.display()));
            }
        }
    }
    eprintln!("replayed: {}", counts.join("; "));
    assert!(failures.is_empty(), "{} input(s) break their contract:\n{}", failures.len(), failures.join("\n"));
}
