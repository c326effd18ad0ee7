//! What moved between two runs of a study.
//!
//! A run leaves machine-readable results behind: fit documents
//! ([`FIT_JSON_MIME`], schema `plumbline.fit`) and ratio-study documents
//! ([`RATIO_JSON_MIME`]). [`RunResults`] gathers them — from a notebook's
//! outputs, a `plumbline fit --format json` file, or fits made in the current
//! session — and [`drift`] pairs the two runs' results by position and
//! reports:
//!
//! * the data provenance of each fit (file, sha256, rows) and whether the
//!   bytes changed;
//! * every coefficient whose new estimate lies outside the old run's
//!   confidence interval, and the terms that appeared or disappeared;
//! * n, R², adjusted R², residual standard error and AIC, old → new;
//! * each ratio-study statistic old → new beside its range, and the ones that
//!   crossed the range (inside → outside or back), overall and per group.
//!
//! The ranges are those recorded in the ratio-study documents themselves (see
//! [`crate::value::standards`]; recalled from memory, verify before use).

use crate::error::{Error, Result};
use crate::fit::Fit;
use crate::schema::{FIT_JSON_MIME, RATIO_JSON_MIME};
use crate::value::RatioStudy;
use serde::Serialize;
use serde_json::Value;

/// The machine-readable results one run produced, in the order it produced them.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct RunResults {
    /// Where the results came from (a file path, or a label of your choosing).
    pub source: String,
    /// Fit documents (schema `plumbline.fit`).
    pub fits: Vec<Value>,
    /// Ratio-study documents.
    pub ratio_studies: Vec<Value>,
}

impl RunResults {
    /// An empty set of results labelled `source`.
    pub fn new(source: impl Into<String>) -> Self {
        Self { source: source.into(), ..Self::default() }
    }

    /// Files `document` under fits or ratio studies by its MIME type; other
    /// types are ignored. A document given as a JSON string is parsed first.
    /// Returns whether the document was kept.
    pub fn add_document(&mut self, mime: &str, document: &Value) -> bool {
        let parsed = match document {
            Value::String(text) => serde_json::from_str(text).unwrap_or(Value::Null),
            other => other.clone(),
        };
        if mime == FIT_JSON_MIME && parsed.get("schema").and_then(Value::as_str) == Some("plumbline.fit") {
            self.fits.push(parsed);
            true
        } else if mime == RATIO_JSON_MIME && parsed.get("overall").is_some() {
            self.ratio_studies.push(parsed);
            true
        } else {
            false
        }
    }

    /// Adds a fit from this session, summarised at confidence `level`.
    pub fn with_fit(mut self, fit: &Fit, level: f64) -> Result<Self> {
        let summary = fit.summary(level)?;
        let document = serde_json::to_value(&summary).map_err(|e| Error::Serialization(format!("fit summary: {e}")))?;
        self.fits.push(document);
        Ok(self)
    }

    /// Adds a ratio study from this session.
    pub fn with_ratio_study(mut self, study: &RatioStudy) -> Result<Self> {
        let document = serde_json::to_value(study).map_err(|e| Error::Serialization(format!("ratio study: {e}")))?;
        self.ratio_studies.push(document);
        Ok(self)
    }

    /// True when the run holds no result [`drift`] can compare.
    pub fn is_empty(&self) -> bool {
        self.fits.is_empty() && self.ratio_studies.is_empty()
    }
}

/// One coefficient across the two runs: `(estimate, interval low, interval high)`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CoefficientDrift {
    /// Design column name.
    pub term: String,
    /// Old estimate and interval (`None`: a new term).
    pub old: Option<(f64, f64, f64)>,
    /// New estimate and interval (`None`: a dropped term).
    pub new: Option<(f64, f64, f64)>,
    /// The new estimate lies outside the old interval.
    pub moved: bool,
}

/// One scalar statistic across the runs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StatisticDrift {
    /// Statistic name as in the fit document.
    pub statistic: String,
    /// Old value.
    pub old: Option<f64>,
    /// New value.
    pub new: Option<f64>,
}

/// The data a fit read: `(path, sha256, rows)`.
pub type DataStamp = (String, String, u64);

/// The drift between one pair of fits.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitDrift {
    /// Target of the fit.
    pub target: String,
    /// Data of the old fit.
    pub data_old: DataStamp,
    /// Data of the new fit.
    pub data_new: DataStamp,
    /// The data bytes changed (different sha256).
    pub data_changed: bool,
    /// Coefficients in old order, then the new terms.
    pub coefficients: Vec<CoefficientDrift>,
    /// Whole-fit statistics.
    pub statistics: Vec<StatisticDrift>,
}

/// One ratio-study statistic across the runs, beside its range.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ThresholdDrift {
    /// `overall` or the group's label.
    pub scope: String,
    /// Statistic (`median ratio`, `COD`, `PRD`, `PRB`).
    pub statistic: String,
    /// Old value.
    pub old: Option<f64>,
    /// New value.
    pub new: Option<f64>,
    /// The range both runs were judged against (the new run's, if they differ).
    pub range: Option<(f64, f64)>,
    /// Inside the range in the old run.
    pub old_inside: Option<bool>,
    /// Inside the range in the new run.
    pub new_inside: Option<bool>,
    /// The statistic moved across the range's edge (either way).
    pub crossed: bool,
}

/// The drift between one pair of ratio studies.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RatioDrift {
    /// Sales used, old → new.
    pub count_old: Option<u64>,
    /// Sales used in the new run.
    pub count_new: Option<u64>,
    /// Overall statistics, every one; group statistics only when they crossed.
    pub statistics: Vec<ThresholdDrift>,
    /// Where the ranges come from.
    pub standard: String,
}

/// The drift report between two runs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DriftReport {
    /// Always `plumbline.drift`.
    pub schema: String,
    /// The old run's source.
    pub old: String,
    /// The new run's source.
    pub new: String,
    /// One entry per paired fit.
    pub fits: Vec<FitDrift>,
    /// Fits present in only one run.
    pub unpaired_fits: usize,
    /// One entry per paired ratio study.
    pub ratio_studies: Vec<RatioDrift>,
    /// Ratio studies present in only one run.
    pub unpaired_ratio_studies: usize,
}

impl DriftReport {
    /// Coefficients (over every fit) whose new estimate left the old interval.
    pub fn moved_coefficients(&self) -> impl Iterator<Item = &CoefficientDrift> {
        self.fits.iter().flat_map(|f| f.coefficients.iter().filter(|c| c.moved))
    }

    /// Ratio-study statistics (over every study) that crossed their range.
    pub fn crossed_thresholds(&self) -> impl Iterator<Item = &ThresholdDrift> {
        self.ratio_studies.iter().flat_map(|r| r.statistics.iter().filter(|s| s.crossed))
    }
}

/// Compares two runs; results are paired by position.
pub fn drift(old: &RunResults, new: &RunResults) -> DriftReport {
    DriftReport {
        schema: "plumbline.drift".into(),
        old: old.source.clone(),
        new: new.source.clone(),
        fits: old.fits.iter().zip(&new.fits).map(|(a, b)| compare_fits(a, b)).collect(),
        unpaired_fits: old.fits.len().abs_diff(new.fits.len()),
        ratio_studies: old.ratio_studies.iter().zip(&new.ratio_studies).map(|(a, b)| compare_ratio_studies(a, b)).collect(),
        unpaired_ratio_studies: old.ratio_studies.len().abs_diff(new.ratio_studies.len()),
    }
}

fn coefficient_table(doc: &Value) -> Vec<(String, (f64, f64, f64))> {
    doc.get("coefficients")
        .and_then(Value::as_array)
        .into_iter()
        .flatten()
        .filter_map(|c| {
            Some((
                c.get("term")?.as_str()?.to_string(),
                (c.get("estimate")?.as_f64()?, c.get("ci_low")?.as_f64()?, c.get("ci_high")?.as_f64()?),
            ))
        })
        .collect()
}

fn data_stamp(doc: &Value) -> DataStamp {
    let d = &doc["data"];
    (
        d["path"].as_str().unwrap_or("").to_string(),
        d["sha256"].as_str().unwrap_or("").to_string(),
        d["rows"].as_u64().unwrap_or(0),
    )
}

/// Compares two fit documents.
pub fn compare_fits(old: &Value, new: &Value) -> FitDrift {
    let (old_table, new_table) = (coefficient_table(old), coefficient_table(new));
    let mut coefficients = Vec::new();
    for (term, o) in &old_table {
        let n = new_table.iter().find(|(t, _)| t == term).map(|(_, v)| *v);
        let moved = n.is_some_and(|n| n.0 < o.1 || n.0 > o.2);
        coefficients.push(CoefficientDrift { term: term.clone(), old: Some(*o), new: n, moved });
    }
    for (term, n) in &new_table {
        if !old_table.iter().any(|(t, _)| t == term) {
            coefficients.push(CoefficientDrift { term: term.clone(), old: None, new: Some(*n), moved: false });
        }
    }
    let statistics = ["n_obs", "r_squared", "adj_r_squared", "residual_std_error", "aic"]
        .iter()
        .map(|s| StatisticDrift { statistic: s.to_string(), old: old[*s].as_f64(), new: new[*s].as_f64() })
        .collect();
    let (data_old, data_new) = (data_stamp(old), data_stamp(new));
    FitDrift {
        target: new["target"].as_str().unwrap_or("").to_string(),
        data_changed: data_old.1 != data_new.1,
        data_old,
        data_new,
        coefficients,
        statistics,
    }
}

/// `(statistic, value, range, inside)` of a ratio-statistics object's judgements.
fn judgements(statistics: &Value) -> Vec<(String, f64, Option<(f64, f64)>, Option<bool>)> {
    statistics
        .get("judgements")
        .and_then(Value::as_array)
        .into_iter()
        .flatten()
        .filter_map(|j| {
            let range = j.get("range").and_then(Value::as_array).and_then(|r| Some((r.first()?.as_f64()?, r.get(1)?.as_f64()?)));
            Some((j.get("statistic")?.as_str()?.to_string(), j.get("value")?.as_f64()?, range, j.get("inside").and_then(Value::as_bool)))
        })
        .collect()
}

fn threshold_drifts(scope: &str, old: &Value, new: &Value) -> Vec<ThresholdDrift> {
    let (old_j, new_j) = (judgements(old), judgements(new));
    let mut names: Vec<&String> = old_j.iter().map(|j| &j.0).collect();
    for j in &new_j {
        if !names.contains(&&j.0) {
            names.push(&j.0);
        }
    }
    names
        .into_iter()
        .map(|name| {
            let o = old_j.iter().find(|j| &j.0 == name);
            let n = new_j.iter().find(|j| &j.0 == name);
            let (old_inside, new_inside) = (o.and_then(|j| j.3), n.and_then(|j| j.3));
            ThresholdDrift {
                scope: scope.to_string(),
                statistic: name.clone(),
                old: o.map(|j| j.1),
                new: n.map(|j| j.1),
                range: n.and_then(|j| j.2).or_else(|| o.and_then(|j| j.2)),
                old_inside,
                new_inside,
                crossed: matches!((old_inside, new_inside), (Some(a), Some(b)) if a != b),
            }
        })
        .collect()
}

/// Compares two ratio-study documents.
pub fn compare_ratio_studies(old: &Value, new: &Value) -> RatioDrift {
    let mut statistics = threshold_drifts("overall", &old["overall"], &new["overall"]);
    let groups = |doc: &Value| -> Vec<(String, Value)> {
        doc.get("groups")
            .and_then(Value::as_array)
            .into_iter()
            .flatten()
            .filter_map(|g| Some((g.get("group")?.as_str()?.to_string(), g.get("statistics")?.clone())))
            .collect()
    };
    let old_groups = groups(old);
    for (label, new_stats) in groups(new) {
        if let Some((_, old_stats)) = old_groups.iter().find(|(l, _)| *l == label) {
            statistics.extend(threshold_drifts(&label, old_stats, &new_stats).into_iter().filter(|t| t.crossed));
        }
    }
    RatioDrift {
        count_old: old["overall"]["count"].as_u64(),
        count_new: new["overall"]["count"].as_u64(),
        statistics,
        standard: new["standard"].as_str().or(old["standard"].as_str()).unwrap_or("").to_string(),
    }
}
