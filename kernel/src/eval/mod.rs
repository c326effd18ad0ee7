//! Evaluating Rust cells with the evcxr engine, `plumbline` preloaded.
//!
//! One engine session lives on its own thread ([`Session`]); the server and
//! the runner talk to it through channels. Each cell answers with one ordered
//! event stream ([`CellEvent`]): its output lines as they are printed, then
//! its outcome — the last value as a MIME bundle built by `plumbline::render`,
//! or an error (compile errors in the cell's own line numbers, see
//! [`diagnostics`]; an ended cell process explained, see `termination`).
//!
//! | module | responsibility |
//! |---|---|
//! | `runtime_relay` | inside the cell process: one ordered output pipe, `?` and abort markers |
//! | `output_pump` | in the kernel: routes output lines to the running cell's events |
//! | `session` | the engine thread, requests, interrupts |
//! | `termination` | why the cell process ended, and what was lost |
//! | [`preparation`] | progress of the engine's first build and start |
//! | [`display`] | typed display commands from `plumbline::render` |
//! | [`work_slots`] | one work folder per running engine, claimed by lock |

pub mod completeness;
pub mod diagnostics;
pub mod display;
mod output_pump;
pub mod preparation;
mod runtime_relay;
mod session;
mod termination;
pub mod work_slots;

pub use display::{display_command, DisplayCommand};
pub use preparation::{Preparation, PreparationObserver};
pub use runtime_relay::relay_cell_process_output;
pub use session::{
    export_engine_environment, CellError, CellEvent, CompleteOutcome, EngineConfig, ExecOutcome, Interrupter, Session,
    StreamLine, ENGINE_VARIABLES,
};

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
