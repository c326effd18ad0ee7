//! Values from a fitted model, and sale prices moved to a valuation date.

use crate::data::{dates, Frame};
use crate::error::{Error, Result};
use crate::fit::Fit;
use crate::model::{TargetTransform, Term};
use chrono::NaiveDate;

/// How to bring a logged model's estimate back to prices.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
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
        values[p.row - 1] = Some(retransform.value_of(p.estimate, p.median_original, p.mean_original));
    }
    Ok(values)
}

impl Retransform {
    /// A prediction's value on the target's original scale, from its
    /// `estimate` and, for a logged target, its `median` and smearing `mean`
    /// on the original scale: the one chosen, otherwise the estimate itself.
    pub fn value_of(self, estimate: f64, median: Option<f64>, mean: Option<f64>) -> f64 {
        match (self, median, mean) {
            (Retransform::Median, Some(m), _) => m,
            (Retransform::SmearingMean, _, Some(m)) => m,
            _ => estimate,
        }
    }
}

/// A point on a model's time axis: a date, for a model whose time trend is a
/// date term ([`Term::months_since`], [`Term::days_since`]), or a number in
/// the units of a plain numeric time column (e.g. months since a base date
/// computed by hand).
#[derive(Debug, Clone, PartialEq)]
pub enum TimePoint {
    /// A calendar date, ISO 8601 `YYYY-MM-DD`.
    Date(String),
    /// A value of a numeric time column.
    Number(f64),
}

impl From<&str> for TimePoint {
    fn from(date: &str) -> Self {
        TimePoint::Date(date.to_string())
    }
}

impl From<String> for TimePoint {
    fn from(date: String) -> Self {
        TimePoint::Date(date)
    }
}

impl From<f64> for TimePoint {
    fn from(value: f64) -> Self {
        TimePoint::Number(value)
    }
}

impl From<NaiveDate> for TimePoint {
    fn from(date: NaiveDate) -> Self {
        TimePoint::Date(date.format(dates::ISO_DATE_FORMAT).to_string())
    }
}

/// Sale prices adjusted to the valuation date `to` along the model's time trend.
///
/// The trend is the model's term on `time_column`: a date term (months or days
/// since a reference date; then `to` is a date such as `"2026-01-01"`), or a
/// plain numeric term (then `to` is a number in its units). With slope `b` per
/// unit and `Δ` the units from the sale to `to`, the adjusted price is
/// `price · exp(b · Δ)` for a logged target and `price + b · Δ` otherwise.
pub fn time_adjust(
    fit: &Fit,
    frame: &Frame,
    time_column: &str,
    price_column: &str,
    to: impl Into<TimePoint>,
) -> Result<Vec<Option<f64>>> {
    let prices = frame.numeric_column(price_column)?;
    move_along_trend(fit, frame, time_column, &to.into(), &prices)
}

/// The model's value for every row of `frame` as of the valuation date `at`:
/// each row's value at its own date moved along the fitted trend to `at` (by
/// `exp(b · Δ)` for a logged target, `+ b · Δ` otherwise) — the values a ratio
/// study compares with prices adjusted by [`time_adjust`] to the same date.
pub fn model_values_at(
    fit: &Fit,
    frame: &Frame,
    time_column: &str,
    at: impl Into<TimePoint>,
    retransform: Retransform,
) -> Result<Vec<Option<f64>>> {
    let values = model_values(fit, frame, retransform)?;
    move_along_trend(fit, frame, time_column, &at.into(), &values)
}

/// Moves `amounts` (one per row of `frame`) from each row's time to `to`.
fn move_along_trend(
    fit: &Fit,
    frame: &Frame,
    time_column: &str,
    to: &TimePoint,
    amounts: &[Option<f64>],
) -> Result<Vec<Option<f64>>> {
    let date_term = fit.spec().terms().iter().find_map(|t| match t {
        Term::Date { column, part, .. } if column == time_column && part.is_numeric() => Some(part.clone()),
        _ => None,
    });
    let trend_name = date_term.as_ref().map_or_else(|| time_column.to_string(), |part| part.derived_name(time_column));
    let position = fit.estimated_names().iter().position(|n| *n == trend_name).ok_or_else(|| {
        Error::Specification(format!(
            "`{time_column}` is not a time trend of this model (a plain numeric term, or a months-since or days-since date term), \
             so there is nothing to adjust by; add it as a term"
        ))
    })?;
    let slope = fit.solution().coefficients()[position];
    let steps: Vec<Option<f64>> = match (&date_term, to) {
        (Some(part), TimePoint::Date(text)) => {
            let to_date = dates::require_iso_date("the valuation date", text)?;
            let Some((_, between)) = part.trend_measure() else { unreachable!("only numeric date parts are trends") };
            frame.date_column(time_column)?.iter().map(|d| d.map(|d| between(d, to_date))).collect()
        }
        (None, TimePoint::Number(to)) => frame.numeric_column(time_column)?.iter().map(|m| m.map(|m| to - m)).collect(),
        (Some(_), TimePoint::Number(n)) => {
            return Err(Error::Specification(format!(
                "the time trend `{trend_name}` is a date term, so the valuation date must be a date (e.g. \"2026-01-01\"), not the number {n}"
            )))
        }
        (None, TimePoint::Date(text)) => {
            return Err(Error::Specification(format!(
                "the time trend `{time_column}` is a numeric column, so the valuation point must be a number in its units, not the date `{text}`; \
                 or model the sale date with a date term (`Term::months_since`)"
            )))
        }
    };
    let logged = fit.spec().target_transform() == TargetTransform::Log;
    Ok(steps
        .iter()
        .zip(amounts)
        .map(|(step, amount)| match (step, amount) {
            (Some(d), Some(p)) if logged => Some(p * (slope * d).exp()),
            (Some(d), Some(p)) => Some(p + slope * d),
            _ => None,
        })
        .collect())
}
