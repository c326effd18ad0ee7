//! Reading a fit: coefficient tests and intervals, goodness of fit, and the
//! machine-readable summary.
//!
//! Definitions (NIST StRD's for the ANOVA quantities):
//!
//! * `RSS = Σ wᵢ rᵢ²`; `TSS = Σ wᵢ (yᵢ − ȳ_w)²` with an intercept, `Σ wᵢ yᵢ²`
//!   without (uncentered); `SSreg = TSS − RSS` (in double-double).
//! * `R² = SSreg / TSS`; adjusted `R² = 1 − (1 − R²)(n − i)/(n − k)` with
//!   `i = 1` with an intercept and `0` without.
//! * `s = √(RSS/(n − k))`; `F = (SSreg/model_df)/s²` with `model_df = k − i`
//!   on `(model_df, n − k)` degrees of freedom. Under a robust covariance `V`
//!   the overall test is the Wald form `F = b₂ᵀ V₂₂⁻¹ b₂ / q` over the `q`
//!   non-intercept coefficients.
//! * Gaussian log-likelihood at the ML variance `σ̂² = RSS/n`:
//!   `ℓ = −n/2 (ln 2π + ln σ̂² + 1) + ½ Σ ln wᵢ`; `AIC = −2ℓ + 2(k + 1)`,
//!   `BIC = −2ℓ + ln(n)(k + 1)` — the `+1` counts the error variance
//!   (Akaike 1974; Schwarz 1978).
//! * t statistics use `n − k` degrees of freedom, or `G − 1` for
//!   cluster-robust errors with `G` clusters (Cameron & Miller 2015, §VIIC).
//!
//! Distributions come from `statrs` (regularized incomplete beta).

use crate::error::Result;
use crate::fit::{AssembledFit, CovarianceKind, Fit};
use crate::model::design::INTERCEPT_NAME;
use crate::model::TargetTransform;
use crate::numeric::DoubleDouble;
use crate::stats::{check_level, f_upper_p, t_critical, t_two_sided_p};
use serde::{Deserialize, Serialize};

/// Version of the JSON document produced by [`Fit::summary`]; bumped on any
/// change that a reader would notice. 2: the degrees-of-freedom fields took
/// our names `model_df`/`residual_df` (README, "JSON output"); 3: the fit
/// document may carry a `spatial` section (Moran's I of the residuals);
/// version 2 documents read unchanged; 4: the `spatial` section's options say
/// whether the places are planar or geographic (`coordinates`; a version 3
/// section reads as planar).
pub const SUMMARY_SCHEMA_VERSION: u32 = 4;

/// One row of the coefficient table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Coefficient {
    /// Design column name.
    pub term: String,
    /// Least-squares estimate.
    pub estimate: f64,
    /// Standard error under the fit's covariance estimator.
    pub std_error: f64,
    /// `estimate / std_error`; `None` when the standard error is zero (a perfect fit).
    pub t: Option<f64>,
    /// Two-sided p-value of `t`; `None` when `t` is.
    pub p_value: Option<f64>,
    /// Lower end of the confidence interval at the requested level.
    pub ci_low: f64,
    /// Upper end of the confidence interval.
    pub ci_high: f64,
}

/// Whole-fit statistics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitStatistics {
    /// Rows used.
    pub n_obs: usize,
    /// Estimated coefficients (the numerical rank).
    pub n_coefficients: usize,
    /// Model degrees of freedom `k − i`.
    pub model_df: usize,
    /// Residual degrees of freedom `n − k`.
    pub residual_df: usize,
    /// Degrees of freedom of the t reference distribution.
    pub df_t: f64,
    /// Coefficient of determination (uncentered without an intercept).
    pub r_squared: f64,
    /// Adjusted R².
    pub adj_r_squared: f64,
    /// Residual standard error `s`.
    pub residual_std_error: f64,
    /// Overall F statistic; `None` when undefined (no slope, or zero residuals).
    pub f_statistic: Option<f64>,
    /// p-value of the overall F.
    pub f_p_value: Option<f64>,
    /// Regression sum of squares.
    pub ss_regression: f64,
    /// Residual sum of squares.
    pub ss_residual: f64,
    /// Total sum of squares (centered, or uncentered without intercept).
    pub ss_total: f64,
    /// Gaussian log-likelihood.
    pub log_likelihood: f64,
    /// Akaike information criterion.
    pub aic: f64,
    /// Schwarz (Bayesian) information criterion.
    pub bic: f64,
    /// Condition number of the column-equilibrated design.
    pub condition_number: f64,
}

impl Fit {
    /// Residual degrees of freedom `n − k`.
    pub fn residual_df(&self) -> usize {
        self.design().n_rows() - self.solution().kept().len()
    }

    /// Degrees of freedom for t tests and intervals.
    pub fn df_t(&self) -> f64 {
        match (&self.covariance_kind(), self.cluster_count()) {
            (CovarianceKind::Cluster(_), Some(g)) => (g - 1) as f64,
            _ => self.residual_df() as f64,
        }
    }

    /// Residual standard error `s = √(RSS/(n − k))`.
    pub fn residual_std_error(&self) -> f64 {
        (self.solution().weighted_rss() / self.residual_df() as f64).sqrt()
    }

    /// Whether the intercept is among the estimated columns.
    fn intercept_estimated(&self) -> bool {
        self.spec().has_intercept()
            && self.solution().kept().first().is_some_and(|&j| self.design().columns()[j].name == INTERCEPT_NAME)
    }

    /// The coefficient table at confidence `level` (e.g. 0.95).
    pub fn coefficients(&self, level: f64) -> Result<Vec<Coefficient>> {
        let names: Vec<&str> = self.estimated_names();
        coefficient_table(&names, self.solution().coefficients(), self.covariance(), self.df_t(), level)
    }

    /// Goodness-of-fit statistics.
    pub fn statistics(&self) -> FitStatistics {
        let n = self.design().n_rows();
        let with_intercept = self.spec().has_intercept();
        let y = self.design().target();
        let w = self.design().weights();
        let weight = |i: usize| w.map_or(1.0, |w| w[i]);
        let total_weight: DoubleDouble = (0..n).map(|i| DoubleDouble::from(weight(i))).sum();
        let weighted_sum: DoubleDouble = (0..n).map(|i| DoubleDouble::from_product(weight(i), y[i])).sum();
        let mean = if with_intercept { weighted_sum / total_weight } else { DoubleDouble::ZERO };
        let ss_total: DoubleDouble = (0..n)
            .map(|i| {
                let d = DoubleDouble::from(y[i]) - mean;
                (d * d).mul_f64(weight(i))
            })
            .sum();
        whole_fit_statistics(&WholeFitSums {
            rows: n,
            with_intercept,
            intercept_estimated: self.intercept_estimated(),
            rss: self.solution().weighted_rss(),
            ss_total,
            sum_log_weight: w.map_or(0.0, |w| w.iter().map(|v| v.ln()).sum()),
            df_t: self.df_t(),
            condition_number: self.solution().condition_number(),
            classical: *self.covariance_kind() == CovarianceKind::Classical,
            coefficients: self.solution().coefficients(),
            covariance: self.covariance(),
        })
    }

    /// The full machine-readable summary at confidence `level`.
    pub fn summary(&self, level: f64) -> Result<FitSummary> {
        let coefficients = self.coefficients(level)?;
        let stats = self.statistics();
        let dropped = self.design().dropped();
        Ok(FitSummary {
            schema: "plumbline.fit".into(),
            schema_version: SUMMARY_SCHEMA_VERSION,
            target: self.spec().target().to_string(),
            target_transform: match self.spec().target_transform() {
                TargetTransform::None => "none".into(),
                TargetTransform::Log => "log".into(),
            },
            n_obs: stats.n_obs,
            n_dropped: dropped.total,
            dropped_by_column: dropped.by_column.clone(),
            non_finite_by_column: dropped.non_finite_by_column.clone(),
            model_df: stats.model_df,
            residual_df: stats.residual_df,
            intercept: self.spec().has_intercept(),
            covariance: self.covariance_kind().label(),
            clusters: self.cluster_count(),
            level,
            solver: self.solution().method(),
            coefficients,
            aliased: self.aliased_names().into_iter().map(str::to_string).collect(),
            r_squared: stats.r_squared,
            adj_r_squared: stats.adj_r_squared,
            residual_std_error: stats.residual_std_error,
            f_statistic: stats.f_statistic,
            f_p_value: stats.f_p_value,
            ss_regression: stats.ss_regression,
            ss_residual: stats.ss_residual,
            ss_total: stats.ss_total,
            log_likelihood: stats.log_likelihood,
            aic: stats.aic,
            bic: stats.bic,
            condition_number: stats.condition_number,
            data: self.provenance().clone(),
        })
    }
}

impl AssembledFit {
    /// Whether the intercept is among the estimated columns.
    fn intercept_estimated(&self) -> bool {
        self.recipe.spec.has_intercept()
            && self.kept.first().is_some_and(|&j| self.recipe.column_names[j] == INTERCEPT_NAME)
    }

    /// Residual degrees of freedom `n − k` (also the t reference's).
    pub fn residual_df(&self) -> usize {
        self.rows - self.kept.len()
    }

    /// The coefficient table at confidence `level` (e.g. 0.95).
    pub fn coefficients(&self, level: f64) -> Result<Vec<Coefficient>> {
        let names = self.estimated_names();
        coefficient_table(&names, &self.coefficients, &self.covariance, self.residual_df() as f64, level)
    }

    /// Goodness-of-fit statistics, from the sums gathered piece by piece.
    pub fn statistics(&self) -> FitStatistics {
        whole_fit_statistics(&WholeFitSums {
            rows: self.rows,
            with_intercept: self.recipe.spec.has_intercept(),
            intercept_estimated: self.intercept_estimated(),
            rss: self.weighted_rss,
            ss_total: self.ss_total,
            sum_log_weight: self.sum_log_weight,
            df_t: self.residual_df() as f64,
            condition_number: self.condition_number,
            classical: self.covariance_kind == CovarianceKind::Classical,
            coefficients: &self.coefficients,
            covariance: &self.covariance,
        })
    }

    /// The fit document at confidence `level`: the same document as an
    /// in-memory fit's, from the sums gathered piece by piece.
    pub fn summary(&self, level: f64) -> Result<FitSummary> {
        let stats = self.statistics();
        Ok(FitSummary {
            schema: "plumbline.fit".into(),
            schema_version: SUMMARY_SCHEMA_VERSION,
            target: self.recipe.spec.target().to_string(),
            target_transform: match self.recipe.spec.target_transform() {
                TargetTransform::None => "none".into(),
                TargetTransform::Log => "log".into(),
            },
            n_obs: stats.n_obs,
            n_dropped: self.dropped.total,
            dropped_by_column: self.dropped.by_column.clone(),
            non_finite_by_column: self.dropped.non_finite_by_column.clone(),
            model_df: stats.model_df,
            residual_df: stats.residual_df,
            intercept: self.recipe.spec.has_intercept(),
            covariance: self.covariance_kind.label(),
            clusters: None,
            level,
            solver: self.method,
            coefficients: self.coefficients(level)?,
            aliased: self.aliased_names().into_iter().map(str::to_string).collect(),
            r_squared: stats.r_squared,
            adj_r_squared: stats.adj_r_squared,
            residual_std_error: stats.residual_std_error,
            f_statistic: stats.f_statistic,
            f_p_value: stats.f_p_value,
            ss_regression: stats.ss_regression,
            ss_residual: stats.ss_residual,
            ss_total: stats.ss_total,
            log_likelihood: stats.log_likelihood,
            aic: stats.aic,
            bic: stats.bic,
            condition_number: stats.condition_number,
            data: self.provenance.clone(),
        })
    }
}

/// The coefficient table from estimates and their covariance, with t tests
/// on `df` degrees of freedom and intervals at `level`.
fn coefficient_table(
    names: &[&str],
    estimates: &[f64],
    covariance: &[Vec<f64>],
    df: f64,
    level: f64,
) -> Result<Vec<Coefficient>> {
    check_level(level)?;
    let crit = t_critical(level, df);
    Ok(names
        .iter()
        .zip(estimates)
        .enumerate()
        .map(|(k, (name, &estimate))| {
            let std_error = covariance[k][k].max(0.0).sqrt();
            let t = if std_error > 0.0 { Some(estimate / std_error) } else { None };
            Coefficient {
                term: name.to_string(),
                estimate,
                std_error,
                t,
                p_value: t.map(|t| t_two_sided_p(t, df)),
                ci_low: estimate - crit * std_error,
                ci_high: estimate + crit * std_error,
            }
        })
        .collect())
}

/// The sums whole-fit statistics are computed from, however they were gathered.
struct WholeFitSums<'a> {
    rows: usize,
    with_intercept: bool,
    intercept_estimated: bool,
    rss: f64,
    ss_total: DoubleDouble,
    sum_log_weight: f64,
    df_t: f64,
    condition_number: f64,
    classical: bool,
    coefficients: &'a [f64],
    covariance: &'a [Vec<f64>],
}

/// R², F, likelihood and information criteria from a fit's sums.
fn whole_fit_statistics(sums: &WholeFitSums) -> FitStatistics {
    let n = sums.rows;
    let k = sums.coefficients.len();
    let rss = sums.rss;
    let ss_total = sums.ss_total.to_f64();
    let ss_regression = (sums.ss_total - DoubleDouble::from(rss)).to_f64();
    let i = usize::from(sums.with_intercept);
    let model_df = k.saturating_sub(usize::from(sums.intercept_estimated));
    let residual_df = n - k;
    let r_squared = if ss_total > 0.0 { ss_regression / ss_total } else { f64::NAN };
    let adj_r_squared = 1.0 - (1.0 - r_squared) * (n - i) as f64 / residual_df as f64;
    let s2 = rss / residual_df as f64;
    let (f_statistic, f_p_value) = overall_f(sums, model_df, ss_regression, s2);
    let nf = n as f64;
    let log_likelihood =
        -0.5 * nf * ((2.0 * std::f64::consts::PI).ln() + (rss / nf).ln() + 1.0) + 0.5 * sums.sum_log_weight;
    let params = (k + 1) as f64;
    FitStatistics {
        n_obs: n,
        n_coefficients: k,
        model_df,
        residual_df,
        df_t: sums.df_t,
        r_squared,
        adj_r_squared,
        residual_std_error: s2.sqrt(),
        f_statistic,
        f_p_value,
        ss_regression,
        ss_residual: rss,
        ss_total,
        log_likelihood,
        aic: -2.0 * log_likelihood + 2.0 * params,
        bic: -2.0 * log_likelihood + nf.ln() * params,
        condition_number: sums.condition_number,
    }
}

/// The overall F test of the slopes: the classical ANOVA F, or under a
/// robust covariance the Wald F of all non-intercept coefficients.
fn overall_f(sums: &WholeFitSums, model_df: usize, ss_regression: f64, s2: f64) -> (Option<f64>, Option<f64>) {
    if model_df == 0 {
        return (None, None);
    }
    let f = if sums.classical {
        if !(s2 > 0.0) {
            return (None, None);
        }
        (ss_regression / model_df as f64) / s2
    } else {
        match wald_slopes(sums) {
            Some(f) => f,
            None => return (None, None),
        }
    };
    (Some(f), f_upper_p(f, model_df as f64, sums.df_t))
}

/// Wald F of all non-intercept coefficients under the fit's covariance.
fn wald_slopes(sums: &WholeFitSums) -> Option<f64> {
    let skip = usize::from(sums.intercept_estimated);
    let k = sums.coefficients.len();
    let q = k - skip;
    let b: Vec<f64> = sums.coefficients[skip..].to_vec();
    let v = faer::Mat::<f64>::from_fn(q, q, |a, c| sums.covariance[a + skip][c + skip]);
    let rhs = faer::Mat::<f64>::from_fn(q, 1, |a, _| b[a]);
    use faer::linalg::solvers::Solve;
    let x = v.partial_piv_lu().solve(&rhs);
    let quad: f64 = (0..q).map(|a| b[a] * x[(a, 0)]).sum();
    quad.is_finite().then_some(quad / q as f64)
}

/// The machine-readable fit, serialized as the JSON documented in README.md.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct FitSummary {
    /// Always `plumbline.fit`.
    pub schema: String,
    /// [`SUMMARY_SCHEMA_VERSION`].
    pub schema_version: u32,
    /// Target column.
    pub target: String,
    /// `none` or `log`.
    pub target_transform: String,
    /// Rows used.
    pub n_obs: usize,
    /// Rows dropped for missing values.
    pub n_dropped: usize,
    /// Rows missing each model column (a row can count under several).
    pub dropped_by_column: Vec<(String, usize)>,
    /// Of those, values that were present but not finite and were read as
    /// missing because the data's rule said so (`--non-finite missing`).
    pub non_finite_by_column: Vec<(String, usize)>,
    /// Model degrees of freedom.
    pub model_df: usize,
    /// Residual degrees of freedom.
    pub residual_df: usize,
    /// Whether the model has an intercept.
    pub intercept: bool,
    /// Covariance estimator label.
    pub covariance: String,
    /// Number of clusters for cluster-robust errors.
    pub clusters: Option<usize>,
    /// Confidence level of the intervals.
    pub level: f64,
    /// Solver used.
    pub solver: crate::fit::SolverMethod,
    /// Coefficient table in design-column order, intercept first.
    pub coefficients: Vec<Coefficient>,
    /// Design columns left out as linearly dependent.
    pub aliased: Vec<String>,
    /// R².
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub r_squared: f64,
    /// Adjusted R².
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub adj_r_squared: f64,
    /// Residual standard error.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub residual_std_error: f64,
    /// Overall F.
    pub f_statistic: Option<f64>,
    /// p-value of the overall F.
    pub f_p_value: Option<f64>,
    /// Regression sum of squares.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub ss_regression: f64,
    /// Residual sum of squares.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub ss_residual: f64,
    /// Total sum of squares.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub ss_total: f64,
    /// Gaussian log-likelihood.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub log_likelihood: f64,
    /// AIC.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub aic: f64,
    /// BIC.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub bic: f64,
    /// Condition number of the column-equilibrated design.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    #[cfg_attr(feature = "json-schema", schemars(with = "Option<f64>"))]
    pub condition_number: f64,
    /// Provenance of the data.
    pub data: crate::data::Provenance,
}
