//! Accuracy against outside certified values: fit every NIST StRD linear
//! least-squares dataset and score the results against NIST's certified
//! values (what `plumbline accuracy` prints and the accuracy tests check).
//!
//! The score is the log relative error of McCullough (1998), "Assessing the
//! reliability of statistical software: Part I", *The American Statistician*
//! 52(4), 358–366: `LRE = −log10(|q − c| / |c|)`, or `−log10|q|` when the
//! certified value `c` is zero; capped at the digits NIST prints (at most 15)
//! and floored at 0. Per dataset we report the minimum over each group.
//!
//! The reference folder holds `certified.json` (NIST's certified values,
//! transcribed with the digits NIST prints) and one CSV per dataset.

use crate::data::{load_csv, CsvOptions};
use crate::error::{Error, Result};
use crate::fit::{fit_with, AssembledFit, Fit, FitOptions, Precision};
use crate::inference::{Coefficient, FitStatistics};
use crate::model::{ModelSpec, Term};
use serde::Serialize;
use serde_json::Value;
use std::path::Path;

fn reference_error(reason: String) -> Error {
    Error::ReferenceData(reason)
}

/// Minimum LREs for one dataset.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DatasetScore {
    /// NIST dataset name.
    pub dataset: String,
    /// NIST's difficulty rating.
    pub difficulty: String,
    /// Minimum LRE over the coefficient estimates.
    pub coefficients: f64,
    /// Minimum LRE over the coefficient standard deviations.
    pub std_errors: f64,
    /// LRE of the residual standard deviation.
    pub residual_sd: f64,
    /// LRE of R².
    pub r_squared: f64,
    /// LRE of the residual sum of squares.
    pub ss_residual: f64,
    /// LRE of the regression sum of squares.
    pub ss_regression: f64,
    /// LRE of F, when NIST certifies a finite F.
    pub f_statistic: Option<f64>,
}

impl DatasetScore {
    /// The smallest of the four headline scores (coefficients, SEs, residual SD, R²).
    pub fn headline_minimum(&self) -> f64 {
        self.coefficients.min(self.std_errors).min(self.residual_sd).min(self.r_squared)
    }
}

/// McCullough's log relative error, capped at `cap` and floored at 0.
pub fn log_relative_error(estimate: f64, certified: f64, cap: f64) -> f64 {
    if !estimate.is_finite() {
        return 0.0;
    }
    if estimate == certified {
        return cap;
    }
    let error = if certified == 0.0 { estimate.abs() } else { ((estimate - certified) / certified).abs() };
    (-error.log10()).clamp(0.0, cap)
}

fn certified_number(v: &Value) -> Option<(f64, f64)> {
    let text = v.get("text")?.as_str()?;
    let value: f64 = text.trim().parse().ok()?;
    let cap = v.get("lre_cap")?.as_f64()?;
    Some((value, cap))
}

fn score(estimate: f64, v: &Value, what: &str, dataset: &str) -> Result<f64> {
    let (certified, cap) = certified_number(v)
        .ok_or_else(|| reference_error(format!("{dataset}: certified value for {what} is malformed")))?;
    Ok(log_relative_error(estimate, certified, cap))
}

/// Fits and scores every dataset listed in `certified.json` under `dir`.
pub fn score_all(dir: &Path, precision: Precision) -> Result<Vec<DatasetScore>> {
    score_all_with(dir, |csv, spec| {
        let frame = load_csv(csv, &CsvOptions::default())?;
        let options = FitOptions { precision, ..FitOptions::default() };
        ScoredFit::of_fit(&fit_with(&frame, spec, &options)?)
    })
}

/// What a fit of one dataset gives the scorer.
#[derive(Debug, Clone)]
pub struct ScoredFit {
    /// The coefficient table (any confidence level: only estimates and
    /// standard errors are scored).
    pub coefficients: Vec<Coefficient>,
    /// Whole-fit statistics.
    pub statistics: FitStatistics,
    /// Names of aliased columns (reported when the count differs).
    pub aliased: Vec<String>,
}

impl ScoredFit {
    /// What the scorer reads of a fit with every row in memory.
    pub fn of_fit(fit: &Fit) -> Result<Self> {
        Ok(Self {
            coefficients: fit.coefficients(0.95)?,
            statistics: fit.statistics(),
            aliased: fit.aliased_names().into_iter().map(String::from).collect(),
        })
    }

    /// What the scorer reads of a fit assembled from pieces (batches,
    /// partitions, executors).
    pub fn of_assembled(fit: &AssembledFit) -> Result<Self> {
        Ok(Self {
            coefficients: fit.coefficients(0.95)?,
            statistics: fit.statistics(),
            aliased: fit.aliased_names().into_iter().map(String::from).collect(),
        })
    }
}

/// Scores every dataset in `dir` as fitted by `fit`, which is given each
/// dataset's CSV file and model: the same scoring for any route to a fit (in
/// memory, in batches, inside a query engine).
pub fn score_all_with(
    dir: &Path,
    mut fit: impl FnMut(&Path, &ModelSpec) -> Result<ScoredFit>,
) -> Result<Vec<DatasetScore>> {
    let certified_path = dir.join("certified.json");
    let text = std::fs::read_to_string(&certified_path).map_err(|e| {
        reference_error(format!(
            "cannot read the NIST StRD reference `{}` ({e}); pass --reference with the folder holding certified.json",
            certified_path.display()
        ))
    })?;
    let root: Value = serde_json::from_str(&text)
        .map_err(|e| reference_error(format!("`{}` is not valid JSON: {e}", certified_path.display())))?;
    let entries = root.as_object().ok_or_else(|| reference_error("certified.json must hold an object".into()))?;
    let mut scores = Vec::new();
    for (name, entry) in entries {
        scores.push(score_dataset(dir, name, entry, &mut fit)?);
    }
    Ok(scores)
}

fn score_dataset(
    dir: &Path,
    name: &str,
    entry: &Value,
    fit: &mut impl FnMut(&Path, &ModelSpec) -> Result<ScoredFit>,
) -> Result<DatasetScore> {
    let malformed = |what: &str| reference_error(format!("{name}: certified.json lacks {what}"));
    let csv = entry.get("csv").and_then(Value::as_str).ok_or_else(|| malformed("csv"))?;
    let model = entry.get("model").ok_or_else(|| malformed("model"))?;
    let intercept = model.get("intercept").and_then(Value::as_bool).ok_or_else(|| malformed("model.intercept"))?;
    let columns: Vec<&str> = model
        .get("design_matrix_columns")
        .and_then(Value::as_array)
        .ok_or_else(|| malformed("model.design_matrix_columns"))?
        .iter()
        .filter_map(Value::as_str)
        .collect();
    let degree = model.get("polynomial_degree").and_then(Value::as_u64);

    let mut spec = ModelSpec::new("y");
    if !intercept {
        spec = spec.without_intercept();
    }
    match degree {
        Some(d) if d > 1 => spec = spec.term(Term::numeric("x").polynomial(d as u32)),
        _ => {
            for column in columns.iter().filter(|c| **c != "1") {
                spec = spec.numeric(*column);
            }
        }
    }
    let ScoredFit { coefficients, statistics: stats, aliased } = fit(&dir.join(csv), &spec)?;
    let certified = entry.get("certified").ok_or_else(|| malformed("certified"))?;
    let parameters =
        certified.get("parameters").and_then(Value::as_array).ok_or_else(|| malformed("certified.parameters"))?;
    if parameters.len() != coefficients.len() {
        return Err(reference_error(format!(
            "{name}: {} certified parameters but {} estimated (aliased: {:?})",
            parameters.len(),
            coefficients.len(),
            aliased
        )));
    }
    let mut coef_min = f64::INFINITY;
    let mut se_min = f64::INFINITY;
    for (p, c) in parameters.iter().zip(&coefficients) {
        coef_min = coef_min.min(score(c.estimate, &p["estimate"], "an estimate", name)?);
        se_min = se_min.min(score(c.std_error, &p["std_dev"], "a standard deviation", name)?);
    }
    let anova = &certified["anova"];
    let f_statistic = match anova.get("f_statistic") {
        Some(f) if f.get("infinite").and_then(Value::as_bool) == Some(true) => None,
        Some(f) => Some(score(stats.f_statistic.unwrap_or(f64::NAN), f, "F", name)?),
        None => None,
    };
    Ok(DatasetScore {
        dataset: name.to_string(),
        difficulty: entry.get("difficulty").and_then(Value::as_str).unwrap_or("?").to_string(),
        coefficients: coef_min,
        std_errors: se_min,
        residual_sd: score(
            stats.residual_std_error,
            &certified["residual_standard_deviation"],
            "the residual SD",
            name,
        )?,
        r_squared: score(stats.r_squared, &certified["r_squared"], "R²", name)?,
        ss_residual: score(stats.ss_residual, &anova["residual"]["sum_of_squares"], "the residual SS", name)?,
        ss_regression: score(stats.ss_regression, &anova["regression"]["sum_of_squares"], "the regression SS", name)?,
        f_statistic,
    })
}
