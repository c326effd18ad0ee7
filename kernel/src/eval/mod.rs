//! Evaluating Rust cells with the evcxr engine, `plumbline` preloaded.
//!
//! One engine session lives on its own thread ([`Session`]); the server talks
//! to it through channels. Cell output lines stream out while a cell runs; its
//! last value arrives as a MIME bundle built by `plumbline::render`; compile
//! errors are rendered in the cell's own line numbers ([`diagnostics`]).

pub mod completeness;
pub mod diagnostics;
mod runtime_relay;
mod session;

pub use runtime_relay::{relay_cell_process_output, CELL_ERROR_MARKER};
pub use session::{CellError, CompleteOutcome, EngineConfig, ExecOutcome, Interrupter, Session, StreamLine};

use serde_json::{Map, Value};

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

/// The display bundle an output line carries when `plumbline::render::show`
/// wrote it (the line starts with [`plumbline::render::KERNEL_DISPLAY_MARKER`]).
pub fn display_bundle(line: &str) -> Option<Map<String, Value>> {
    let json = line.trim_end_matches('\n').strip_prefix(plumbline::render::KERNEL_DISPLAY_MARKER)?;
    let entries: Map<String, Value> = serde_json::from_str(json).ok()?;
    Some(
        entries
            .into_iter()
            .map(|(mime, v)| match v {
                Value::String(text) => (mime.clone(), mime_value(&mime, text)),
                other => (mime, other),
            })
            .collect(),
    )
}
