//! # Plumbline analysis
//!
//! Regression analysis for documented valuation studies: load sales data with
//! its provenance, specify a model, fit it by least squares to the last
//! certified digit, read coefficients and intervals, and predict new rows.
//!
//! ```no_run
//! use plumbline::prelude::*;
//! let sales = load("sales.csv")?;
//! let spec = ModelSpec::new("sale_price")
//!     .log_target()
//!     .term(Term::numeric("living_area").log())
//!     .term(Term::category("district"));
//! let model = fit(&sales, &spec)?;
//! for row in model.coefficients(0.95)? {
//!     println!("{:<24} {:>12.5} ± {:.5}", row.term, row.estimate, row.std_error);
//! }
//! # Ok::<(), plumbline::Error>(())
//! ```
//!
//! Module map (one responsibility each):
//!
//! | module | responsibility |
//! |---|---|
//! | [`accuracy`] | scoring fits against NIST StRD certified values (log relative error) |
//! | [`data`] | files → frames, provenance stamp, column profile |
//! | [`model`] | model specification, term coding, design matrix |
//! | [`fit`] | least-squares solvers and covariance estimators |
//! | [`inference`] | coefficient tests, fit statistics, JSON summary |
//! | [`predict`] | predictions with confidence and prediction intervals |
//! | [`diagnose`] | influence, collinearity, assumption tests, the spatial check of residuals, rows to check |
//! | [`spatial`] | spatial weights between parcels and Moran's I |
//! | [`local`] | geographically weighted regression: local coefficients at every sale, bandwidth by AICc |
//! | [`compare`] | nested tests, side-by-side tables, cross-validation, holdout splits |
//! | [`value`] | ratio studies, price tiers, value accuracy, sales-chasing check, sale-date adjustment, model values and the value roll |
//! | [`appeal`] | one parcel's value built up from a reference home, and comparable sales adjusted to it by the model (the appeal page's content) |
//! | [`strata`] | one model per market area (or any grouping column), the pooled models, the F tests of equal coefficients, valuing by group |
//! | [`documents`] | the JSON documents we write, as types, and how each is read back |
//! | [`drift`] | what moved between two runs of a study |
//! | [`render`] | every human-readable report |
//! | [`grouping`] | digit grouping shared by chart ticks and reports |
//! | [`numeric`] | double-double arithmetic and the extended-precision QR |

#![warn(missing_docs)]

pub mod accuracy;
pub mod appeal;
pub mod compare;
pub mod data;
pub mod diagnose;
pub mod documents;
pub mod drift;
mod error;
pub mod fit;
pub mod grouping;
pub mod inference;
pub mod local;
pub mod model;
pub mod numeric;
pub mod plot;
pub mod predict;
pub mod render;
pub mod schema;
pub mod spatial;
pub mod state_bytes;
pub mod stats;
pub mod strata;
pub mod value;

pub use error::{Error, Result};

/// Re-exported for the same reason as `polars`.
pub use faer;
/// Re-exported so that cells and programs can name frame types without a
/// separate dependency (and with the same version).
pub use polars;

/// Everything a notebook cell or a small program needs, in one `use`.
pub mod prelude {
    pub use crate::data::{
        load, load_arrow, load_csv, load_parquet, load_postgres, load_workbook, profile, ColumnProfile, ColumnType,
        CsvOptions, Frame, NonFinite, Provenance, Screen, TextEncoding,
    };
    #[cfg(feature = "sqlite")]
    pub use crate::data::{load_sqlite, SqlRead};
    pub use crate::fit::{fit, fit_with, CovarianceKind, Fit, FitOptions, Precision};
    pub use crate::inference::{Coefficient, FitStatistics, FitSummary};
    pub use crate::model::{ModelSpec, NamedPoint, TargetTransform, Term, Transform};
    pub use crate::predict::{Prediction, Predictions};
    pub use crate::render::{clear_output, show, show_updatable, update, CellValue, LiveProgress, Report};
    pub use crate::strata::{fit_batches_by, fit_by, fit_by_with, StratifiedFit};
    pub use crate::{Error, Result};
}
