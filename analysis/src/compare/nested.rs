//! Tests of a restricted model against a larger model that contains it.
//!
//! With residual sums of squares `RSS_r` (restricted, `k_r` coefficients) and
//! `RSS_f` (full, `k_f`), `q = k_f − k_r` and `n` rows:
//!
//! * `F = ((RSS_r − RSS_f)/q) / (RSS_f/(n − k_f))` on `(q, n − k_f)` df — the
//!   general linear hypothesis test (e.g. Seber & Lee, *Linear Regression
//!   Analysis*, 2nd ed., §4.3);
//! * `LR = n · ln(RSS_r / RSS_f)` on χ²(q) — the Gaussian likelihood ratio
//!   (Wilks 1938).
//!
//! The fits must use the same rows, target and weights, and every column of the
//! restricted design must be a linear combination of the full design's columns
//! (checked numerically, relative residual ≤ 1e-9).

use crate::error::{Error, Result};
use crate::fit::{auxiliary_regression, Fit};
use crate::stats::f_upper_p;
use serde::{Deserialize, Serialize};
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// Result of a nested-model comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct NestedTest {
    /// Coefficients of the restricted model.
    pub k_restricted: usize,
    /// Coefficients of the full model.
    pub k_full: usize,
    /// Restrictions tested, `k_full − k_restricted`.
    pub q: usize,
    /// Residual sum of squares of the restricted model.
    pub rss_restricted: f64,
    /// Residual sum of squares of the full model.
    pub rss_full: f64,
    /// F statistic.
    pub f_statistic: f64,
    /// Residual degrees of freedom of the full model.
    pub residual_df_full: usize,
    /// p-value of F.
    pub f_p_value: f64,
    /// Likelihood-ratio statistic.
    pub lr_statistic: f64,
    /// p-value of the likelihood ratio.
    pub lr_p_value: f64,
}

/// Tests whether `full` improves significantly on `restricted`.
pub fn nested_test(restricted: &Fit, full: &Fit) -> Result<NestedTest> {
    let (r, f) = (&restricted.design(), &full.design());
    if r.rows_used() != f.rows_used() || r.target() != f.target() || r.weights() != f.weights() {
        return Err(Error::Comparison(format!(
            "the fits use different rows, targets or weights ({} rows and {} rows); refit both on the same rows \
             (drop rows missing any column of either model first)",
            r.n_rows(),
            f.n_rows()
        )));
    }
    let full_columns: Vec<_> = full.solution().kept().iter().map(|&j| f.columns()[j].clone()).collect();
    for &j in restricted.solution().kept() {
        let column = &r.columns()[j];
        let norm: f64 = column.hi.iter().map(|v| v * v).sum::<f64>().sqrt();
        let projection = auxiliary_regression(&full_columns, &column.hi);
        if projection.weighted_rss().sqrt() > 1e-9 * norm.max(f64::MIN_POSITIVE) {
            return Err(Error::Comparison(format!(
                "the models are not nested: column `{}` of the first is not a combination of the second's columns",
                column.name
            )));
        }
    }
    let k_r = restricted.solution().kept().len();
    let k_f = full.solution().kept().len();
    if k_f <= k_r {
        return Err(Error::Comparison(format!(
            "the second model must have more coefficients than the first ({k_f} vs {k_r}); list the smaller model first"
        )));
    }
    let q = k_f - k_r;
    let n = r.n_rows();
    let df = n - k_f;
    let (rss_r, rss_f) = (restricted.solution().weighted_rss(), full.solution().weighted_rss());
    let f_statistic = ((rss_r - rss_f) / q as f64) / (rss_f / df as f64);
    let lr_statistic = n as f64 * (rss_r / rss_f).ln();
    let lr_p_value = ChiSquared::new(q as f64).map(|d| d.sf(lr_statistic.max(0.0))).unwrap_or(f64::NAN);
    Ok(NestedTest {
        k_restricted: k_r,
        k_full: k_f,
        q,
        rss_restricted: rss_r,
        rss_full: rss_f,
        f_statistic,
        residual_df_full: df,
        f_p_value: f_upper_p(f_statistic, q as f64, df as f64).unwrap_or(f64::NAN),
        lr_statistic,
        lr_p_value,
    })
}
