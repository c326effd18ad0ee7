//! Predictions for new rows with confidence and prediction intervals.
//!
//! For a row `x₀` (coded as the fitting data was) with estimate `ŷ₀ = x₀ᵀb`:
//! the standard error of the mean is `se = √(x₀ᵀ V x₀)` under the fit's
//! covariance `V`; the confidence interval is `ŷ₀ ± t·se` and the prediction
//! interval for one new observation (weight 1) is `ŷ₀ ± t·√(s² + se²)`
//! (e.g. Weisberg, *Applied Linear Regression*, 4th ed., §3.7).
//!
//! For a logged target the estimates are also given on the original scale:
//! the median `exp(ŷ₀)` (interval ends transform the same way, since `exp` is
//! monotone) and Duan's smearing estimate of the mean, `exp(ŷ₀) · mean(exp(rᵢ))`
//! over the fitting residuals (Duan 1983, "Smearing estimate: a nonparametric
//! retransformation method", *JASA* 78, 605–610).

use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::{quadratic_form, AssembledFit, Fit};
use crate::model::TargetTransform;
use crate::model::{AppliedDesign, DesignRecipe};
use crate::stats::{check_level, t_critical};
use serde::{Deserialize, Serialize};

/// One predicted row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Prediction {
    /// 1-based data row of the new frame.
    pub row: usize,
    /// Estimate on the model scale (`log` scale for a logged target).
    pub estimate: f64,
    /// Standard error of the estimated mean.
    pub se_fit: f64,
    /// Confidence interval of the mean, lower end.
    pub ci_low: f64,
    /// Confidence interval of the mean, upper end.
    pub ci_high: f64,
    /// Prediction interval of one new observation, lower end.
    pub pi_low: f64,
    /// Prediction interval, upper end.
    pub pi_high: f64,
    /// For a logged target: `exp(estimate)`, the median on the original scale.
    pub median_original: Option<f64>,
    /// For a logged target: Duan's smearing estimate of the mean on the original scale.
    pub mean_original: Option<f64>,
    /// Term columns whose value lies outside the range seen in the fitting
    /// data — the prediction extrapolates there and deserves a second look.
    pub outside_range: Vec<String>,
}

/// Predictions for the rows of a frame, with the rows that could not be predicted.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Predictions {
    /// Confidence level of the intervals.
    pub level: f64,
    /// One entry per predictable row, in frame order.
    pub rows: Vec<Prediction>,
    /// 1-based rows skipped because a term value was missing.
    pub skipped_rows: Vec<usize>,
}

impl Prediction {
    /// The prediction of 0-based frame row `row` at `estimate`, with the
    /// standard error of the mean `se_fit`, the residual variance `s²`
    /// and the critical `t` value `crit`: intervals `± t·se` (mean) and
    /// `± t·√(s² + se²)` (one sale); `smearing` (a logged target's
    /// `mean(exp rᵢ)`) adds the original-scale median and mean.
    pub(crate) fn with_intervals(
        row: usize,
        estimate: f64,
        se_fit: f64,
        residual_variance: f64,
        crit: f64,
        smearing: Option<f64>,
        outside_range: Vec<String>,
    ) -> Self {
        let (half_ci, half_pi) = (crit * se_fit, crit * (residual_variance + se_fit * se_fit).sqrt());
        Prediction {
            row: row + 1,
            estimate,
            se_fit,
            ci_low: estimate - half_ci,
            ci_high: estimate + half_ci,
            pi_low: estimate - half_pi,
            pi_high: estimate + half_pi,
            median_original: smearing.map(|_| estimate.exp()),
            mean_original: smearing.map(|s| estimate.exp() * s),
            outside_range,
        }
    }
}

/// The term columns whose value at position `i` of `applied` lies outside
/// the range the recipe saw in the fitting data.
pub(crate) fn outside_range(recipe: &DesignRecipe, applied: &AppliedDesign, i: usize) -> Vec<String> {
    recipe
        .numeric_ranges
        .iter()
        .filter(|(c, lo, hi)| applied.numbers.get(c).is_some_and(|values| values[i] < *lo || values[i] > *hi))
        .map(|(c, _, _)| c.clone())
        .collect()
}

/// What predicting needs from a fitted model, however it was fitted (all
/// rows in memory, or assembled from batches).
struct Predictor<'a> {
    recipe: &'a DesignRecipe,
    kept: &'a [usize],
    coefficients: &'a [f64],
    covariance: &'a [Vec<f64>],
    residual_variance: f64,
    df_t: f64,
    /// `mean(exp(rᵢ))` over the fitting residuals, for a logged target.
    smearing: Option<f64>,
}

impl Fit {
    /// Predicts every row of `frame` that has all term values.
    pub fn predict(&self, frame: &Frame, level: f64) -> Result<Predictions> {
        let log_target = self.spec().target_transform() == TargetTransform::Log;
        let r = self.solution().residuals();
        Predictor {
            recipe: self.design().recipe(),
            kept: self.solution().kept(),
            coefficients: self.solution().coefficients(),
            covariance: self.covariance(),
            residual_variance: self.residual_std_error().powi(2),
            df_t: self.df_t(),
            smearing: log_target.then(|| r.iter().map(|v| v.exp()).sum::<f64>() / r.len() as f64),
        }
        .predict(frame, level)
    }
}

impl AssembledFit {
    /// Predicts every row of `frame` that has all term values, exactly as
    /// [`Fit::predict`] does (the smearing factor of a logged target comes
    /// from the residual sums gathered piece by piece).
    pub fn predict(&self, frame: &Frame, level: f64) -> Result<Predictions> {
        let log_target = self.recipe.spec.target_transform() == TargetTransform::Log;
        Predictor {
            recipe: &self.recipe,
            kept: &self.kept,
            coefficients: &self.coefficients,
            covariance: &self.covariance,
            residual_variance: self.weighted_rss / self.residual_df() as f64,
            df_t: self.residual_df() as f64,
            smearing: log_target.then(|| self.exp_residual_sum / self.rows as f64),
        }
        .predict(frame, level)
    }
}

impl Predictor<'_> {
    fn predict(&self, frame: &Frame, level: f64) -> Result<Predictions> {
        check_level(level)?;
        let applied = self.recipe.apply(frame)?;
        let (columns, rows) = (&applied.columns, &applied.rows);
        if rows.is_empty() {
            return Err(Error::Prediction("no row of the new data has every value the model needs".into()));
        }
        let crit = t_critical(level, self.df_t);
        let mut predictions = Vec::with_capacity(rows.len());
        for (i, &row) in rows.iter().enumerate() {
            let x: Vec<f64> = self.kept.iter().map(|&j| columns[j].hi[i]).collect();
            let estimate: f64 = x.iter().zip(self.coefficients).map(|(a, b)| a * b).sum();
            let se_fit = quadratic_form(self.covariance, &x).max(0.0).sqrt();
            predictions.push(Prediction::with_intervals(
                row,
                estimate,
                se_fit,
                self.residual_variance,
                crit,
                self.smearing,
                outside_range(self.recipe, &applied, i),
            ));
        }
        let used: std::collections::BTreeSet<usize> = rows.iter().copied().collect();
        let skipped_rows = (0..frame.height()).filter(|r| !used.contains(r)).map(|r| r + 1).collect();
        Ok(Predictions { level, rows: predictions, skipped_rows })
    }
}
