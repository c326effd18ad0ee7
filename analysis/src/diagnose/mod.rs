//! Checking a fit: influence of each sale, collinearity of the terms, and
//! tests of the assumptions behind the standard errors.
//!
//! * [`influence`] — residuals (raw, standardized, studentized), leverage,
//!   Cook's distance, DFFITS, DFBETAS.
//! * [`collinearity`] — VIF and generalized VIF per term, condition indices.
//! * [`assumptions`] — Breusch–Pagan (original and Koenker), White,
//!   Jarque–Bera, Durbin–Watson, Ramsey RESET.
//! * [`flags`] — the rows an analyst should look at, by common-practice cut-offs.
//! * [`spatial`] — Moran's I of the residuals over the parcels' places, and
//!   residuals by location group.
//!
//! Weighted fits are diagnosed on the transformed model `√w y = √w X b + ε`,
//! where the ordinary formulas apply.

pub mod assumptions;
pub mod collinearity;
pub mod flags;
pub mod influence;
pub mod spatial;

pub use assumptions::TestResult;
pub use collinearity::{Collinearity, TermVif};
pub use flags::{FlaggedRow, RowFlags};
pub use influence::{Influence, InfluenceRow};
pub use spatial::{GroupResiduals, SpatialCheck, SpatialOptions};
