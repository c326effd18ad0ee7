//! Notebook-level work: reading the machine-readable results that runs leave
//! behind, and the run-to-run drift report.

pub mod drift;
