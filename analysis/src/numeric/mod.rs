//! Numerical building blocks that the fitting core needs beyond plain `f64`.
//!
//! * [`ddouble`] — double-double ("double-word") arithmetic, about 106 bits of
//!   significand, used where a double-precision result would lose certified digits.
//! * [`dd_qr`] — a column-pivoted Householder QR carried out entirely in
//!   double-double arithmetic, for small or ill-conditioned designs.
//! * [`equilibrate`] — exact power-of-two column scaling.
//! * [`tsqr`] — tall-skinny QR: the triangular factor of a tall matrix, built
//!   from row blocks on several threads, from streamed batches, or from
//!   partitions factored apart and merged.
//! * [`parallel`] — work over a range shared among the cores in fixed chunks.
//! * [`scan`] — whole-slice tests of values (any NaN, any non-finite) at memory speed.

pub mod dd_qr;
pub mod ddouble;
pub mod equilibrate;
pub mod parallel;
pub mod scan;
pub mod tsqr;

pub use ddouble::DoubleDouble;
