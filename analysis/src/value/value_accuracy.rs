//! How close values come to prices, in the terms lenders and model reviewers
//! use for automated values: the share within ±10 % and ±20 % of the price,
//! the forecast standard deviation, and error buckets — in sample and on
//! sales the model never saw.
//!
//! For value `A` and (time-adjusted) price `S` of each sale, the percentage
//! error is `100 (A − S)/S` and the log ratio `ln(A/S)`:
//!
//! * **within ±10 %** — share of sales with `|A/S − 1| ≤ 0.10`; likewise ±20 %;
//! * **FSD**, forecast standard deviation — the sample standard deviation
//!   (divisor `n − 1`) of `ln(A/S)`, read as a percentage spread of values
//!   around prices. This is the figure the IAAO *Standard on Automated
//!   Valuation Models* (2018) and lenders' AVM testing describe (recalled
//!   from memory; the standard's own wording may differ);
//! * **mean log ratio** — `mean ln(A/S)`, the typical over- (> 0) or
//!   under-valuation;
//! * **median absolute percentage error**;
//! * **error buckets** — counts of sales by signed percentage error.
//!
//! In-sample figures flatter a model: the sales also fitted it.
//! [`holdout_accuracy`] fits on one part of the sales and scores the other,
//! each sale valued at its own sale date against its own price (no time
//! adjustment is then needed: both sit at the same date).

use super::time::{model_values, Retransform};
use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::{fit_with, FitOptions};
use crate::model::ModelSpec;
use crate::stats::median_of_sorted;
use serde::{Deserialize, Serialize};

/// The ±10 % band of the share-within figure, as a fraction (common practice
/// in AVM testing, recalled from memory).
pub const WITHIN_NARROW: f64 = 0.10;
/// The ±20 % band (common practice, recalled from memory).
pub const WITHIN_WIDE: f64 = 0.20;
/// Edges of the error buckets, in percent of price: under by more than 20,
/// 20–10, 10–5, within 5, over by 5–10, 10–20, more than 20.
pub const BUCKET_EDGES: [f64; 6] = [-20.0, -10.0, -5.0, 5.0, 10.0, 20.0];

/// Sales in one band of percentage error.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ErrorBucket {
    /// The band in words: `value 5–10 % above price`.
    pub label: String,
    /// Lower edge, percent (`None`: unbounded).
    pub lower: Option<f64>,
    /// Upper edge, percent (`None`: unbounded).
    pub upper: Option<f64>,
    /// Sales in the band.
    pub count: usize,
    /// Their share of all sales, 0–1.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub share: f64,
}

/// Value accuracy of one set of sales (module documentation).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ValueAccuracy {
    /// Sales scored.
    pub count: usize,
    /// Share within ±10 % of price, 0–1.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub within_10: f64,
    /// Share within ±20 % of price, 0–1.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub within_20: f64,
    /// Forecast standard deviation: sample sd of `ln(A/S)`.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub fsd: f64,
    /// Mean of `ln(A/S)`.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub mean_log_ratio: f64,
    /// Median of `|A/S − 1|`, percent.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub median_absolute_error: f64,
    /// Sales by signed percentage error, lowest band first; edges
    /// [`BUCKET_EDGES`], each band closed on the side nearer zero.
    pub buckets: Vec<ErrorBucket>,
}

fn bucket_label(lower: Option<f64>, upper: Option<f64>) -> String {
    match (lower, upper) {
        (None, Some(u)) => format!("value more than {} % below price", -u),
        (Some(l), None) => format!("value more than {l} % above price"),
        (Some(l), Some(u)) if l < 0.0 && u <= 0.0 => format!("value {}–{} % below price", -u, -l),
        (Some(l), Some(u)) if l >= 0.0 => format!("value {l}–{u} % above price"),
        (Some(l), Some(u)) if -l == u => format!("value within {u} % of price"),
        (Some(l), Some(u)) => format!("value {}% to +{u} % of price", l),
        (None, None) => "all".into(),
    }
}

/// The value accuracy of `values` against `prices`, paired by row; rows
/// missing either are skipped. Refuses a non-positive price or value (the log
/// ratio needs both positive) and fewer than two pairs.
pub fn value_accuracy(values: &[Option<f64>], prices: &[Option<f64>]) -> Result<ValueAccuracy> {
    if values.len() != prices.len() {
        return Err(Error::Specification("values and prices must have one entry per row".into()));
    }
    let mut ratios = Vec::with_capacity(values.len());
    for (i, (v, p)) in values.iter().zip(prices).enumerate() {
        if let (Some(v), Some(p)) = (v, p) {
            if !(*p > 0.0 && *v > 0.0 && p.is_finite() && v.is_finite()) {
                return Err(Error::Specification(format!(
                    "row {}: value accuracy needs a positive value and price, got value {v} and price {p}",
                    i + 1
                )));
            }
            ratios.push(v / p);
        }
    }
    let n = ratios.len();
    if n < 2 {
        return Err(Error::Specification(format!(
            "value accuracy needs at least two sales with a value and a price; found {n}"
        )));
    }
    let nf = n as f64;
    let share = |band: f64| ratios.iter().filter(|r| (*r - 1.0).abs() <= band + 1e-12).count() as f64 / nf;
    let logs: Vec<f64> = ratios.iter().map(|r| r.ln()).collect();
    let mean_log_ratio = logs.iter().sum::<f64>() / nf;
    let fsd = (logs.iter().map(|l| (l - mean_log_ratio).powi(2)).sum::<f64>() / (nf - 1.0)).sqrt();
    let mut absolute: Vec<f64> = ratios.iter().map(|r| 100.0 * (r - 1.0).abs()).collect();
    absolute.sort_by(f64::total_cmp);
    let errors: Vec<f64> = ratios.iter().map(|r| 100.0 * (r - 1.0)).collect();
    let mut edges: Vec<Option<f64>> = vec![None];
    edges.extend(BUCKET_EDGES.iter().map(|e| Some(*e)));
    edges.push(None);
    let buckets = edges
        .windows(2)
        .map(|edge| {
            let (lower, upper) = (edge[0], edge[1]);
            // Closed on the side nearer zero: −10 falls in "within 10 below",
            // +5 in "within 5".
            let inside = |e: f64| {
                let above_lower = match lower {
                    None => true,
                    Some(l) if l < 0.0 => e >= l,
                    Some(l) => e > l,
                };
                let below_upper = match upper {
                    None => true,
                    Some(u) if u > 0.0 => e <= u,
                    Some(u) => e < u,
                };
                above_lower && below_upper
            };
            let count = errors.iter().filter(|e| inside(**e)).count();
            ErrorBucket { label: bucket_label(lower, upper), lower, upper, count, share: count as f64 / nf }
        })
        .collect();
    Ok(ValueAccuracy {
        count: n,
        within_10: share(WITHIN_NARROW),
        within_20: share(WITHIN_WIDE),
        fsd,
        mean_log_ratio,
        median_absolute_error: median_of_sorted(&absolute).unwrap_or(f64::NAN),
        buckets,
    })
}

/// Value accuracy in sample and on held-out sales.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct HoldoutAccuracy {
    /// How the sales were split, in words (the caller's description).
    pub split: String,
    /// The fitting sales' provenance description.
    pub training_source: String,
    /// The held-out sales' provenance description.
    pub holdout_source: String,
    /// Accuracy on the sales the model was fitted on.
    pub in_sample: ValueAccuracy,
    /// Accuracy on the held-out sales.
    pub holdout: ValueAccuracy,
    /// Held-out sales the model could not value (a term value missing).
    pub holdout_not_valued: usize,
}

/// Fits `spec` on `training`, values both parts at their own sale dates and
/// scores each against its prices (the spec's target column, untransformed).
/// `split` says how the parts were made, e.g. `sold on or after 2025-07-01`
/// (see [`crate::compare::split_by_cutoff`] and
/// [`crate::compare::split_by_fraction`] for making them).
pub fn holdout_accuracy(
    training: &Frame,
    holdout: &Frame,
    spec: &ModelSpec,
    options: &FitOptions,
    retransform: Retransform,
    split: impl Into<String>,
) -> Result<HoldoutAccuracy> {
    let model = fit_with(training, spec, options)?;
    let score = |frame: &Frame| -> Result<(ValueAccuracy, usize)> {
        let values = model_values(&model, frame, retransform)?;
        let prices = frame.numeric_column(spec.target())?;
        let not_valued = values.iter().zip(&prices).filter(|(v, p)| v.is_none() && p.is_some()).count();
        Ok((value_accuracy(&values, &prices)?, not_valued))
    };
    let (in_sample, _) = score(training)?;
    let (held, holdout_not_valued) = score(holdout)?;
    Ok(HoldoutAccuracy {
        split: split.into(),
        training_source: training.provenance().describe(),
        holdout_source: holdout.provenance().describe(),
        in_sample,
        holdout: held,
        holdout_not_valued,
    })
}
