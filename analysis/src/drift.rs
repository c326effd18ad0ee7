//! What moved between two runs of a study.
//!
//! A run leaves machine-readable documents behind: fit documents
//! ([`FitDocument`]) and ratio-study documents ([`RatioStudyDocument`]).
//! [`RunResults`] gathers them — from a notebook's outputs, a
//! `plumbline fit --format json` file, or fits made in the current session —
//! reading each through its type (so a renamed or missing field is an error,
//! never an empty value), and [`drift`] pairs the two runs' results by
//! position and reports:
//!
//! * the data provenance of each fit (file, sha256, rows) and whether the
//!   bytes changed;
//! * every coefficient whose new estimate lies outside the old run's
//!   confidence interval, and the terms that appeared or disappeared;
//! * n, R², adjusted R², residual standard error and AIC, old → new;
//! * each ratio-study statistic old → new beside its range, and the ones that
//!   crossed the range (inside → outside or back), overall and per group;
//! * when both runs carry a value roll ([`ValueRoll`], every parcel's value),
//!   the sales-chasing check of [`crate::value::sales_chasing_check`]: sold
//!   against unsold parcels' value changes;
//! * for models by group ([`StratifiedSummary`], one model per market area),
//!   each group's fit drift as above, the groups that gained or lost their
//!   model, and the equality tests' p-values old → new.
//!
//! The ranges are those recorded in the ratio-study documents themselves (see
//! [`crate::value::standards`]; recalled from memory, verify before use).

use crate::documents::{read_document, read_fit, read_ratio_study, FitDocument, RatioStudyDocument};
use crate::error::{Error, Result};
use crate::fit::Fit;
use crate::inference::FitSummary;
use crate::schema::{FIT_JSON_MIME, RATIO_JSON_MIME, STRATIFIED_FIT_JSON_MIME, VALUE_ROLL_JSON_MIME};
use crate::strata::StratifiedSummary;
use crate::value::{sales_chasing_check, RatioOptions, RatioStatistics, RatioStudy, SalesChasingCheck, ValueRoll};
use serde::{Deserialize, Serialize};
use serde_json::Value;

/// `schema` of the drift report.
pub const DRIFT_SCHEMA: &str = "plumbline.drift";
/// Version of [`DriftReport`]. 1 is the first versioned form; 2 adds
/// `sales_chasing` and `sales_chasing_not_run`; 3 adds `by_group` (models by
/// group) and `unpaired_by_group`.
pub const DRIFT_SCHEMA_VERSION: u32 = 3;

/// The machine-readable results one run produced, in the order it produced them.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct RunResults {
    /// Where the results came from (a file path, or a label of your choosing).
    pub source: String,
    /// Fit documents.
    pub fits: Vec<FitDocument>,
    /// Ratio-study documents.
    pub ratio_studies: Vec<RatioStudyDocument>,
    /// Value rolls (every parcel's value).
    pub value_rolls: Vec<ValueRoll>,
    /// Sets of models by group (one model per market area).
    pub stratified_fits: Vec<StratifiedSummary>,
}

impl RunResults {
    /// An empty set of results labelled `source`.
    pub fn new(source: impl Into<String>) -> Self {
        Self { source: source.into(), ..Self::default() }
    }

    /// Files `document` under fits or ratio studies by its MIME type and
    /// returns whether it was kept; documents of other types are passed over.
    /// A document given as a JSON string (as notebooks may hold them) is
    /// parsed first. A fit or ratio-study document that cannot be read as its
    /// type — malformed, a field missing, a newer schema version — is an
    /// error naming this run's source.
    pub fn add_document(&mut self, mime: &str, document: &Value) -> Result<bool> {
        if ![FIT_JSON_MIME, RATIO_JSON_MIME, VALUE_ROLL_JSON_MIME, STRATIFIED_FIT_JSON_MIME].contains(&mime) {
            return Ok(false);
        }
        let parsed = match document {
            Value::String(text) => serde_json::from_str(text).map_err(|e| Error::Document {
                what: format!("a `{mime}` output in {}", self.source),
                reason: format!("not JSON: {e}"),
            })?,
            other => other.clone(),
        };
        if mime == FIT_JSON_MIME {
            self.fits.push(read_fit(parsed, &self.source)?);
        } else if mime == VALUE_ROLL_JSON_MIME {
            self.value_rolls.push(read_document::<ValueRoll>(parsed, &self.source)?.body);
        } else if mime == STRATIFIED_FIT_JSON_MIME {
            self.stratified_fits.push(read_document::<StratifiedSummary>(parsed, &self.source)?.body);
        } else {
            self.ratio_studies.push(read_ratio_study(parsed, &self.source)?);
        }
        Ok(true)
    }

    /// Adds a fit from this session, summarised at confidence `level`.
    pub fn with_fit(mut self, fit: &Fit, level: f64) -> Result<Self> {
        self.fits.push(FitDocument::from(fit.summary(level)?));
        Ok(self)
    }

    /// Adds a ratio study from this session.
    pub fn with_ratio_study(mut self, study: &RatioStudy) -> Result<Self> {
        self.ratio_studies.push(RatioStudyDocument::from(study.clone()));
        Ok(self)
    }

    /// True when the run holds no result [`drift`] can compare.
    pub fn is_empty(&self) -> bool {
        self.fits.is_empty()
            && self.ratio_studies.is_empty()
            && self.value_rolls.is_empty()
            && self.stratified_fits.is_empty()
    }
}

/// One coefficient across the two runs: `(estimate, interval low, interval high)`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
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
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
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
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
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
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
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
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
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
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct DriftReport {
    /// Always [`DRIFT_SCHEMA`].
    pub schema: String,
    /// [`DRIFT_SCHEMA_VERSION`].
    pub schema_version: u32,
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
    /// Sold against unsold parcels' value changes, when both runs carry a
    /// value roll (the last of each is compared).
    #[serde(default)]
    pub sales_chasing: Option<SalesChasingCheck>,
    /// Why the sales-chasing check could not run although both runs carry a
    /// roll (e.g. no parcel sold between them).
    #[serde(default)]
    pub sales_chasing_not_run: Option<String>,
    /// One entry per paired set of models by group (version 3).
    #[serde(default)]
    pub by_group: Vec<StratifiedDrift>,
    /// Sets of models by group present in only one run (version 3).
    #[serde(default)]
    pub unpaired_by_group: usize,
}

/// What happened to one group between two runs of models by group.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "snake_case", tag = "change")]
pub enum GroupChange {
    /// Fitted in both runs; the fits are compared.
    Compared {
        /// The group's fit drift.
        drift: FitDrift,
    },
    /// The group has a model now but had none (or did not occur) before.
    ModelGained {
        /// Why it had none before (`None`: it did not occur).
        before: Option<String>,
    },
    /// The group had a model but has none now (or does not occur).
    ModelLost {
        /// Why it has none now (`None`: it does not occur).
        now: Option<String>,
    },
    /// Without a model in both runs.
    NeverFitted {
        /// Why it has none now.
        now: Option<String>,
    },
}

/// One group across two runs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct GroupDrift {
    /// The group's value in the grouping column.
    pub group: String,
    /// What happened to it.
    #[serde(flatten)]
    pub change: GroupChange,
}

/// The drift between two sets of models by group.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct StratifiedDrift {
    /// The grouping column (the new run's).
    pub grouped_by: String,
    /// The target as modelled.
    pub target: String,
    /// Every group of either run, in label order.
    pub groups: Vec<GroupDrift>,
    /// The pooled model's drift, when both runs have one.
    pub pooled: Option<FitDrift>,
    /// Each equality test's p-value, old → new (by hypothesis).
    pub tests: Vec<StatisticDrift>,
}

impl DriftReport {
    /// Coefficients (over every fit) whose new estimate left the old interval.
    pub fn moved_coefficients(&self) -> impl Iterator<Item = &CoefficientDrift> {
        self.fits.iter().flat_map(|f| f.coefficients.iter().filter(|c| c.moved))
    }

    /// Coefficients of the models by group whose new estimate left the old interval.
    pub fn moved_group_coefficients(&self) -> impl Iterator<Item = (&str, &CoefficientDrift)> {
        self.by_group.iter().flat_map(|set| {
            set.groups.iter().flat_map(|g| match &g.change {
                GroupChange::Compared { drift } => {
                    drift.coefficients.iter().filter(|c| c.moved).map(|c| (g.group.as_str(), c)).collect()
                }
                _ => Vec::new(),
            })
        })
    }

    /// Ratio-study statistics (over every study) that crossed their range.
    pub fn crossed_thresholds(&self) -> impl Iterator<Item = &ThresholdDrift> {
        self.ratio_studies.iter().flat_map(|r| r.statistics.iter().filter(|s| s.crossed))
    }
}

/// Compares two runs; results are paired by position.
pub fn drift(old: &RunResults, new: &RunResults) -> DriftReport {
    let chasing = match (old.value_rolls.last(), new.value_rolls.last()) {
        (Some(earlier), Some(later)) => Some(sales_chasing_check(earlier, later, &RatioOptions::default())),
        _ => None,
    };
    DriftReport {
        schema: DRIFT_SCHEMA.into(),
        schema_version: DRIFT_SCHEMA_VERSION,
        old: old.source.clone(),
        new: new.source.clone(),
        fits: old.fits.iter().zip(&new.fits).map(|(a, b)| compare_fits(a, b)).collect(),
        unpaired_fits: old.fits.len().abs_diff(new.fits.len()),
        ratio_studies: old
            .ratio_studies
            .iter()
            .zip(&new.ratio_studies)
            .map(|(a, b)| compare_ratio_studies(a, b))
            .collect(),
        unpaired_ratio_studies: old.ratio_studies.len().abs_diff(new.ratio_studies.len()),
        sales_chasing: chasing.as_ref().and_then(|c| c.as_ref().ok()).cloned(),
        sales_chasing_not_run: chasing.and_then(|c| c.err()).map(|e| e.to_string()),
        by_group: old.stratified_fits.iter().zip(&new.stratified_fits).map(|(a, b)| compare_by_group(a, b)).collect(),
        unpaired_by_group: old.stratified_fits.len().abs_diff(new.stratified_fits.len()),
    }
}

/// Compares two sets of models by group, group by group (paired by label).
pub fn compare_by_group(old: &StratifiedSummary, new: &StratifiedSummary) -> StratifiedDrift {
    let mut labels: Vec<&str> = old.strata.iter().chain(&new.strata).map(|s| s.group.as_str()).collect();
    labels.sort_unstable();
    labels.dedup();
    let groups = labels
        .into_iter()
        .map(|label| {
            let before = old.strata.iter().find(|s| s.group == label);
            let after = new.strata.iter().find(|s| s.group == label);
            let change = match (before.and_then(|s| s.fit.as_ref()), after.and_then(|s| s.fit.as_ref())) {
                (Some(a), Some(b)) => GroupChange::Compared {
                    drift: compare_fits(&FitDocument::from(a.clone()), &FitDocument::from(b.clone())),
                },
                (None, Some(_)) => GroupChange::ModelGained { before: before.and_then(|s| s.not_fitted.clone()) },
                (Some(_), None) => GroupChange::ModelLost { now: after.and_then(|s| s.not_fitted.clone()) },
                (None, None) => GroupChange::NeverFitted { now: after.and_then(|s| s.not_fitted.clone()) },
            };
            GroupDrift { group: label.to_string(), change }
        })
        .collect();
    let pooled = match (&old.pooled, &new.pooled) {
        (Some(a), Some(b)) => Some(compare_fits(&FitDocument::from(a.clone()), &FitDocument::from(b.clone()))),
        _ => None,
    };
    let mut tests: Vec<StatisticDrift> = Vec::new();
    for test in old.tests.iter().chain(&new.tests) {
        let name = test.hypothesis.words().to_string();
        if tests.iter().any(|t| t.statistic == name) {
            continue;
        }
        let p = |set: &StratifiedSummary| {
            set.tests.iter().find(|t| t.hypothesis == test.hypothesis).and_then(|t| t.p_value)
        };
        tests.push(StatisticDrift { statistic: name, old: p(old), new: p(new) });
    }
    StratifiedDrift { grouped_by: new.grouped_by.clone(), target: new.target.clone(), groups, pooled, tests }
}

/// A coefficient's `(estimate, interval low, interval high)` by term.
fn coefficient_table(summary: &FitSummary) -> Vec<(&str, (f64, f64, f64))> {
    summary.coefficients.iter().map(|c| (c.term.as_str(), (c.estimate, c.ci_low, c.ci_high))).collect()
}

fn data_stamp(summary: &FitSummary) -> DataStamp {
    (summary.data.path.clone(), summary.data.sha256.clone(), summary.data.rows as u64)
}

/// The whole-fit statistics drift reports, by their document names.
fn fit_statistics(summary: &FitSummary) -> [(&'static str, f64); 5] {
    [
        ("n_obs", summary.n_obs as f64),
        ("r_squared", summary.r_squared),
        ("adj_r_squared", summary.adj_r_squared),
        ("residual_std_error", summary.residual_std_error),
        ("aic", summary.aic),
    ]
}

/// Compares two fit documents.
pub fn compare_fits(old: &FitDocument, new: &FitDocument) -> FitDrift {
    let (old, new) = (&old.summary, &new.summary);
    let (old_table, new_table) = (coefficient_table(old), coefficient_table(new));
    let mut coefficients = Vec::new();
    for (term, o) in &old_table {
        let n = new_table.iter().find(|(t, _)| t == term).map(|(_, v)| *v);
        let moved = n.is_some_and(|n| n.0 < o.1 || n.0 > o.2);
        coefficients.push(CoefficientDrift { term: term.to_string(), old: Some(*o), new: n, moved });
    }
    for (term, n) in &new_table {
        if !old_table.iter().any(|(t, _)| t == term) {
            coefficients.push(CoefficientDrift { term: term.to_string(), old: None, new: Some(*n), moved: false });
        }
    }
    let statistics = fit_statistics(old)
        .into_iter()
        .zip(fit_statistics(new))
        .map(|((name, o), (_, n))| StatisticDrift {
            statistic: name.to_string(),
            old: Some(o).filter(|v| v.is_finite()),
            new: Some(n).filter(|v| v.is_finite()),
        })
        .collect();
    let (data_old, data_new) = (data_stamp(old), data_stamp(new));
    FitDrift {
        target: new.target.clone(),
        data_changed: data_old.1 != data_new.1,
        data_old,
        data_new,
        coefficients,
        statistics,
    }
}

fn threshold_drifts(scope: &str, old: Option<&RatioStatistics>, new: Option<&RatioStatistics>) -> Vec<ThresholdDrift> {
    let (old_j, new_j) = (old.map_or(&[][..], |s| &s.judgements), new.map_or(&[][..], |s| &s.judgements));
    let mut names: Vec<&String> = old_j.iter().map(|j| &j.statistic).collect();
    for j in new_j {
        if !names.contains(&&j.statistic) {
            names.push(&j.statistic);
        }
    }
    names
        .into_iter()
        .map(|name| {
            let o = old_j.iter().find(|j| &j.statistic == name);
            let n = new_j.iter().find(|j| &j.statistic == name);
            let (old_inside, new_inside) = (o.and_then(|j| j.inside), n.and_then(|j| j.inside));
            ThresholdDrift {
                scope: scope.to_string(),
                statistic: name.clone(),
                old: o.map(|j| j.value),
                new: n.map(|j| j.value),
                range: n.and_then(|j| j.range).or_else(|| o.and_then(|j| j.range)),
                old_inside,
                new_inside,
                crossed: matches!((old_inside, new_inside), (Some(a), Some(b)) if a != b),
            }
        })
        .collect()
}

/// Compares two ratio-study documents.
pub fn compare_ratio_studies(old: &RatioStudyDocument, new: &RatioStudyDocument) -> RatioDrift {
    let (old, new) = (&old.study, &new.study);
    let mut statistics = threshold_drifts("overall", Some(&old.overall), Some(&new.overall));
    for group in &new.groups {
        if let Some(old_group) = old.groups.iter().find(|g| g.group == group.group) {
            statistics.extend(
                threshold_drifts(&group.group, old_group.statistics.as_ref(), group.statistics.as_ref())
                    .into_iter()
                    .filter(|t| t.crossed),
            );
        }
    }
    RatioDrift {
        count_old: Some(old.overall.count as u64),
        count_new: Some(new.overall.count as u64),
        statistics,
        standard: if new.standard.is_empty() { old.standard.clone() } else { new.standard.clone() },
    }
}
