//! What every reader of outside input promises, written once as code.
//!
//! Each function here takes arbitrary bytes, hands them to one of Plumbline's
//! readers and **panics when the reader breaks its contract**. The contract
//! is more than "no crash":
//!
//! - a refusal is one of the reader's typed errors and names the place of the
//!   fault — a line, a cell, a row, a field or the file — never an internal
//!   error without a place;
//! - what is accepted reads back the same after writing it out again (CSV,
//!   documents, notebooks, wire frames), or fits with finite numbers (every
//!   table: a two-column least-squares fit of its first numeric columns ends
//!   in finite estimates or a typed refusal).
//!
//! The same functions are called by the coverage-guided fuzz targets under
//! `fuzz/` (cargo-fuzz, nightly Rust, run by `fuzz/run`) and by this crate's
//! replay test, which feeds every committed corpus and regression input to
//! them on stable Rust in the test command. A finding thus becomes a
//! regression test by committing its input under `fuzz/regressions/TARGET/`.
//!
//! | target | reader | module |
//! |---|---|---|
//! | `csv_table` | delimited text with its options | [`tables::csv_table`] |
//! | `workbook` | `.xlsx` workbooks | [`tables::workbook`] |
//! | `columnar` | Parquet and Arrow IPC files | [`tables::columnar`] |
//! | `documents` | every typed document reader | [`documents::documents`] |
//! | `term_syntax` | the compact term syntax | [`terms::term_syntax`] |
//! | `notebook` | notebooks, their inputs cell and run record | [`notebook::notebook`] |
//! | `wire_frames` | the kernel's wire frames and signatures | [`wire::wire_frames`] |
//! | `round_states` | the states of a fit from pieces between processes | [`states::round_states`] |

pub mod documents;
pub mod fitting;
pub mod notebook;
pub mod places;
pub mod scratch;
pub mod states;
pub mod tables;
pub mod terms;
pub mod wire;

/// A contract check: panics when the reader breaks its contract on `data`.
pub type Contract = fn(&[u8]);

/// Every fuzz target by name, with its contract. The names are the file
/// names under `fuzz/fuzz_targets/` and the folder names of the corpora.
pub const TARGETS: &[(&str, Contract)] = &[
    ("csv_table", tables::csv_table),
    ("workbook", tables::workbook),
    ("columnar", tables::columnar),
    ("documents", documents::documents),
    ("term_syntax", terms::term_syntax),
    ("notebook", notebook::notebook),
    ("wire_frames", wire::wire_frames),
    ("round_states", states::round_states),
];
