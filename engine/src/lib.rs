//! Plumbline's fits inside Apache DataFusion (every core of one machine) and
//! across a Ballista cluster (many machines).
//!
//! A least-squares fit from pieces ([`plumbline::fit::streamed`]) needs three
//! passes over the rows, each reducing a partition to a few `p × p` numbers
//! that merge associatively. Here each pass is a DataFusion aggregate
//! function ([`aggregates`]), so a query engine runs it wherever the rows are,
//! one partition per core or per executor, and `GROUP BY` gives one model per
//! market area in the same pass:
//!
//! | round | function | a partition's state | merged by |
//! |---|---|---|---|
//! | coding | `plumbline_coding` | level counts, value ranges, dropped rows | adding |
//! | one | `plumbline_factor` | the TSQR factor of `[X \| y]`, `(p+1)²/2` numbers | factoring stacked factors |
//! | two | `plumbline_residuals` | gradient, RSS, TSS (double-double), HC middle matrix | adding |
//!
//! The driver ([`driver`]) runs the three queries on any
//! [`datafusion::prelude::SessionContext`] — a local one ([`local_context`])
//! or a Ballista client ([`cluster`]) — and assembles exactly the fit and the
//! set document a fit in batches gives.
//!
//! Layers: [`plan`] (what every accumulator is told) and [`frames`] (Arrow
//! arrays to our frames) below [`aggregates`], below [`driver`], below
//! [`cluster`] and the binary.

pub mod aggregates;
pub mod cluster;
pub mod driver;
mod error;
pub mod frames;
pub mod plan;

pub use driver::{fit, fit_by, local_context, DataSource};
pub use error::EngineError;
