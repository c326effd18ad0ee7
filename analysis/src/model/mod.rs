//! What to fit: a typed model specification and the design matrix built from it.
//!
//! * [`ModelSpec`] / [`Term`] / [`Transform`] — the builder an analyst writes.
//! * [`encode`] — what a term learns from the fitting data (levels, centres,
//!   polynomial recurrences) so that new rows are coded exactly the same way.
//! * [`parse_term_list`] — our compact one-line term syntax (`log:area, cat:district`).
//! * [`Design`] — the numeric matrix `X`, target `y`, weights and the record of
//!   which rows were dropped and why.

pub mod design;
pub mod encode;
mod spec;
mod term_list;

pub use design::{build_design, AppliedDesign, Design, DesignColumn, DesignRecipe, DroppedRows, TermSpan};
pub use spec::{DatePart, ModelSpec, NamedPoint, TargetTransform, Term, Transform};
pub use term_list::parse_term_list;
