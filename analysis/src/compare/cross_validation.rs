//! k-fold cross-validation with a seeded, order-independent split.
//!
//! Rows are ordered by the seeded hash of their key (see [`super`]) and dealt
//! to folds in turn, so fold sizes differ by at most one and the same data
//! give the same folds in any row order. Each fold is predicted by a model
//! fitted on the other folds; errors are on the target's original scale (for
//! a logged target, predictions are Duan's smearing means):
//!
//! `RMSE = √(mean (y − ŷ)²)`, `MAE = mean |y − ŷ|`, `MAPE = 100 · mean |y − ŷ| / |y|`.
//!
//! We report each fold, the mean over folds and the sample standard deviation
//! over folds (divisor k − 1).

use super::seeded_order;
use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::{fit_with, FitOptions};
use crate::model::ModelSpec;
use serde::{Deserialize, Serialize};

/// How to cross-validate.
#[derive(Debug, Clone, PartialEq)]
pub struct CrossValidation {
    /// Number of folds (2 or more).
    pub folds: usize,
    /// Seed of the split.
    pub seed: u64,
    /// Column identifying rows (e.g. a parcel id); `None` keys rows by all their values.
    pub id_column: Option<String>,
}

impl Default for CrossValidation {
    fn default() -> Self {
        Self { folds: 10, seed: 20261202, id_column: None }
    }
}

/// Errors of one fold.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct FoldScore {
    /// Fold number, from 1.
    pub fold: usize,
    /// Rows used to fit.
    pub n_train: usize,
    /// Rows predicted.
    pub n_test: usize,
    /// Root mean squared error.
    pub rmse: f64,
    /// Mean absolute error.
    pub mae: f64,
    /// Mean absolute percentage error, in percent.
    pub mape: f64,
}

/// Cross-validation results.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct CrossValidationResult {
    /// Folds requested.
    pub folds: usize,
    /// Seed used.
    pub seed: u64,
    /// Per fold.
    pub scores: Vec<FoldScore>,
    /// Mean over folds of (RMSE, MAE, MAPE).
    pub mean: (f64, f64, f64),
    /// Standard deviation over folds of (RMSE, MAE, MAPE).
    pub sd: (f64, f64, f64),
}

/// Cross-validates `spec` on `frame`; `progress(done, total)` is called after each fold.
pub fn cross_validate(
    frame: &Frame,
    spec: &ModelSpec,
    options: &FitOptions,
    cv: &CrossValidation,
    progress: &mut dyn FnMut(usize, usize),
) -> Result<CrossValidationResult> {
    if cv.folds < 2 || cv.folds > frame.height() {
        return Err(Error::OutOfRange {
            what: "the number of folds".into(),
            requirement: format!("between 2 and the number of rows ({})", frame.height()),
            value: cv.folds.to_string(),
        });
    }
    let order = seeded_order(frame, cv.seed, cv.id_column.as_deref())?;
    let target = frame.numeric_column(spec.target())?;
    let mut scores = Vec::with_capacity(cv.folds);
    for fold in 0..cv.folds {
        let mut train = Vec::new();
        let mut test = Vec::new();
        for (position, &row) in order.iter().enumerate() {
            if position % cv.folds == fold {
                test.push(row);
            } else {
                train.push(row);
            }
        }
        // Keep file order inside each part so results do not depend on the hash order.
        train.sort_unstable();
        test.sort_unstable();
        let train_frame = frame.subset(&train, &format!("fold {} of {}: training", fold + 1, cv.folds))?;
        let test_frame = frame.subset(&test, &format!("fold {} of {}: held out", fold + 1, cv.folds))?;
        let model = fit_with(&train_frame, spec, options)?;
        let predictions = model.predict(&test_frame, 0.95)?;
        let (mut se, mut ae, mut ape, mut count) = (0.0, 0.0, 0.0, 0usize);
        for p in &predictions.rows {
            let Some(actual) = target[test[p.row - 1]] else { continue };
            let predicted = p.mean_original.unwrap_or(p.estimate);
            let error = actual - predicted;
            se += error * error;
            ae += error.abs();
            if actual != 0.0 {
                ape += (error / actual).abs();
            }
            count += 1;
        }
        let m = count.max(1) as f64;
        scores.push(FoldScore {
            fold: fold + 1,
            n_train: model.design().n_rows(),
            n_test: count,
            rmse: (se / m).sqrt(),
            mae: ae / m,
            mape: 100.0 * ape / m,
        });
        progress(fold + 1, cv.folds);
    }
    let summary = |f: &dyn Fn(&FoldScore) -> f64| {
        let values: Vec<f64> = scores.iter().map(f).collect();
        let mean = values.iter().sum::<f64>() / values.len() as f64;
        let sd = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (values.len() - 1) as f64).sqrt();
        (mean, sd)
    };
    let (rmse, mae, mape) = (summary(&|s| s.rmse), summary(&|s| s.mae), summary(&|s| s.mape));
    Ok(CrossValidationResult {
        folds: cv.folds,
        seed: cv.seed,
        mean: (rmse.0, mae.0, mape.0),
        sd: (rmse.1, mae.1, mape.1),
        scores,
    })
}
