//! Evaluating Rust cells with the evcxr engine, `plumbline` preloaded.
//!
//! One engine session lives on its own thread ([`Session`]); the server talks
//! to it through channels. Cell output lines stream out while a cell runs; its
//! last value arrives as a MIME bundle built by `plumbline::render`; compile
//! errors are rendered in the cell's own line numbers ([`diagnostics`]).

pub mod completeness;
pub mod diagnostics;
mod session;

pub use session::{CellError, CompleteOutcome, EngineConfig, ExecOutcome, Interrupter, Session, StreamLine};
