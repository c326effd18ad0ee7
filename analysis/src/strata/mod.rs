//! One model per market area (or any other grouping column): the same
//! specification fitted within each group, the pooled model beside them, and
//! the test of whether the groups need models of their own.
//!
//! Mass appraisal is done by market area: each area whose market differs gets
//! its own model, or the areas are tested against one pooled model. Here
//!
//! * [`fit_by`] / [`fit_by_with`] fit `spec` to each group's rows of a frame
//!   in memory; [`fit_batches_by`] does the same on data read in row batches,
//!   with results equal to separate fits of each group's rows (to rounding).
//!   Each group learns its own coding (its categories' levels and reference),
//!   exactly as a separate fit of its rows would.
//! * A group that cannot be fitted (no more rows than coefficients, a category
//!   with one level among its sales, a constant target, …) is kept in the
//!   list with its reason ([`StratumOutcome::NotFitted`]), never dropped.
//! * The pooled model is the same specification fitted once to the rows of
//!   every fitted group; with an intercept, a second pooled model adds the
//!   group as a category (one level per group, common slopes). The F tests
//!   of [`equality`] compare each with the separate models.
//! * [`StratifiedFit::predict`] and [`StratifiedFit::value_roll`] value each
//!   row with its own group's model ([`valuing`]); a row whose group has no
//!   model is flagged, never valued by another group's model.
//!
//! [`StratifiedSummary`] is the machine-readable set (document
//! `plumbline.stratified-fit`, see [`crate::documents`]).

mod batches;
pub mod equality;
pub mod valuing;

pub use batches::fit_batches_by;
pub use equality::{CoefficientEquality, EqualityHypothesis};
pub use valuing::{StratifiedPrediction, StratifiedPredictions};

use crate::data::{Frame, Provenance};
use crate::error::{Error, Result};
use crate::fit::{fit_with, AssembledFit, Fit, FitOptions};
use crate::inference::{Coefficient, FitStatistics, FitSummary};
use crate::model::design::term_columns_read;
use crate::model::encode::TermEncoding;
use crate::model::{DesignRecipe, ModelSpec, Term};
use crate::predict::Predictions;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// A fitted model of one group, however it was fitted.
#[derive(Debug, Clone)]
pub enum StratumModel {
    /// Fitted with every row in memory ([`fit_by`]).
    InMemory(Box<Fit>),
    /// Assembled from row batches ([`fit_batches_by`]).
    Assembled(Box<AssembledFit>),
}

impl StratumModel {
    /// The machine-readable fit at confidence `level`.
    pub fn summary(&self, level: f64) -> Result<FitSummary> {
        match self {
            StratumModel::InMemory(fit) => fit.summary(level),
            StratumModel::Assembled(fit) => fit.summary(level),
        }
    }

    /// The coefficient table at confidence `level`.
    pub fn coefficients(&self, level: f64) -> Result<Vec<Coefficient>> {
        match self {
            StratumModel::InMemory(fit) => fit.coefficients(level),
            StratumModel::Assembled(fit) => fit.coefficients(level),
        }
    }

    /// Whole-fit statistics.
    pub fn statistics(&self) -> FitStatistics {
        match self {
            StratumModel::InMemory(fit) => fit.statistics(),
            StratumModel::Assembled(fit) => fit.statistics(),
        }
    }

    /// Predictions with intervals for every row of `frame` that has all term values.
    pub fn predict(&self, frame: &Frame, level: f64) -> Result<Predictions> {
        match self {
            StratumModel::InMemory(fit) => fit.predict(frame, level),
            StratumModel::Assembled(fit) => fit.predict(frame, level),
        }
    }

    /// The in-memory fit, when the model was fitted in memory (row-level
    /// uses such as diagnostics need it).
    pub fn in_memory(&self) -> Option<&Fit> {
        match self {
            StratumModel::InMemory(fit) => Some(fit),
            StratumModel::Assembled(_) => None,
        }
    }
}

/// What became of one group.
#[derive(Debug, Clone)]
pub enum StratumOutcome {
    /// The group's model.
    Fitted(StratumModel),
    /// Why the group has no model (in words a reader can act on).
    NotFitted {
        /// The reason.
        reason: String,
    },
}

/// One group of the grouping column and its model.
#[derive(Debug, Clone)]
pub struct Stratum {
    label: String,
    rows: usize,
    outcome: StratumOutcome,
}

impl Stratum {
    /// A group, its rows in the data (before rows missing a model value are
    /// dropped) and what became of it.
    pub fn new(label: String, rows: usize, outcome: StratumOutcome) -> Self {
        Self { label, rows, outcome }
    }

    /// The group's value in the grouping column.
    pub fn label(&self) -> &str {
        &self.label
    }

    /// Rows of the data in this group (before rows missing a model value are dropped).
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// The group's model, or why it has none.
    pub fn outcome(&self) -> &StratumOutcome {
        &self.outcome
    }

    /// The group's model, if it was fitted.
    pub fn model(&self) -> Option<&StratumModel> {
        match &self.outcome {
            StratumOutcome::Fitted(model) => Some(model),
            StratumOutcome::NotFitted { .. } => None,
        }
    }
}

/// The same specification fitted within each group of a column, with the
/// pooled models and the tests of equal coefficients (see the module docs).
#[derive(Debug, Clone)]
pub struct StratifiedFit {
    column: String,
    spec: ModelSpec,
    strata: Vec<Stratum>,
    rows_without_group: usize,
    pooled: Option<StratumModel>,
    pooled_with_levels: Option<StratumModel>,
    pooled_not_fitted: Option<String>,
    provenance: Provenance,
}

/// Fits `spec` within each group of `column` (classical standard errors).
pub fn fit_by(frame: &Frame, spec: &ModelSpec, column: &str) -> Result<StratifiedFit> {
    fit_by_with(frame, spec, column, &FitOptions::default())
}

/// Fits `spec` within each group of `column` with explicit options.
///
/// Errors that concern every group (an unknown column, the grouping column
/// used as a term) are returned; a group that cannot be fitted is listed
/// with its reason instead.
pub fn fit_by_with(frame: &Frame, spec: &ModelSpec, column: &str, options: &FitOptions) -> Result<StratifiedFit> {
    check_grouping_column(spec, column)?;
    let labels = frame.label_column(column)?;
    let mut groups: BTreeMap<String, Vec<usize>> = BTreeMap::new();
    let mut rows_without_group = 0;
    for (row, label) in labels.iter().enumerate() {
        match label {
            Some(label) => groups.entry(label.clone()).or_default().push(row),
            None => rows_without_group += 1,
        }
    }
    // Errors common to every group (a column missing, a bad term) show on
    // the whole data first, so that they are not repeated as every group's reason.
    crate::model::build_design(frame, spec, &[])?;
    let mut strata = Vec::with_capacity(groups.len());
    for (label, rows) in &groups {
        let subset = frame.subset(rows, &format!("{column} = {label}"))?;
        let outcome = match fit_with(&subset, spec, options).and_then(|fit| {
            check_levels(fit.design().recipe())?;
            Ok(fit)
        }) {
            Ok(fit) => StratumOutcome::Fitted(StratumModel::InMemory(Box::new(fit))),
            Err(error) => StratumOutcome::NotFitted { reason: error.to_string() },
        };
        strata.push(Stratum { label: label.clone(), rows: rows.len(), outcome });
    }
    let fitted_rows: Vec<usize> = strata
        .iter()
        .filter(|s| s.model().is_some())
        .flat_map(|s| groups[&s.label].iter().copied())
        .collect::<std::collections::BTreeSet<_>>()
        .into_iter()
        .collect();
    let (pooled, pooled_with_levels, pooled_not_fitted) = if fitted_rows.is_empty() {
        (None, None, Some("no group could be fitted".to_string()))
    } else {
        let pooled_frame = frame.subset(&fitted_rows, &format!("groups of {column} with a model"))?;
        let pooled = fit_with(&pooled_frame, spec, options);
        let with_levels = if spec.has_intercept() && strata.iter().filter(|s| s.model().is_some()).count() > 1 {
            Some(fit_with(&pooled_frame, &with_group_levels(spec, column), options))
        } else {
            None
        };
        match pooled {
            Ok(pooled) => (
                Some(StratumModel::InMemory(Box::new(pooled))),
                with_levels.and_then(Result::ok).map(|f| StratumModel::InMemory(Box::new(f))),
                None,
            ),
            Err(error) => (None, None, Some(error.to_string())),
        }
    };
    Ok(StratifiedFit {
        column: column.to_string(),
        spec: spec.clone(),
        strata,
        rows_without_group,
        pooled,
        pooled_with_levels,
        pooled_not_fitted,
        provenance: frame.provenance().clone(),
    })
}

/// The columns a fit of `spec` by `column` assembled from pieces reads, as
/// `(numbers, labels)`: the model's, with the grouping column among the
/// labels. Refuses first what such a fit cannot do: an estimator that
/// cannot be gathered in pieces, or a grouping column a term also reads.
/// (Both the batched fit by group and the query engine's start here.)
pub fn columns_read_by_group(
    spec: &ModelSpec,
    options: &FitOptions,
    column: &str,
) -> Result<(Vec<String>, Vec<String>)> {
    crate::fit::streamed::check_covariance_for_pieces(&options.covariance)?;
    check_grouping_column(spec, column)?;
    let (numbers, mut labels) = crate::model::design::columns_read(spec);
    labels.push(column.to_string());
    Ok((numbers, labels))
}

/// Refuses a grouping column that is also read by a term: within one group
/// it takes one value, so its term could not be estimated there.
pub fn check_grouping_column(spec: &ModelSpec, column: &str) -> Result<()> {
    let (numbers, labels) = term_columns_read(spec);
    if numbers.iter().chain(&labels).any(|c| c == column) {
        return Err(Error::Specification(format!(
            "`{column}` is both the grouping column and read by a term of the model; within one group it takes one \
             value, so that term cannot be estimated. Leave `{column}` out of the terms when fitting by it (the \
             pooled model with one level per group is fitted for you)"
        )));
    }
    if spec.target() == column || spec.weight_column() == Some(column) {
        return Err(Error::Specification(format!(
            "`{column}` is the model's target or weight column; group by a column that names the market area"
        )));
    }
    Ok(())
}

/// Refuses a group's coding in which a category has one level: its term
/// would silently vanish from that group's model.
pub fn check_levels(recipe: &DesignRecipe) -> Result<()> {
    fn check(encoding: &TermEncoding) -> Result<()> {
        match encoding {
            TermEncoding::Category { column, all_levels, .. } if all_levels.len() < 2 => {
                Err(Error::Specification(format!(
                    "`{column}` takes one value ({}) among this group's sales, so its term cannot be estimated here",
                    all_levels.first().map_or("none", String::as_str)
                )))
            }
            TermEncoding::Interaction(a, b) => check(a).and_then(|()| check(b)),
            _ => Ok(()),
        }
    }
    recipe.encodings.iter().try_for_each(check)
}

/// The stamp of one group's model: the data's stamp, its place marked with
/// the group, and the group's rows.
pub fn group_stamp(data: &Provenance, column: &str, label: &str, rows: usize) -> Provenance {
    let mut stamp = data.clone();
    stamp.path = format!("{} [{column} = {label}]", data.path);
    stamp.rows = rows;
    stamp
}

/// The stamp of the pooled models: the data's stamp, its place marked as the
/// groups with a model, and their rows.
pub fn pooled_stamp(data: &Provenance, column: &str, rows: usize) -> Provenance {
    let mut stamp = data.clone();
    stamp.path = format!("{} [groups of {column} with a model]", data.path);
    stamp.rows = rows;
    stamp
}

/// `spec` with the grouping column added as a category (one level per group).
pub fn with_group_levels(spec: &ModelSpec, column: &str) -> ModelSpec {
    spec.clone().term(Term::category(column))
}

impl StratifiedFit {
    /// Assembles a set from its parts (the batched fit here; fits assembled
    /// in a query engine, which compute each part the same way).
    pub fn from_parts(
        column: String,
        spec: ModelSpec,
        strata: Vec<Stratum>,
        rows_without_group: usize,
        pooled: std::result::Result<(StratumModel, Option<StratumModel>), String>,
        provenance: Provenance,
    ) -> Self {
        let (pooled, pooled_with_levels, pooled_not_fitted) = match pooled {
            Ok((pooled, with_levels)) => (Some(pooled), with_levels, None),
            Err(reason) => (None, None, Some(reason)),
        };
        Self { column, spec, strata, rows_without_group, pooled, pooled_with_levels, pooled_not_fitted, provenance }
    }

    /// The grouping column.
    pub fn column(&self) -> &str {
        &self.column
    }

    /// The specification fitted in every group.
    pub fn spec(&self) -> &ModelSpec {
        &self.spec
    }

    /// Every group, in the text order of its label (so `10` comes before `9`).
    pub fn strata(&self) -> &[Stratum] {
        &self.strata
    }

    /// The group labelled `label`.
    pub fn stratum(&self, label: &str) -> Option<&Stratum> {
        self.strata.iter().find(|s| s.label == label)
    }

    /// Rows whose grouping value is missing (in no group, so in no model).
    pub fn rows_without_group(&self) -> usize {
        self.rows_without_group
    }

    /// The pooled model: the same specification on the rows of every fitted group.
    pub fn pooled(&self) -> Option<&StratumModel> {
        self.pooled.as_ref()
    }

    /// The pooled model with one level per group (common slopes), when the
    /// model has an intercept and at least two groups were fitted.
    pub fn pooled_with_levels(&self) -> Option<&StratumModel> {
        self.pooled_with_levels.as_ref()
    }

    /// Provenance of the data.
    pub fn provenance(&self) -> &Provenance {
        &self.provenance
    }

    /// The F tests of equal coefficients across the fitted groups (see
    /// [`equality`]), or why they cannot be run.
    pub fn equality_tests(&self) -> std::result::Result<Vec<CoefficientEquality>, String> {
        let separate: Vec<FitStatistics> =
            self.strata.iter().filter_map(|s| s.model()).map(|m| m.statistics()).collect();
        if separate.len() < 2 {
            return Err(format!(
                "{} group(s) of `{}` could be fitted; the test needs at least two",
                separate.len(),
                self.column
            ));
        }
        let Some(pooled) = &self.pooled else {
            return Err(format!(
                "the pooled model could not be fitted: {}",
                self.pooled_not_fitted.as_deref().unwrap_or("unknown reason")
            ));
        };
        let mut tests = vec![equality::test(EqualityHypothesis::AllCoefficients, &pooled.statistics(), &separate)?];
        // With no slope to compare (an intercept-only model) there is no
        // second test; that is not a failure of the first.
        if let Some(with_levels) = &self.pooled_with_levels {
            if let Ok(test) =
                equality::test(EqualityHypothesis::SlopesGivenLevels, &with_levels.statistics(), &separate)
            {
                tests.push(test);
            }
        }
        Ok(tests)
    }

    /// The machine-readable set at confidence `level`.
    pub fn summary(&self, level: f64) -> Result<StratifiedSummary> {
        crate::stats::check_level(level)?;
        let strata = self
            .strata
            .iter()
            .map(|s| {
                Ok(StratumSummary {
                    group: s.label.clone(),
                    rows: s.rows,
                    fit: s.model().map(|m| m.summary(level)).transpose()?,
                    not_fitted: match &s.outcome {
                        StratumOutcome::NotFitted { reason } => Some(reason.clone()),
                        StratumOutcome::Fitted(_) => None,
                    },
                })
            })
            .collect::<Result<Vec<_>>>()?;
        let (tests, tests_not_run) = match self.equality_tests() {
            Ok(tests) => (tests, None),
            Err(reason) => (Vec::new(), Some(reason)),
        };
        Ok(StratifiedSummary {
            grouped_by: self.column.clone(),
            target: self.spec.target_label(),
            model: self.spec.describe(),
            level,
            strata,
            rows_without_group: self.rows_without_group,
            pooled: self.pooled.as_ref().map(|m| m.summary(level)).transpose()?,
            pooled_not_fitted: self.pooled_not_fitted.clone(),
            tests,
            tests_not_run,
            data: self.provenance.clone(),
        })
    }
}

/// One group in the machine-readable set.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct StratumSummary {
    /// The group's value in the grouping column.
    pub group: String,
    /// Rows of the data in the group (before rows missing a model value are dropped).
    pub rows: usize,
    /// The group's fit, when it was fitted.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fit: Option<FitSummary>,
    /// Why the group has no model, otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub not_fitted: Option<String>,
}

/// The machine-readable set of models by group (document
/// `plumbline.stratified-fit`; its version is defined with the other
/// documents' in [`crate::documents`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct StratifiedSummary {
    /// The grouping column.
    pub grouped_by: String,
    /// The target as modelled (`log(sale_price)`).
    pub target: String,
    /// The specification in words.
    pub model: String,
    /// Confidence level of every interval.
    pub level: f64,
    /// Every group, fitted or not, in label order.
    pub strata: Vec<StratumSummary>,
    /// Rows whose grouping value is missing.
    pub rows_without_group: usize,
    /// The pooled model on the rows of every fitted group.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pooled: Option<FitSummary>,
    /// Why there is no pooled model, otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pooled_not_fitted: Option<String>,
    /// The F tests of equal coefficients.
    #[serde(default)]
    pub tests: Vec<CoefficientEquality>,
    /// Why the tests were not run, if they were not.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tests_not_run: Option<String>,
    /// Provenance of the data.
    pub data: Provenance,
}

impl StratifiedSummary {
    /// The groups that have a model, with it.
    pub fn fitted(&self) -> impl Iterator<Item = (&str, &FitSummary)> {
        self.strata.iter().filter_map(|s| s.fit.as_ref().map(|f| (s.group.as_str(), f)))
    }

    /// Every coefficient name of any group's model or the pooled model, in
    /// first-seen order (pooled first, so common terms keep the model's order).
    pub fn terms(&self) -> Vec<String> {
        let mut terms: Vec<String> = Vec::new();
        let fits = self.pooled.iter().chain(self.strata.iter().filter_map(|s| s.fit.as_ref()));
        for fit in fits {
            for c in &fit.coefficients {
                if !terms.contains(&c.term) {
                    terms.push(c.term.clone());
                }
            }
        }
        terms
    }
}
