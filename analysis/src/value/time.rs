//! Values from a fitted model, and sale prices moved to a valuation date.

use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::Fit;
use crate::model::TargetTransform;

/// How to bring a logged model's estimate back to prices.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Retransform {
    /// `exp(ŷ)`: the median price.
    Median,
    /// Duan's smearing estimate of the mean price (Duan 1983).
    #[default]
    SmearingMean,
}

/// The model's value for every row of `frame` (`None` where a term value is
/// missing), on the target's original scale.
pub fn model_values(fit: &Fit, frame: &Frame, retransform: Retransform) -> Result<Vec<Option<f64>>> {
    let predictions = fit.predict(frame, 0.95)?;
    let mut values = vec![None; frame.height()];
    for p in &predictions.rows {
        values[p.row - 1] = Some(match (retransform, p.median_original, p.mean_original) {
            (Retransform::Median, Some(m), _) => m,
            (Retransform::SmearingMean, _, Some(m)) => m,
            _ => p.estimate,
        });
    }
    Ok(values)
}

/// Sale prices adjusted to `to_month` along the model's time trend.
///
/// `time_column` must enter the model as a plain numeric term (months since
/// a base date) with coefficient `b`. For a logged target the adjustment is
/// `price · exp(b · (to_month − month))`; otherwise `price + b · (to_month − month)`.
pub fn time_adjust(fit: &Fit, frame: &Frame, time_column: &str, price_column: &str, to_month: f64) -> Result<Vec<Option<f64>>> {
    let prices = frame.numeric_column(price_column)?;
    move_along_trend(fit, frame, time_column, to_month, &prices)
}

/// The model's value for every row of `frame` as of `month`: each row's value
/// at its own `time_column` moved along the fitted trend to `month` (by
/// `exp(b · (month − t))` for a logged target, `+ b · (month − t)` otherwise)
/// — the values a ratio study compares with prices adjusted by [`time_adjust`]
/// to the same date.
pub fn model_values_at(fit: &Fit, frame: &Frame, time_column: &str, month: f64, retransform: Retransform) -> Result<Vec<Option<f64>>> {
    let values = model_values(fit, frame, retransform)?;
    move_along_trend(fit, frame, time_column, month, &values)
}

/// Moves `amounts` (one per row of `frame`) from each row's month to `to_month`.
fn move_along_trend(fit: &Fit, frame: &Frame, time_column: &str, to_month: f64, amounts: &[Option<f64>]) -> Result<Vec<Option<f64>>> {
    let position = fit.estimated_names().iter().position(|n| *n == time_column).ok_or_else(|| {
        Error::Specification(format!(
            "`{time_column}` is not a plain numeric term of this model, so there is no time trend to adjust by (add it as a term)"
        ))
    })?;
    let slope = fit.solution().coefficients[position];
    let months = frame.numeric_column(time_column)?;
    let logged = fit.spec().target_transform() == TargetTransform::Log;
    Ok(months
        .iter()
        .zip(amounts)
        .map(|(m, p)| match (m, p) {
            (Some(m), Some(p)) if logged => Some(p * (slope * (to_month - m)).exp()),
            (Some(m), Some(p)) => Some(p + slope * (to_month - m)),
            _ => None,
        })
        .collect())
}
