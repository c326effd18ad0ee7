//! Models by group from data read in row batches.
//!
//! Each group is a *lane*: a specification and the group labels whose rows it
//! takes. Every pass over the batches splits each batch by the grouping
//! column and feeds each lane its rows, so one pass serves every group. A lane
//! goes through the rounds of [`crate::fit::streamed`] — learn the coding,
//! factor, gather residual sums — with the in-memory precision rule (the
//! factor in double-double for a small design, and once more in
//! double-double when the design is too ill-conditioned for the factor in
//! double; so a lane may take four passes), and a lane that fails (too few
//! rows, a one-level category, a constant target) stops with its reason while
//! the others go on. The pooled models are two more lanes, run once the
//! fitted groups are known, on exactly their rows. Memory is bounded by a
//! batch and `G · p²`.

use super::{
    check_levels, columns_read_by_group, group_stamp, pooled_stamp, with_group_levels, StratifiedFit, Stratum,
    StratumModel, StratumOutcome,
};
use crate::data::{Frame, NonFinite, RowBatches};
use crate::error::{Error, Result};
use crate::fit::streamed::{finish, AssembledFit, FactorAggregate, FirstSolution, ResidualAggregate};
use crate::fit::{CovarianceKind, FitOptions};
use crate::model::design::RecipeLearner;
use crate::model::{DesignRecipe, ModelSpec};
use std::collections::{BTreeMap, BTreeSet};

/// Fits `spec` within each group of `column` of the data at `path` (a CSV or
/// Parquet file, or a directory of them) read `batch_rows` rows at a time.
/// The results equal [`super::fit_by_with`] on the same data loaded whole
/// (to rounding; `tests/analysis/strata.rs`). Only classical, HC0 and HC1
/// standard errors can be gathered in batches.
pub fn fit_batches_by(
    path: &std::path::Path,
    spec: &ModelSpec,
    options: &FitOptions,
    batch_rows: usize,
    non_finite: NonFinite,
    column: &str,
) -> Result<StratifiedFit> {
    let (numbers, labels) = columns_read_by_group(spec, options, column)?;
    let mut batches = RowBatches::open(path, &numbers, &labels, batch_rows)?;
    if non_finite == NonFinite::AsMissing {
        batches = batches.non_finite_as_missing();
    }

    // Which groups there are, and their sizes.
    let mut sizes: BTreeMap<String, usize> = BTreeMap::new();
    let (mut rows_read, mut rows_without_group, mut pieces) = (0usize, 0usize, 0usize);
    batches.for_each_batch(|frame| {
        rows_read += frame.height();
        pieces += 1;
        for label in group_labels(frame, column)? {
            match label {
                Some(label) => *sizes.entry(label).or_default() += 1,
                None => rows_without_group += 1,
            }
        }
        Ok(())
    })?;
    if sizes.is_empty() {
        return Err(Error::ColumnAllMissing { column: column.to_string() });
    }
    let provenance = batches.fingerprint(rows_read)?;

    let mut lanes: Vec<Lane> =
        sizes.keys().map(|label| Lane::new(spec, BTreeSet::from([label.clone()]), options)).collect();
    run_lanes(&batches, column, &mut lanes)?;
    let mut strata = Vec::with_capacity(lanes.len());
    for (lane, (label, rows)) in lanes.into_iter().zip(&sizes) {
        let outcome = match lane.into_fit(group_stamp(&provenance, column, label, *rows), pieces) {
            Ok(fit) => StratumOutcome::Fitted(StratumModel::Assembled(Box::new(fit))),
            Err(error) => StratumOutcome::NotFitted { reason: error.to_string() },
        };
        strata.push(Stratum { label: label.clone(), rows: *rows, outcome });
    }

    let fitted: BTreeSet<String> = strata.iter().filter(|s| s.model().is_some()).map(|s| s.label.clone()).collect();
    let pooled = if fitted.is_empty() {
        Err("no group could be fitted".to_string())
    } else {
        let mut pooled_lanes = vec![Lane::new(spec, fitted.clone(), options)];
        if spec.has_intercept() && fitted.len() > 1 {
            pooled_lanes.push(Lane::new(&with_group_levels(spec, column), fitted.clone(), options));
        }
        run_lanes(&batches, column, &mut pooled_lanes)?;
        let stamp = pooled_stamp(&provenance, column, fitted.iter().map(|g| sizes[g]).sum());
        let mut lanes = pooled_lanes.into_iter();
        let pooled = lanes.next().map(|lane| lane.into_fit(stamp.clone(), pieces));
        let with_levels = lanes.next().and_then(|lane| lane.into_fit(stamp, pieces).ok());
        match pooled {
            Some(Ok(fit)) => {
                Ok((StratumModel::Assembled(Box::new(fit)), with_levels.map(|f| StratumModel::Assembled(Box::new(f)))))
            }
            Some(Err(error)) => Err(error.to_string()),
            None => Err("no pooled model was asked for".to_string()),
        }
    };
    Ok(StratifiedFit::from_parts(column.to_string(), spec.clone(), strata, rows_without_group, pooled, provenance))
}

/// The grouping value of every row of a batch (`None`: missing). A batch in
/// which every value is missing is not an error here: other batches may hold
/// the groups.
fn group_labels(frame: &Frame, column: &str) -> Result<Vec<Option<String>>> {
    match frame.label_column(column) {
        Err(Error::ColumnAllMissing { .. }) => Ok(vec![None; frame.height()]),
        other => other,
    }
}

/// The rows of a batch, by group label.
fn rows_by_group(frame: &Frame, column: &str) -> Result<BTreeMap<String, Vec<usize>>> {
    let mut rows: BTreeMap<String, Vec<usize>> = BTreeMap::new();
    for (row, label) in group_labels(frame, column)?.into_iter().enumerate() {
        if let Some(label) = label {
            rows.entry(label).or_default().push(row);
        }
    }
    Ok(rows)
}

/// Where a lane's fit stands between passes.
enum LaneState {
    /// Pass one: learning the coding.
    Learning(Box<RecipeLearner>),
    /// Pass two: factoring.
    Factoring { recipe: Box<DesignRecipe>, learner: Box<RecipeLearner>, factor: Box<FactorAggregate> },
    /// Pass three: residual sums.
    Summing {
        recipe: Box<DesignRecipe>,
        learner: Box<RecipeLearner>,
        first: Box<FirstSolution>,
        second: Box<ResidualAggregate>,
    },
    /// Every pass done: the sums are complete.
    Summed {
        recipe: Box<DesignRecipe>,
        learner: Box<RecipeLearner>,
        first: Box<FirstSolution>,
        second: Box<ResidualAggregate>,
    },
    /// The lane stopped; the group cannot be fitted.
    Failed(Error),
}

/// One model fitted to the rows of some groups.
struct Lane {
    groups: BTreeSet<String>,
    covariance: CovarianceKind,
    tolerance: Option<f64>,
    state: LaneState,
}

impl Lane {
    fn new(spec: &ModelSpec, groups: BTreeSet<String>, options: &FitOptions) -> Self {
        let state = match RecipeLearner::new(spec) {
            Ok(learner) => LaneState::Learning(Box::new(learner)),
            Err(error) => LaneState::Failed(error),
        };
        Self { groups, covariance: options.covariance.clone(), tolerance: options.rank_tolerance, state }
    }

    /// This lane's rows of a batch, as a frame (`None`: it has none there).
    fn rows_of(&self, frame: &Frame, by_group: &BTreeMap<String, Vec<usize>>) -> Result<Option<Frame>> {
        let mut rows: Vec<usize> = self.groups.iter().filter_map(|g| by_group.get(g)).flatten().copied().collect();
        if rows.is_empty() {
            return Ok(None);
        }
        rows.sort_unstable();
        frame.subset(&rows, "lane").map(Some)
    }

    /// Takes in one batch's rows for the current pass. A failure stops this
    /// lane only.
    fn absorb(&mut self, frame: &Frame) {
        let outcome = match &mut self.state {
            LaneState::Learning(learner) => learner.absorb(frame),
            LaneState::Factoring { recipe, factor, .. } => recipe.fitting_design(frame).map(|d| factor.absorb(&d)),
            LaneState::Summing { recipe, first, second, .. } => {
                recipe.fitting_design(frame).map(|d| second.absorb(&d, first))
            }
            LaneState::Summed { .. } | LaneState::Failed(_) => Ok(()),
        };
        if let Err(error) = outcome {
            self.state = LaneState::Failed(error);
        }
    }

    /// Moves to the next pass after every batch was seen.
    fn advance(&mut self) {
        let state = std::mem::replace(&mut self.state, LaneState::Failed(Error::Specification(String::new())));
        self.state = match state {
            LaneState::Learning(learner) => match learner.finish() {
                Ok(recipe) => {
                    let factor = FactorAggregate::for_rows(recipe.column_names.len(), learner.rows_kept());
                    LaneState::Factoring { recipe: Box::new(recipe), learner, factor: Box::new(factor) }
                }
                Err(error) => LaneState::Failed(error),
            },
            LaneState::Factoring { recipe, learner, factor } => {
                match FirstSolution::from_aggregate(*factor, &recipe, self.tolerance) {
                    // Too ill-conditioned for the factor in double: once more
                    // in double-double (the in-memory rule).
                    Ok(first) if first.needs_extended() => {
                        let factor = FactorAggregate::new_extended(recipe.column_names.len());
                        LaneState::Factoring { recipe, learner, factor: Box::new(factor) }
                    }
                    Ok(first) => {
                        let second = ResidualAggregate::new(&first, self.covariance != CovarianceKind::Classical);
                        LaneState::Summing { recipe, learner, first: Box::new(first), second: Box::new(second) }
                    }
                    Err(error) => LaneState::Failed(error),
                }
            }
            LaneState::Summing { recipe, learner, first, second } => {
                LaneState::Summed { recipe, learner, first, second }
            }
            other => other,
        };
    }

    /// Whether the lane still reads the batches.
    fn is_reading(&self) -> bool {
        matches!(self.state, LaneState::Learning(_) | LaneState::Factoring { .. } | LaneState::Summing { .. })
    }

    /// The lane's fit after its last pass.
    fn into_fit(self, provenance: crate::data::Provenance, pieces: usize) -> Result<AssembledFit> {
        match self.state {
            // Levels are checked last, as the in-memory fit checks them
            // after solving, so both give the same reason for a group.
            LaneState::Summed { recipe, learner, first, second } => {
                let fit =
                    finish(*first, *second, *recipe, &self.covariance, learner.dropped().clone(), provenance, pieces)?;
                check_levels(&fit.recipe)?;
                Ok(fit)
            }
            LaneState::Failed(error) => Err(error),
            _ => Err(Error::Specification("the lane did not run all its passes".into())),
        }
    }
}

/// Runs the passes of every lane over the batches, until every lane has
/// its sums or has stopped (three passes, four when a lane's factor is made
/// again in double-double).
fn run_lanes(batches: &RowBatches, column: &str, lanes: &mut [Lane]) -> Result<()> {
    while lanes.iter().any(Lane::is_reading) {
        batches.for_each_batch(|frame| {
            let by_group = rows_by_group(frame, column)?;
            for lane in lanes.iter_mut().filter(|lane| lane.is_reading()) {
                if let Some(rows) = lane.rows_of(frame, &by_group)? {
                    lane.absorb(&rows);
                }
            }
            Ok(())
        })?;
        lanes.iter_mut().for_each(Lane::advance);
    }
    Ok(())
}
