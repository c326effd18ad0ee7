//! Fitting a model: design → least-squares solution → covariance.
//!
//! [`fit`] and [`fit_with`] return a [`Fit`], which holds everything later
//! steps need: the design and how it was coded, the solution, the covariance
//! under the chosen estimator, and the data's provenance. Statistics for
//! reading a fit live in [`crate::inference`]; predictions in [`crate::predict`].
//! [`streamed`] assembles a fit from pieces — batches of data larger than
//! memory, or partitions factored apart and merged ([`fit_batches`]).

mod covariance;
pub mod derived;
pub mod solver;
pub mod streamed;

pub use covariance::CovarianceKind;
pub(crate) use covariance::{leverages, quadratic_form};
pub use solver::{default_rank_tolerance, Solution, SolverMethod};
pub use streamed::{fit_batches, AssembledFit};

use crate::data::{Frame, Provenance};
use crate::error::{Error, Result};
use crate::model::{build_design, Design, ModelSpec};
pub(crate) use covariance::WeightedRows;
use serde::{Deserialize, Serialize};

/// Which arithmetic the solver uses (see [`solver`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Precision {
    /// Double-double QR for small or ill-conditioned designs, refined
    /// double-precision QR otherwise.
    #[default]
    Auto,
    /// Always refined double-precision QR (fastest).
    Double,
    /// Always double-double QR (most accurate).
    Extended,
}

/// Options of a fit beyond the model itself.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct FitOptions {
    /// Covariance estimator for standard errors, tests and intervals.
    pub covariance: CovarianceKind,
    /// Solver arithmetic.
    pub precision: Precision,
    /// Numerical-rank tolerance; `None` uses [`default_rank_tolerance`].
    pub rank_tolerance: Option<f64>,
}

impl FitOptions {
    /// Options with the given covariance estimator.
    pub fn with_covariance(covariance: CovarianceKind) -> Self {
        Self { covariance, ..Self::default() }
    }
}

/// A fitted least-squares model.
#[derive(Debug, Clone)]
pub struct Fit {
    design: Design,
    solution: Solution,
    covariance: Vec<Vec<f64>>,
    covariance_kind: CovarianceKind,
    cluster_count: Option<usize>,
    provenance: Provenance,
    /// Derived results computed once and shared by clones (see [`derived`]).
    derived: std::sync::Arc<derived::Derived>,
}

/// Fits `spec` to `frame` by ordinary (or, with weights, weighted) least
/// squares with classical standard errors.
pub fn fit(frame: &Frame, spec: &ModelSpec) -> Result<Fit> {
    fit_with(frame, spec, &FitOptions::default())
}

/// Fits `spec` to `frame` with explicit options.
pub fn fit_with(frame: &Frame, spec: &ModelSpec, options: &FitOptions) -> Result<Fit> {
    let cluster_column = match &options.covariance {
        CovarianceKind::Cluster(c) => Some(c.as_str()),
        _ => None,
    };
    let extra: Vec<&str> = cluster_column.into_iter().collect();
    let design = build_design(frame, spec, &extra)?;
    let n = design.n_rows();

    if spec.has_intercept() {
        let first = design.target()[0];
        if design.target().iter().all(|&v| v == first) {
            return Err(Error::ConstantTarget { target: spec.target_label(), value: first });
        }
    }
    let p = design.columns().len();
    let tolerance = options.rank_tolerance.unwrap_or_else(|| default_rank_tolerance(n, p));
    if !(tolerance > 0.0 && tolerance < 1.0) {
        return Err(Error::OutOfRange {
            what: "the rank tolerance".into(),
            requirement: "in (0, 1)".into(),
            value: tolerance.to_string(),
        });
    }
    // More coefficients than rows can never be estimated, whatever the rank:
    // refused before solving, with the design's own count.
    if n <= p {
        return Err(Error::TooFewRows { rows: n, columns: p });
    }
    let solution = solver::solve(design.columns(), design.target(), design.weights(), options.precision, tolerance);
    if solution.kept().is_empty() {
        return Err(Error::SingularDesign { detail: "every design column is zero on the rows used".into() });
    }

    let (covariance, cluster_count) =
        estimate_covariance(&design, &solution, &options.covariance, frame, cluster_column)?;
    Ok(Fit {
        design,
        solution,
        covariance,
        covariance_kind: options.covariance.clone(),
        cluster_count,
        provenance: frame.provenance().clone(),
        derived: Default::default(),
    })
}

pub(crate) fn weighted_rows(design: &Design, solution: &Solution) -> WeightedRows {
    let n = design.n_rows();
    let root = |i: usize| design.weights().map_or(1.0, |w| w[i].sqrt());
    let rows = (0..n).map(|i| solution.kept().iter().map(|&j| design.columns()[j].hi[i] * root(i)).collect()).collect();
    let residuals = solution.residuals().iter().enumerate().map(|(i, r)| r * root(i)).collect();
    WeightedRows { rows, residuals }
}

fn estimate_covariance(
    design: &Design,
    solution: &Solution,
    kind: &CovarianceKind,
    frame: &Frame,
    cluster_column: Option<&str>,
) -> Result<(Vec<Vec<f64>>, Option<usize>)> {
    let c = solution.unscaled_covariance();
    let n = design.n_rows();
    let k = solution.kept().len();
    Ok(match kind {
        CovarianceKind::Classical => {
            let s2 = solution.weighted_rss() / (n - k) as f64;
            (c.iter().map(|row| row.iter().map(|v| v * s2).collect()).collect(), None)
        }
        CovarianceKind::Hc0 | CovarianceKind::Hc1 | CovarianceKind::Hc2 | CovarianceKind::Hc3 => {
            let index = match kind {
                CovarianceKind::Hc0 => 0,
                CovarianceKind::Hc1 => 1,
                CovarianceKind::Hc2 => 2,
                _ => 3,
            };
            (covariance::heteroskedasticity_consistent(index, &weighted_rows(design, solution), c), None)
        }
        CovarianceKind::Cluster(_) => {
            let column = cluster_column.unwrap_or_default();
            let labels = frame.label_column(column)?;
            let mut ids: std::collections::BTreeMap<String, usize> = std::collections::BTreeMap::new();
            let groups: Vec<usize> = design
                .rows_used()
                .iter()
                .map(|&r| {
                    let label = labels[r].clone().unwrap_or_default();
                    let next = ids.len();
                    *ids.entry(label).or_insert(next)
                })
                .collect();
            if ids.len() < 2 {
                return Err(Error::Specification(format!(
                    "cluster-robust errors need at least two clusters, but `{column}` has {} on the rows used",
                    ids.len()
                )));
            }
            let v = covariance::cluster_robust(&weighted_rows(design, solution), c, &groups, ids.len());
            (v, Some(ids.len()))
        }
    })
}

impl Fit {
    /// The design the model was fitted on.
    pub fn design(&self) -> &Design {
        &self.design
    }

    /// The least-squares solution (coefficients, residuals, rank).
    pub fn solution(&self) -> &Solution {
        &self.solution
    }

    /// The specification that was fitted.
    pub fn spec(&self) -> &ModelSpec {
        &self.design.recipe().spec
    }

    /// Provenance of the fitting data.
    pub fn provenance(&self) -> &Provenance {
        &self.provenance
    }

    /// The covariance estimator in use.
    pub fn covariance_kind(&self) -> &CovarianceKind {
        &self.covariance_kind
    }

    /// The standard errors in words for reports: the estimator's label, and for
    /// cluster-robust errors the number of groups (`clustered by district, 6 groups`).
    pub fn covariance_description(&self) -> String {
        match self.cluster_count {
            Some(groups) => format!("{}, {groups} groups", self.covariance_kind.label()),
            None => self.covariance_kind.label(),
        }
    }

    /// Covariance matrix of the estimated coefficients (kept columns, in
    /// design order) under the chosen estimator.
    pub fn covariance(&self) -> &[Vec<f64>] {
        &self.covariance
    }

    /// For cluster-robust standard errors, the number of clusters on the rows used.
    pub fn cluster_count(&self) -> Option<usize> {
        self.cluster_count
    }

    /// The results derived from this fit once and shared by its clones
    /// (influence, collinearity, assumption tests): the layers that compute
    /// them store them here ([`derived::Derived::get_or_compute`]).
    pub(crate) fn derived(&self) -> &derived::Derived {
        &self.derived
    }

    /// Names of the estimated design columns, in design order.
    pub fn estimated_names(&self) -> Vec<&str> {
        self.solution.kept().iter().map(|&j| self.design.columns()[j].name.as_str()).collect()
    }

    /// Names of design columns left out as linearly dependent on the others.
    pub fn aliased_names(&self) -> Vec<&str> {
        self.solution.aliased().iter().map(|&j| self.design.columns()[j].name.as_str()).collect()
    }

    /// The same model with another covariance estimator (no refit of the
    /// coefficients).
    pub fn with_covariance(&self, frame: &Frame, kind: CovarianceKind) -> Result<Fit> {
        let cluster_column = match &kind {
            CovarianceKind::Cluster(c) => {
                frame.require_column(c)?;
                Some(c.as_str())
            }
            _ => None,
        };
        let (covariance, cluster_count) =
            estimate_covariance(&self.design, &self.solution, &kind, frame, cluster_column)?;
        Ok(Fit { covariance, covariance_kind: kind, cluster_count, ..self.clone() })
    }

    /// Refuses a frame other than the one this fit read (compared by
    /// provenance: path, SHA-256 and record count), for every use that
    /// matches design rows to frame rows by position.
    pub fn require_fitting_frame(&self, frame: &Frame) -> Result<()> {
        let (fitted_from, given) = (&self.provenance, frame.provenance());
        if fitted_from.path != given.path || fitted_from.sha256 != given.sha256 || fitted_from.rows != given.rows {
            return Err(Error::FrameMismatch {
                fitted: format!("{}, {} records", fitted_from.path, fitted_from.rows),
                given: format!("{}, {} records", given.path, given.rows),
            });
        }
        Ok(())
    }

    /// Leverages (hat values) `hᵢ` of the rows used, in design row order.
    pub fn leverages(&self) -> Vec<f64> {
        covariance::leverages(&self.weighted_rows().rows, self.solution.unscaled_covariance())
    }

    /// The weighted rows and residuals of the kept columns (computed once).
    pub(crate) fn weighted_rows(&self) -> std::sync::Arc<WeightedRows> {
        self.derived.get_or_compute(|| weighted_rows(&self.design, &self.solution))
    }
}

/// Least squares of `y` on `columns` (unweighted), as used by auxiliary
/// regressions in diagnostics and comparisons. Rank-revealing, automatic precision.
pub(crate) fn auxiliary_regression(columns: &[crate::model::DesignColumn], y: &[f64]) -> Solution {
    let tolerance = default_rank_tolerance(y.len(), columns.len());
    solver::solve(columns, y, None, Precision::Auto, tolerance)
}
