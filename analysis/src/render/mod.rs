//! Turning results into text people read. (The MIME bundles for notebooks —
//! HTML tables and SVG — will join this module; every display goes through it.)

mod diagnostics_text;
mod numbers;
mod text;

pub use numbers::{format_p_value, format_significant};
pub use diagnostics_text::{collinearity_text, comparison_text, cross_validation_text, flags_text, nested_text, tests_text};
pub use text::{fit_text, predictions_text};
