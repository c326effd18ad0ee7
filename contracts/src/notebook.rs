//! Contract of the notebook reader (`plumbline run`, `plumbline diff`) and
//! what it reads from a notebook: the inputs cell, the run record, the report.
//!
//! A notebook shared by a colleague may be anything. On any text:
//! - the reader refuses with a reason, or
//! - every cell's kind, source, outputs and count can be read; the inputs
//!   cell, its declared inputs and the run record are read or refused with a
//!   reason; setting a declared input to its own value leaves a notebook that
//!   reads again; the notebook written atomically reads back the same, and
//!   writing that again gives the same bytes;
//! - the run's results (`plumbline diff`) are read or refused with a reason;
//! - the HTML report of a notebook whose cells hold no outputs carries no
//!   script: Markdown's raw HTML is shown as text.

use plumbline_kernel::notebook::document::Notebook;
use plumbline_kernel::notebook::inputs::{apply, declared_inputs, inputs_cell};
use plumbline_kernel::notebook::record::RunRecord;
use plumbline_kernel::notebook::report::{report_html, RunFacts};
use plumbline_kernel::notebook::results::read_run;

/// Reads `data` (UTF-8) as a notebook and everything drawn from it.
pub fn notebook(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let notebook = match Notebook::parse(text) {
        Err(reason) => {
            assert!(!reason.trim().is_empty(), "a notebook was refused without a reason");
            return;
        }
        Ok(notebook) => notebook,
    };
    let mut outputs = 0;
    for cell in 0..notebook.len() {
        let _ = (notebook.kind(cell), notebook.source(cell), notebook.execution_count(cell));
        outputs += notebook.outputs(cell).len();
    }
    match inputs_cell(&notebook) {
        Err(error) => assert!(!error.to_string().is_empty(), "the inputs cell was refused without a reason"),
        Ok(None) => {}
        Ok(Some(cell)) => {
            let declared = declared_inputs(&notebook.source(cell));
            if let Some(first) = declared.first() {
                let mut changed = notebook.clone();
                if apply(&mut changed, &[(first.name.clone(), first.value.clone())]).is_ok() {
                    reads_back_the_same(&changed);
                }
            }
        }
    }
    if let Err(error) = RunRecord::read_from(&notebook) {
        assert!(error.to_string().contains("run record"), "a run record refused without naming it: {error}");
    }
    let path = reads_back_the_same(&notebook);
    if let Err(error) = read_run(&path) {
        assert!(error.to_string().contains('`'), "the run's results were refused naming nothing: {error}");
    }
    let facts = RunFacts {
        notebook: "fuzzed.ipynb".into(),
        started_at: "2026-01-01T00:00:00Z".into(),
        duration: "0 s".into(),
        inputs: Vec::new(),
        cells: format!("0 of {}", notebook.len()),
        stopped: None,
    };
    let report = report_html(&notebook, &facts);
    if outputs == 0 {
        assert!(!report.to_ascii_lowercase().contains("<script"), "the report of a notebook carries a script");
    }
}

/// Writes `notebook` atomically, reads it back and writes it again: the two
/// files must be the same bytes and hold the same cells. Returns the path.
fn reads_back_the_same(notebook: &Notebook) -> std::path::PathBuf {
    let path = crate::scratch::file_with(b"", "ipynb");
    notebook.write_atomic(&path).unwrap_or_else(|e| panic!("a notebook read cannot be written: {e}"));
    let first = std::fs::read(&path).unwrap_or_else(|e| panic!("the written notebook cannot be read: {e}"));
    let again = Notebook::read(&path).unwrap_or_else(|e| panic!("a written notebook does not read again: {e}"));
    assert_eq!(again.len(), notebook.len(), "cells were lost in writing");
    for cell in 0..notebook.len() {
        assert_eq!(again.source(cell), notebook.source(cell), "cell {cell} changed in writing");
        assert_eq!(again.outputs(cell), notebook.outputs(cell), "cell {cell}'s outputs changed in writing");
    }
    again.write_atomic(&path).unwrap_or_else(|e| panic!("a notebook read back cannot be written: {e}"));
    let second = std::fs::read(&path).unwrap_or_else(|e| panic!("the written notebook cannot be read: {e}"));
    assert!(first == second, "writing a notebook read back gives other bytes");
    path
}
