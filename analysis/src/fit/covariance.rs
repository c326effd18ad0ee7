//! Covariance estimators for least-squares coefficients.
//!
//! With `C = (XᵀWX)⁻¹`, weighted rows `x̃ᵢ = √wᵢ xᵢ`, weighted residuals
//! `ũᵢ = √wᵢ (yᵢ − xᵢᵀb)`, leverages `hᵢ = x̃ᵢᵀ C x̃ᵢ`, `n` rows and `k`
//! estimated coefficients:
//!
//! | estimator | formula | source |
//! |---|---|---|
//! | classical | `s² C`, `s² = Σ ũᵢ² / (n − k)` | Gauss–Markov |
//! | HC0 | `C (Σ ũᵢ² x̃ᵢx̃ᵢᵀ) C` | White (1980), *Econometrica* 48, 817–838 |
//! | HC1 | `n/(n − k) · HC0` | MacKinnon & White (1985), *J. Econometrics* 29, 305–325 |
//! | HC2 | `ũᵢ² / (1 − hᵢ)` in the middle | MacKinnon & White (1985) |
//! | HC3 | `ũᵢ² / (1 − hᵢ)²` in the middle | MacKinnon & White (1985); Long & Ervin (2000), *Am. Stat.* 54, 217–224 |
//! | cluster | `c · C (Σ_g s_g s_gᵀ) C`, `s_g = Σ_{i∈g} x̃ᵢ ũᵢ`, `c = G/(G−1) · (n−1)/(n−k)` | Liang & Zeger (1986); Cameron & Miller (2015), *J. Human Resources* 50, 317–372, §IIC |
//!
//! A row with leverage 1 has a zero residual by construction; HC2 and HC3
//! leave it out of the middle matrix rather than divide zero by zero.

use serde::{Deserialize, Serialize};

/// Which covariance estimator a fit reports.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum CovarianceKind {
    /// `s² (XᵀWX)⁻¹`, valid under homoskedastic, independent errors.
    #[default]
    Classical,
    /// White's heteroskedasticity-consistent estimator.
    Hc0,
    /// HC0 with the degrees-of-freedom correction `n/(n − k)`.
    Hc1,
    /// HC0 with squared residuals divided by `1 − hᵢ`.
    Hc2,
    /// HC0 with squared residuals divided by `(1 − hᵢ)²`; the usual choice for
    /// small samples (Long & Ervin 2000).
    Hc3,
    /// Cluster-robust by the named column (sales in the same neighbourhood or
    /// by the same buyer may share errors).
    Cluster(String),
}

impl CovarianceKind {
    /// A short label for tables and JSON: `classical`, `HC3`, `clustered by district`.
    pub fn label(&self) -> String {
        match self {
            CovarianceKind::Classical => "classical".into(),
            CovarianceKind::Hc0 => "HC0".into(),
            CovarianceKind::Hc1 => "HC1".into(),
            CovarianceKind::Hc2 => "HC2".into(),
            CovarianceKind::Hc3 => "HC3".into(),
            CovarianceKind::Cluster(c) => format!("clustered by {c}"),
        }
    }
}

/// The weighted design rows `x̃ᵢ` (kept columns only), row-major.
pub(crate) struct WeightedRows {
    /// `√wᵢ xᵢ` over the kept columns, one vector per row.
    pub rows: Vec<Vec<f64>>,
    /// `√wᵢ eᵢ`, one per row.
    pub residuals: Vec<f64>,
}

/// `hᵢ = x̃ᵢᵀ C x̃ᵢ` for every row.
pub(crate) fn leverages(rows: &[Vec<f64>], c: &[Vec<f64>]) -> Vec<f64> {
    rows.iter().map(|x| quadratic_form(c, x)).collect()
}

/// `xᵀ A x` for a symmetric `A`.
pub(crate) fn quadratic_form(a: &[Vec<f64>], x: &[f64]) -> f64 {
    let mut total = 0.0;
    for (i, xi) in x.iter().enumerate() {
        let row: f64 = a[i].iter().zip(x).map(|(aij, xj)| aij * xj).sum();
        total += xi * row;
    }
    total
}

/// `C M C` for symmetric `C` and `M`, both `k × k`.
fn sandwich(c: &[Vec<f64>], middle: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = c.len();
    let mut cm = vec![vec![0.0; k]; k];
    for i in 0..k {
        for j in 0..k {
            cm[i][j] = (0..k).map(|l| c[i][l] * middle[l][j]).sum();
        }
    }
    let mut out = vec![vec![0.0; k]; k];
    for i in 0..k {
        for j in 0..k {
            out[i][j] = (0..k).map(|l| cm[i][l] * c[l][j]).sum();
        }
    }
    out
}

/// `Σ ωᵢ x̃ᵢ x̃ᵢᵀ`.
fn weighted_gram(rows: &[Vec<f64>], omega: &[f64]) -> Vec<Vec<f64>> {
    let k = rows.first().map_or(0, Vec::len);
    let mut m = vec![vec![0.0; k]; k];
    for (x, &w) in rows.iter().zip(omega) {
        if w == 0.0 {
            continue;
        }
        for a in 0..k {
            let wa = w * x[a];
            for b in a..k {
                m[a][b] += wa * x[b];
            }
        }
    }
    for a in 0..k {
        for b in 0..a {
            m[a][b] = m[b][a];
        }
    }
    m
}

/// Heteroskedasticity-consistent covariance HC0–HC3 (`kind` 0–3).
pub(crate) fn heteroskedasticity_consistent(kind: u8, data: &WeightedRows, c: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let n = data.rows.len();
    let k = c.len();
    let h = if kind >= 2 { leverages(&data.rows, c) } else { Vec::new() };
    let omega: Vec<f64> = data
        .residuals
        .iter()
        .enumerate()
        .map(|(i, u)| {
            let u2 = u * u;
            match kind {
                2 | 3 => {
                    let one_minus = 1.0 - h[i];
                    if one_minus <= 1e-12 {
                        0.0
                    } else if kind == 2 {
                        u2 / one_minus
                    } else {
                        u2 / (one_minus * one_minus)
                    }
                }
                _ => u2,
            }
        })
        .collect();
    let mut v = sandwich(c, &weighted_gram(&data.rows, &omega));
    if kind == 1 && n > k {
        let factor = n as f64 / (n - k) as f64;
        v.iter_mut().flatten().for_each(|x| *x *= factor);
    }
    v
}

/// Cluster-robust covariance; `groups[i]` is the cluster index of row `i`.
pub(crate) fn cluster_robust(data: &WeightedRows, c: &[Vec<f64>], groups: &[usize], n_groups: usize) -> Vec<Vec<f64>> {
    let n = data.rows.len();
    let k = c.len();
    let mut scores = vec![vec![0.0; k]; n_groups];
    for ((x, u), &g) in data.rows.iter().zip(&data.residuals).zip(groups) {
        for (s, xi) in scores[g].iter_mut().zip(x) {
            *s += xi * u;
        }
    }
    let mut middle = vec![vec![0.0; k]; k];
    for s in &scores {
        for a in 0..k {
            for b in 0..k {
                middle[a][b] += s[a] * s[b];
            }
        }
    }
    let g = n_groups as f64;
    let factor = g / (g - 1.0) * (n as f64 - 1.0) / (n as f64 - k as f64);
    let mut v = sandwich(c, &middle);
    v.iter_mut().flatten().for_each(|x| *x *= factor);
    v
}
