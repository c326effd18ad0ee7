//! Several fits side by side, coefficients aligned by term.

use crate::error::Result;
use crate::fit::Fit;
use serde::{Deserialize, Serialize};

/// One term's estimates across the models (`None` where a model lacks it).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ComparisonRow {
    /// Design column name.
    pub term: String,
    /// `(estimate, standard error)` per model.
    pub cells: Vec<Option<(f64, f64)>>,
}

/// Whole-fit figures of one model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ModelFigures {
    /// The model's name as given.
    pub name: String,
    /// Rows used.
    pub n_obs: usize,
    /// Estimated coefficients.
    pub n_coefficients: usize,
    /// R².
    pub r_squared: f64,
    /// Adjusted R².
    pub adj_r_squared: f64,
    /// Residual standard error.
    pub residual_std_error: f64,
    /// AIC.
    pub aic: f64,
    /// BIC.
    pub bic: f64,
}

/// Side-by-side comparison of fits.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Comparison {
    /// Per model figures, in the order given.
    pub models: Vec<ModelFigures>,
    /// Terms in order of first appearance.
    pub rows: Vec<ComparisonRow>,
}

/// Lines up named fits. Standard errors follow each fit's own covariance estimator.
pub fn side_by_side(fits: &[(&str, &Fit)]) -> Result<Comparison> {
    let mut rows: Vec<ComparisonRow> = Vec::new();
    let mut models = Vec::with_capacity(fits.len());
    for (m, (name, fit)) in fits.iter().enumerate() {
        for c in fit.coefficients(0.95)? {
            let position = match rows.iter().position(|r| r.term == c.term) {
                Some(p) => p,
                None => {
                    rows.push(ComparisonRow { term: c.term.clone(), cells: vec![None; fits.len()] });
                    rows.len() - 1
                }
            };
            rows[position].cells[m] = Some((c.estimate, c.std_error));
        }
        let s = fit.statistics();
        models.push(ModelFigures {
            name: name.to_string(),
            n_obs: s.n_obs,
            n_coefficients: s.n_coefficients,
            r_squared: s.r_squared,
            adj_r_squared: s.adj_r_squared,
            residual_std_error: s.residual_std_error,
            aic: s.aic,
            bic: s.bic,
        });
    }
    Ok(Comparison { models, rows })
}
