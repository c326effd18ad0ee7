//! What a cell gives back: its output lines, its outcome, and how the
//! protocol and nbformat carry a MIME bundle.
//!
//! The lowest module of `eval`: it imports nothing else from it, so every
//! other module (the engine thread, the output pump, the explanation of an
//! ended cell process) can speak of cells without importing one another.

use serde_json::{Map, Value};
use std::collections::BTreeMap;

/// A line of cell output.
#[derive(Debug, Clone)]
pub struct StreamLine {
    /// `stdout` or `stderr`.
    pub name: &'static str,
    /// The text, newline included.
    pub text: String,
}

/// A failed cell, in the protocol's terms.
#[derive(Debug, Clone)]
pub struct CellError {
    /// Short error name.
    pub ename: String,
    /// One-line description.
    pub evalue: String,
    /// Lines to show.
    pub traceback: Vec<String>,
}

/// What a cell produced.
#[derive(Debug, Clone, Default)]
pub struct ExecOutcome {
    /// The last value's MIME bundle (empty when the cell ends in a statement).
    pub data: BTreeMap<String, String>,
    /// The error, if the cell failed.
    pub error: Option<CellError>,
    /// The engine's phases for this cell, in order (empty when the engine
    /// reported none, as for a cell that failed to compile).
    pub phases: Vec<EnginePhase>,
}

impl ExecOutcome {
    /// A failed cell's outcome.
    pub fn failure(ename: &str, evalue: String, traceback: Vec<String>) -> Self {
        Self {
            data: BTreeMap::new(),
            error: Some(CellError { ename: ename.into(), evalue, traceback }),
            phases: Vec::new(),
        }
    }

    /// The outcome of a cell sent to an engine that is gone.
    pub fn engine_gone() -> Self {
        Self::failure(
            "EngineStopped",
            "the evaluation engine stopped; restart the kernel".into(),
            vec!["The evaluation engine stopped; restart the kernel to continue.".into()],
        )
    }
}

/// One phase of the engine's work on a cell, as the engine names it:
/// `Type inference` (of the cell's new variables; only a cell with a
/// top-level `let` has it, by our patch of the engine),
/// `Final compile` (the build that ran), `Execution` (loading and running
/// it), and one phase per failed
/// build the engine retried after a fix of its own (`Fallback` when the
/// cell's last value had no display method and was built again for `Debug`
/// text). Sent in each `execute_reply` as `plumbline_engine_phases`, and
/// logged, so that where a cell's time goes can be read off any session.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct EnginePhase {
    /// The engine's name of the phase.
    pub name: String,
    /// Its wall-clock duration, seconds.
    pub seconds: f64,
}

impl EnginePhase {
    /// The phases the engine reported for one cell.
    pub fn of(outputs: &evcxr::EvalOutputs) -> Vec<Self> {
        outputs.phases.iter().map(|p| Self { name: p.name.clone(), seconds: p.duration.as_secs_f64() }).collect()
    }

    /// One log line: each phase with its seconds, and the cell's whole time.
    pub fn log_line(phases: &[Self], whole: std::time::Duration) -> String {
        let parts: Vec<String> = phases.iter().map(|p| format!("{} {:.3} s", p.name, p.seconds)).collect();
        let listed = if parts.is_empty() { "no phases reported".to_string() } else { parts.join(", ") };
        format!("{listed}; {:.3} s in all", whole.as_secs_f64())
    }
}

/// One event of a running cell, in the order it happened.
#[derive(Debug, Clone)]
pub enum CellEvent {
    /// A line the cell printed (display commands included, see `display`).
    Output(StreamLine),
    /// The cell ended; always the last event.
    Finished(ExecOutcome),
}

/// Completion candidates.
#[derive(Debug, Clone, Default)]
pub struct CompleteOutcome {
    /// Candidate texts.
    pub matches: Vec<String>,
    /// Byte offset where the replaced text starts.
    pub cursor_start: usize,
    /// Byte offset where it ends.
    pub cursor_end: usize,
}

impl CompleteOutcome {
    /// No candidates, at `cursor`.
    pub fn none_at(cursor: usize) -> Self {
        Self { cursor_start: cursor, cursor_end: cursor, ..Default::default() }
    }
}

/// A display value as the protocol and nbformat carry it: JSON MIME types as
/// JSON, everything else as text.
pub fn mime_value(mime: &str, text: String) -> Value {
    if mime.ends_with("+json") || mime == "application/json" {
        serde_json::from_str(&text).unwrap_or(Value::String(text))
    } else {
        Value::String(text)
    }
}

/// A cell's MIME bundle as the protocol and nbformat carry it ([`mime_value`] per entry).
pub fn bundle_json(data: impl IntoIterator<Item = (String, String)>) -> Map<String, Value> {
    data.into_iter().map(|(mime, text)| (mime.clone(), mime_value(&mime, text))).collect()
}
