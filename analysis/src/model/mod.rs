//! What to fit: a typed model specification and the design matrix built from it.
//!
//! * [`ModelSpec`] / [`Term`] / [`Transform`] — the builder an analyst writes.
//! * [`encode`] — what a term learns from the fitting data (levels, centres,
//!   polynomial recurrences) so that new rows are coded exactly the same way.
//! * [`Design`] — the numeric matrix `X`, target `y`, weights and the record of
//!   which rows were dropped and why.

pub mod design;
pub mod encode;
mod spec;

pub use design::{build_design, Design, DesignColumn, DroppedRows};
pub use spec::{ModelSpec, Term, TargetTransform, Transform};
