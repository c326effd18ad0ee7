//! Notebook-level work: the documents themselves, the study's inputs cell,
//! headless runs with their HTML report, and reading the machine-readable
//! results a run leaves behind for the drift report.
//!
//! | module | responsibility |
//! |---|---|
//! | [`document`] | nbformat 4 documents: cells, outputs, atomic write |
//! | [`inputs`] | the inputs cell marker and `--set NAME=VALUE` |
//! | [`runner`] | executing every code cell with the engine, progress |
//! | [`record`] | the run record `plumbline run` writes into the notebook's metadata |
//! | [`report`] | the standalone HTML report of a run |
//! | [`results`] | fit and ratio-study documents out of a run's files |

pub mod document;
pub mod inputs;
pub mod record;
pub mod report;
pub mod results;
pub mod runner;
