//! Evaluating Rust cells with the evcxr engine, `plumbline` preloaded.
//!
//! One engine session lives on its own thread ([`Session`]); the server and
//! the runner talk to it through channels. Each cell answers with one ordered
//! event stream ([`CellEvent`]): its output lines as they are printed, then
//! its outcome — the last value as a MIME bundle built by `plumbline::render`,
//! or an error (compile errors in the cell's own line numbers, see
//! [`diagnostics`]; an ended cell process explained, see `termination`).
//!
//! Modules, bottom to top (each imports only modules above it in this list):
//!
//! | module | responsibility |
//! |---|---|
//! | `cell` | what a cell gives back: lines, outcome, engine phases, bundles as JSON |
//! | [`work_slots`] | one work folder per running engine, claimed by lock |
//! | [`config`] | where and how the engine builds, read once in `main` |
//! | `runtime_relay` | inside the cell process: one ordered output pipe, `?` and abort markers |
//! | `output_pump` | in the kernel: routes output lines to the running cell's events |
//! | `termination` | why the cell process ended, and what was lost |
//! | [`preparation`] | progress of the engine's first build and start |
//! | [`display`] | typed display commands from `plumbline::render` |
//! | `interrupter` | stops a running cell by killing the cell process |
//! | `startup` | starting an engine; the hooks every cell process needs |
//! | `outcome` | the engine's result and the pump's signals → the cell's outcome |
//! | `session` | the engine thread and its requests |

mod cell;
pub mod completeness;
pub mod config;
pub mod diagnostics;
pub mod display;
mod interrupter;
mod outcome;
mod output_pump;
pub mod preparation;
mod runtime_relay;
mod session;
mod startup;
mod termination;
pub mod work_slots;

pub use cell::{bundle_json, mime_value, CellError, CellEvent, CompleteOutcome, EnginePhase, ExecOutcome, StreamLine};
pub use config::{export_engine_environment, EngineConfig, ENGINE_VARIABLES};
pub use display::{display_command, DisplayCommand};
pub use interrupter::Interrupter;
pub use preparation::{Preparation, PreparationObserver};
pub use runtime_relay::relay_cell_process_output;
pub use session::Session;
