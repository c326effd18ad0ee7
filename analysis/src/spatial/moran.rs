//! Moran's I and its moments (Cliff & Ord 1981).
//!
//! For values `z` (deviations from their mean, or least-squares residuals)
//! and weights `W` with total `S₀ = Σᵢⱼ wᵢⱼ`:
//!
//! ```text
//! I = (n / S₀) · zᵀWz / zᵀz
//! ```
//!
//! `I` above its expectation says neighbours resemble one another (values
//! cluster in space); below says they differ. The test is the standard score
//! `(I − E I) / √Var I` against the standard normal.
//!
//! **A variable** (Cliff & Ord 1981, eqs. 1.35–1.39): `E I = −1/(n − 1)` and
//!
//! * normality: `E I² = (n² S₁ − n S₂ + 3 S₀²) / ((n² − 1) S₀²)`;
//! * randomisation: `E I² = [n((n² − 3n + 3) S₁ − n S₂ + 3 S₀²) − b₂((n² − n) S₁ − 2n S₂ + 6 S₀²)]
//!   / ((n − 1)(n − 2)(n − 3) S₀²)` with the kurtosis `b₂ = n Σz⁴ / (Σz²)²`;
//!
//! and `Var I = E I² − (E I)²`, with `S₁ = ½ Σᵢⱼ (wᵢⱼ + wⱼᵢ)²` and
//! `S₂ = Σᵢ (wᵢ. + w.ᵢ)²`.
//!
//! **Least-squares residuals** `e = M y`, `M = I − X(XᵀX)⁻¹Xᵀ`, `k` columns,
//! under independent normal errors (Cliff & Ord 1981, §8.3; Anselin 1988,
//! eqs. 8.3–8.4):
//!
//! ```text
//! E I   = (n / S₀) · tr(MW) / (n − k)
//! Var I = (n / S₀)² · [tr(MWMWᵀ) + tr((MW)²) + (tr MW)²] / ((n − k)(n − k + 2)) − (E I)²
//! ```
//!
//! The traces are formed without any `n × n` matrix: with `G = (XᵀX)⁻¹`,
//! `A = XᵀWX` and `tr W = 0`,
//! `tr(MW) = −tr(GA)`,
//! `tr(MWMWᵀ) = tr(WᵀW) − tr(G (WᵀX)ᵀ(WᵀX)) − tr(G (WX)ᵀ(WX)) + tr(GAGAᵀ)` and
//! `tr((MW)²) = tr(W²) − 2 tr(G (WᵀX)ᵀ(WX)) + tr(GAGA)`,
//! so the cost is `O(n k (m + k))` for `m` neighbours per parcel.

use super::weights::{Neighbourhood, SpatialWeights, WeightStyle};
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, Normal};

/// The assumption the moments of `I` are derived under.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum MoranAssumption {
    /// The values are independent draws from one normal distribution.
    Normality,
    /// Every permutation of the observed values over the parcels is equally
    /// likely (no distributional assumption).
    Randomisation,
    /// The values are least-squares residuals of a model with normal,
    /// independent errors; the moments account for the fitted columns.
    RegressionResiduals,
}

impl MoranAssumption {
    /// In words, for reports.
    pub fn describe(self) -> &'static str {
        match self {
            MoranAssumption::Normality => "normality",
            MoranAssumption::Randomisation => "randomisation",
            MoranAssumption::RegressionResiduals => "regression residuals under normal errors",
        }
    }
}

/// Moran's I with its moments and p-values.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct MoranTest {
    /// Parcels `n`.
    pub n: usize,
    /// `I`.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub statistic: f64,
    /// `E I` under the assumption.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub expected: f64,
    /// `Var I` under the assumption.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub variance: f64,
    /// `(I − E I) / √Var I`.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub z_score: f64,
    /// Two-sided p-value, `2 P(Z ≥ |z|)`.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub p_value: f64,
    /// One-sided p-value for clustering (positive autocorrelation), `P(Z ≥ z)`.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub p_value_clustering: f64,
    /// The assumption behind the moments.
    pub assumption: MoranAssumption,
    /// How neighbours were chosen.
    pub neighbourhood: Neighbourhood,
    /// How the weights were scaled.
    pub style: WeightStyle,
}

fn finish(
    n: usize,
    statistic: f64,
    expected: f64,
    variance: f64,
    assumption: MoranAssumption,
    w: &SpatialWeights,
) -> MoranTest {
    let z_score = (statistic - expected) / variance.sqrt();
    let normal = Normal::standard();
    MoranTest {
        n,
        statistic,
        expected,
        variance,
        z_score,
        p_value: (2.0 * normal.sf(z_score.abs())).min(1.0),
        p_value_clustering: normal.sf(z_score),
        assumption,
        neighbourhood: w.neighbourhood(),
        style: w.style(),
    }
}

fn check_sizes(values: &[f64], w: &SpatialWeights, least: usize) -> Result<()> {
    if values.len() != w.len() {
        return Err(Error::Specification(format!(
            "Moran's I needs one value per parcel of the weights: {} values, {} parcels",
            values.len(),
            w.len()
        )));
    }
    if values.len() < least {
        return Err(Error::Specification(format!(
            "Moran's I needs at least {least} parcels here; found {}",
            values.len()
        )));
    }
    if let Some(i) = values.iter().position(|v| !v.is_finite()) {
        return Err(Error::OutOfRange {
            what: format!("value {} of Moran's I", i + 1),
            requirement: "a finite number".into(),
            value: values[i].to_string(),
        });
    }
    Ok(())
}

/// `zᵀWz`.
fn quadratic_form(z: &[f64], w: &SpatialWeights) -> f64 {
    z.iter().zip(w.lag(z)).map(|(a, b)| a * b).sum()
}

/// Moran's I of `values` with weights `w`, its moments under
/// [`MoranAssumption::Normality`] or [`MoranAssumption::Randomisation`] (see
/// the module documentation). Needs four or more finite values that are not
/// all equal. For residuals of a fit use [`moran_test_of_residuals`].
pub fn moran_test(values: &[f64], w: &SpatialWeights, assumption: MoranAssumption) -> Result<MoranTest> {
    check_sizes(values, w, 4)?;
    let nf = values.len() as f64;
    let mean = values.iter().sum::<f64>() / nf;
    let z: Vec<f64> = values.iter().map(|v| v - mean).collect();
    let m2: f64 = z.iter().map(|v| v * v).sum();
    if !(m2 > 0.0) {
        return Err(Error::Specification("Moran's I is undefined when every value is the same".into()));
    }
    let sums = w.sums();
    let (s0, s1, s2) = (sums.s0, sums.s1, sums.s2);
    let statistic = nf / s0 * quadratic_form(&z, w) / m2;
    let expected = -1.0 / (nf - 1.0);
    let second_moment = match assumption {
        MoranAssumption::Normality => (nf * nf * s1 - nf * s2 + 3.0 * s0 * s0) / ((nf * nf - 1.0) * s0 * s0),
        MoranAssumption::Randomisation => {
            let b2 = nf * z.iter().map(|v| v.powi(4)).sum::<f64>() / (m2 * m2);
            (nf * ((nf * nf - 3.0 * nf + 3.0) * s1 - nf * s2 + 3.0 * s0 * s0)
                - b2 * ((nf * nf - nf) * s1 - 2.0 * nf * s2 + 6.0 * s0 * s0))
                / ((nf - 1.0) * (nf - 2.0) * (nf - 3.0) * s0 * s0)
        }
        MoranAssumption::RegressionResiduals => {
            return Err(Error::Specification(
                "Moran's I of regression residuals needs the fitted columns; use moran_test_of_residuals".into(),
            ))
        }
    };
    Ok(finish(values.len(), statistic, expected, second_moment - expected * expected, assumption, w))
}

/// `Σ_ab P[a][b] Q[b][a]`, the trace of the product of two `k × k` matrices.
fn trace_of_product(p: &[Vec<f64>], q: &[Vec<f64>]) -> f64 {
    let k = p.len();
    (0..k).map(|a| (0..k).map(|b| p[a][b] * q[b][a]).sum::<f64>()).sum()
}

/// `Uᵀ V` for column lists `U`, `V` (each column `n` long).
fn cross(u: &[Vec<f64>], v: &[Vec<f64>]) -> Vec<Vec<f64>> {
    u.iter().map(|a| v.iter().map(|b| a.iter().zip(b).map(|(x, y)| x * y).sum()).collect()).collect()
}

/// `P Q` for `k × k` matrices.
fn product(p: &[Vec<f64>], q: &[Vec<f64>]) -> Vec<Vec<f64>> {
    let k = p.len();
    (0..k).map(|a| (0..k).map(|b| (0..k).map(|c| p[a][c] * q[c][b]).sum()).collect()).collect()
}

/// Moran's I of least-squares `residuals`, with the exact moments under
/// normal errors given the fitted columns (module documentation).
///
/// `columns` are the model's estimated design columns (each `n` long, in the
/// same scaling as the residuals — times `√wᵢ` for a weighted fit) and
/// `unscaled_covariance` is `(XᵀX)⁻¹` over them.
pub fn moran_test_of_residuals(
    residuals: &[f64],
    columns: &[Vec<f64>],
    unscaled_covariance: &[Vec<f64>],
    w: &SpatialWeights,
) -> Result<MoranTest> {
    let k = columns.len();
    check_sizes(residuals, w, k + 2)?;
    if unscaled_covariance.len() != k || columns.iter().any(|c| c.len() != residuals.len()) {
        return Err(Error::Specification("the fitted columns and their covariance do not match the residuals".into()));
    }
    let n = residuals.len();
    let nf = n as f64;
    let m2: f64 = residuals.iter().map(|v| v * v).sum();
    if !(m2 > 0.0) {
        return Err(Error::Specification(
            "Moran's I is undefined for a fit whose residuals are all zero (an exact fit)".into(),
        ));
    }
    let sums = w.sums();
    let statistic = nf / sums.s0 * quadratic_form(residuals, w) / m2;

    let g = unscaled_covariance;
    let wx: Vec<Vec<f64>> = columns.iter().map(|c| w.lag(c)).collect();
    let wtx: Vec<Vec<f64>> = columns.iter().map(|c| w.lag_transposed(c)).collect();
    let a = cross(columns, &wx); // XᵀWX
    let a_t: Vec<Vec<f64>> = (0..k).map(|i| (0..k).map(|j| a[j][i]).collect()).collect();
    let ga = product(g, &a);
    let trace_mw = -trace_of_product(g, &a);
    let trace_mwmwt = sums.trace_wtw - trace_of_product(g, &cross(&wtx, &wtx)) - trace_of_product(g, &cross(&wx, &wx))
        + trace_of_product(&ga, &product(g, &a_t));
    let trace_mwmw = sums.trace_ww - 2.0 * trace_of_product(g, &cross(&wtx, &wx)) + trace_of_product(&ga, &ga);
    let dof = nf - k as f64;
    let scale = nf / sums.s0;
    let expected = scale * trace_mw / dof;
    let variance =
        scale * scale * (trace_mwmwt + trace_mwmw + trace_mw * trace_mw) / (dof * (dof + 2.0)) - expected * expected;
    Ok(finish(n, statistic, expected, variance, MoranAssumption::RegressionResiduals, w))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Four parcels on a line, 0–1–2–3, binary weights between adjacent ones;
    /// values 1, 2, 3, 4. Worked by hand from the formulas in the module
    /// documentation (Cliff & Ord 1981, eqs. 1.35–1.39):
    ///
    /// * z = (−1.5, −0.5, 0.5, 1.5), Σz² = 5, S₀ = 6;
    /// * zᵀWz = 2·[(−1.5)(−0.5) + (−0.5)(0.5) + (0.5)(1.5)] = 2·1.25 = 2.5;
    /// * I = (4/6)·2.5/5 = 1/3; E I = −1/3;
    /// * S₁ = ½·6·4 = 12; degrees (1, 2, 2, 1) so S₂ = 4 + 16 + 16 + 4 = 40;
    /// * normality: E I² = (16·12 − 4·40 + 3·36)/(15·36) = 140/540 = 7/27,
    ///   Var = 7/27 − 1/9 = 4/27;
    /// * randomisation: b₂ = 4·(2·1.5⁴ + 2·0.5⁴)/25 = 4·10.25/25 = 1.64;
    ///   E I² = [4(7·12 − 160 + 108) − 1.64(12·12 − 320 + 216)]/(3·2·1·36)
    ///   = [128 − 65.6]/216 = 62.4/216, Var = 62.4/216 − 1/9 = 38.4/216.
    #[test]
    fn a_line_of_four_worked_by_hand() {
        let w = SpatialWeights::from_rows(
            vec![vec![(1, 1.0)], vec![(0, 1.0), (2, 1.0)], vec![(1, 1.0), (3, 1.0)], vec![(2, 1.0)]],
            Neighbourhood::Within { distance: 1.0 },
            WeightStyle::Binary,
        )
        .unwrap();
        let values = [1.0, 2.0, 3.0, 4.0];
        let normal = moran_test(&values, &w, MoranAssumption::Normality).unwrap();
        assert!((normal.statistic - 1.0 / 3.0).abs() < 1e-15);
        assert!((normal.expected + 1.0 / 3.0).abs() < 1e-15);
        assert!((normal.variance - 4.0 / 27.0).abs() < 1e-15, "{}", normal.variance);
        let z = (2.0 / 3.0) / (4.0f64 / 27.0).sqrt();
        assert!((normal.z_score - z).abs() < 1e-13);
        let random = moran_test(&values, &w, MoranAssumption::Randomisation).unwrap();
        assert!((random.variance - 38.4 / 216.0).abs() < 1e-15, "{}", random.variance);
    }

    /// With only an intercept, the residuals are the deviations from the
    /// mean and the regression moments reduce to the normality moments
    /// (Cliff & Ord 1981, §8.3: the k = 1 case).
    #[test]
    fn residual_moments_with_only_an_intercept_equal_the_normality_moments() {
        let xs: Vec<f64> = (0..30).map(|i| (i % 6) as f64 + 0.1 * (i as f64).sin()).collect();
        let ys: Vec<f64> = (0..30).map(|i| (i / 6) as f64 + 0.1 * (i as f64).cos()).collect();
        let w = SpatialWeights::build(&xs, &ys, Neighbourhood::Nearest { k: 4 }, WeightStyle::RowStandardised).unwrap();
        let values: Vec<f64> = (0..30).map(|i| ((i * 7919) % 31) as f64).collect();
        let mean = values.iter().sum::<f64>() / 30.0;
        let residuals: Vec<f64> = values.iter().map(|v| v - mean).collect();
        let plain = moran_test(&values, &w, MoranAssumption::Normality).unwrap();
        let regression = moran_test_of_residuals(&residuals, &[vec![1.0; 30]], &[vec![1.0 / 30.0]], &w).unwrap();
        assert!((plain.statistic - regression.statistic).abs() < 1e-14);
        assert!((plain.expected - regression.expected).abs() < 1e-14);
        assert!((plain.variance - regression.variance).abs() < 1e-12 * plain.variance);
    }
}
