//! Turning results into text people read. (The MIME bundles for notebooks —
//! HTML tables and SVG — will join this module; every display goes through it.)

mod numbers;
mod text;

pub use numbers::{format_p_value, format_significant};
pub use text::{fit_text, predictions_text};
