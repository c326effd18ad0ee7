//! The second half of the table and term contracts: what is accepted fits
//! with finite numbers.

use plumbline::data::Frame;
use plumbline::fit::fit;
use plumbline::model::ModelSpec;
use plumbline::Error;

/// Fits `spec` to `frame`: the fit ends in finite estimates, finite
/// non-negative standard errors and an R² of at most 1, or in a typed
/// refusal (too few rows, a singular design, a value outside a transform's
/// domain…) — never in an internal frame error. `what` names the input.
pub fn fits_with_finite_numbers_or_refuses(frame: &Frame, spec: &ModelSpec, what: &str) {
    let fitted = match fit(frame, spec) {
        Err(Error::Frame(inner)) => panic!("{what}: the fit failed with an internal frame error: {inner}"),
        Err(_) => return,
        Ok(fitted) => fitted,
    };
    let coefficients = fitted.coefficients(0.95).unwrap_or_else(|e| panic!("{what}: a fit without coefficients: {e}"));
    for c in coefficients {
        assert!(c.estimate.is_finite(), "{what}: {} estimated as {}", c.term, c.estimate);
        assert!(c.std_error.is_finite() && c.std_error >= 0.0, "{what}: {} has standard error {}", c.term, c.std_error);
    }
    let r_squared = fitted.statistics().r_squared;
    assert!(!(r_squared > 1.0 + 1e-9), "{what}: R² is {r_squared}");
}
