//! Collinearity among the terms.
//!
//! * **VIF / GVIF** per term (Fox & Monette 1992, "Generalized collinearity
//!   diagnostics", *JASA* 87, 178–183): with `R` the correlation matrix of all
//!   non-intercept design columns, `R₁₁` the block of the term's columns and
//!   `R₂₂` the rest, `GVIF = det R₁₁ · det R₂₂ / det R`. For a one-column term
//!   this is the ordinary `VIF = 1/(1 − R²ⱼ)`. We report GVIF raised to `1/(2·df)` as
//!   the term's **interval widening**: how many times wider its confidence
//!   interval (for a one-column term, `√VIF`) or the linear size of its
//!   confidence region (for several columns) is than it would be were the
//!   term uncorrelated with the others; Fox & Monette introduce the power to
//!   make terms of different sizes comparable.
//! * **Condition indices** `ηₖ = σ_max / σₖ` of the design with columns scaled
//!   to unit length, intercept included (Belsley, Kuh & Welsch 1980, §3.2).
//!   Belsley's rule of thumb (indices above 30 signal harmful dependence) is
//!   common practice, not a test.

use crate::fit::Fit;
use crate::model::design::INTERCEPT_NAME;
use faer::Mat;
use serde::{Deserialize, Serialize};

/// Variance inflation of one term.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct TermVif {
    /// The term as written.
    pub term: String,
    /// Its estimated design columns.
    pub df: usize,
    /// GVIF (the VIF for a one-column term).
    pub gvif: f64,
    /// Interval widening, GVIF raised to `1/(2·df)`: how many times wider the term's
    /// interval is than with uncorrelated terms (`√VIF` for one column).
    pub interval_widening: f64,
}

/// Interval widening above which a report warns: `√10 ≈ 3.16`, the widening
/// that matches the "VIF above 10" habit (common practice; e.g. Kutner et al.,
/// *Applied Linear Statistical Models*, 5th ed., §10.5, recalled from memory).
pub const INTERVAL_WIDENING_WARNING: f64 = 3.162_277_660_168_379_5;

/// Condition index above which a report warns: 30 (Belsley, Kuh & Welsch
/// 1980, ch. 3; common practice, not a test).
pub const CONDITION_INDEX_WARNING: f64 = 30.0;

/// Collinearity summary of a fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Collinearity {
    /// One entry per term with at least one estimated column.
    pub terms: Vec<TermVif>,
    /// Condition number of the unit-length-scaled design.
    pub condition_number: f64,
    /// Condition indices, ascending.
    pub condition_indices: Vec<f64>,
    /// Condition number among the terms alone: `√(λ_max/λ_min)` of the
    /// correlation matrix of the non-intercept columns. Unlike the scaled
    /// condition number it ignores near-dependence with the constant (a
    /// column far from zero with little spread), which is harmless.
    pub centered_condition_number: f64,
}

impl Fit {
    /// VIF/GVIF per term and the condition indices of the design (computed
    /// once per fit).
    pub fn collinearity(&self) -> Collinearity {
        (*self.derived().get_or_compute(|| self.compute_collinearity())).clone()
    }

    fn compute_collinearity(&self) -> Collinearity {
        let kept = self.solution().kept();
        let columns = self.design().columns();
        let n = self.design().n_rows();
        // Non-intercept kept columns, centred and scaled to unit length.
        let slopes: Vec<usize> = kept.iter().copied().filter(|&j| columns[j].name != INTERCEPT_NAME).collect();
        let standardized: Vec<Vec<f64>> = slopes
            .iter()
            .map(|&j| {
                let x = &columns[j].hi;
                let mean = x.iter().sum::<f64>() / n as f64;
                let norm = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>().sqrt();
                x.iter().map(|v| if norm > 0.0 { (v - mean) / norm } else { 0.0 }).collect()
            })
            .collect();
        let correlation = |set: &[usize]| {
            Mat::<f64>::from_fn(set.len(), set.len(), |a, b| {
                standardized[set[a]].iter().zip(&standardized[set[b]]).map(|(x, y)| x * y).sum()
            })
        };
        let all: Vec<usize> = (0..slopes.len()).collect();
        let det_all = if all.is_empty() { 1.0 } else { correlation(&all).determinant() };
        let centered_condition_number = if all.len() < 2 {
            1.0
        } else {
            match correlation(&all).self_adjoint_eigenvalues(faer::Side::Lower) {
                Ok(eigen) => {
                    let max = eigen.iter().cloned().fold(0.0, f64::max);
                    let min = eigen.iter().cloned().fold(f64::INFINITY, f64::min);
                    if min > 0.0 {
                        (max / min).sqrt()
                    } else {
                        f64::INFINITY
                    }
                }
                Err(_) => f64::NAN,
            }
        };
        let mut terms = Vec::new();
        for span in &self.design().recipe().term_spans {
            let inside: Vec<usize> = all.iter().copied().filter(|&a| span.columns.contains(&slopes[a])).collect();
            if inside.is_empty() {
                continue;
            }
            let outside: Vec<usize> = all.iter().copied().filter(|a| !inside.contains(a)).collect();
            let det_in = correlation(&inside).determinant();
            let det_out = if outside.is_empty() { 1.0 } else { correlation(&outside).determinant() };
            let gvif = det_in * det_out / det_all;
            let df = inside.len();
            terms.push(TermVif {
                term: span.label.clone(),
                df,
                gvif,
                interval_widening: gvif.powf(1.0 / (2.0 * df as f64)),
            });
        }

        // Condition indices of the unit-length-scaled design (intercept included).
        // (Weighted fits: the design of the transformed model, rows times √w.)
        let root_w: Vec<f64> = (0..n).map(|i| self.design().weights().map_or(1.0, |w| w[i].sqrt())).collect();
        let norms: Vec<f64> = kept
            .iter()
            .map(|&j| columns[j].hi.iter().zip(&root_w).map(|(v, r)| (v * r).powi(2)).sum::<f64>().sqrt())
            .collect();
        let scaled = Mat::<f64>::from_fn(n, kept.len(), |i, a| {
            if norms[a] > 0.0 {
                columns[kept[a]].hi[i] * root_w[i] / norms[a]
            } else {
                0.0
            }
        });
        let mut indices = match scaled.singular_values() {
            Ok(s) => {
                let max = s.iter().cloned().fold(0.0, f64::max);
                s.iter().map(|v| if *v > 0.0 { max / v } else { f64::INFINITY }).collect::<Vec<f64>>()
            }
            Err(_) => Vec::new(),
        };
        indices.sort_by(f64::total_cmp);
        Collinearity {
            terms,
            condition_number: self.solution().condition_number(),
            condition_indices: indices,
            centered_condition_number,
        }
    }
}
