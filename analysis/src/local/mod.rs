//! Coefficients that vary over the map: geographically weighted regression.
//!
//! A hedonic model prices a square foot alike across a town; where the
//! market does not, a *local* fit at each sale, weighting nearby sales more
//! (A. S. Fotheringham, C. Brunsdon and M. Charlton, *Geographically Weighted
//! Regression: the analysis of spatially varying relationships*, Wiley,
//! 2002, ch. 2), shows how each coefficient moves over the map. Here:
//!
//! * [`fit_local`] fits the specification at every sale with an adaptive
//!   bisquare or fixed Gaussian [`Kernel`] ([`kernel`]), at a given
//!   [`Bandwidth`] or the one that minimises AICc ([`search`]);
//! * the result ([`LocalFit`]) holds each sale's local coefficients, their
//!   standard errors and local R², the effective number of parameters
//!   `tr(S)`, the residual degrees of freedom `n − 2 tr(S) + tr(SᵀS)`, `σ̂`,
//!   AICc, the residual sum of squares, and the global model beside it (its
//!   AICc by the same formula, and Moran's I of both models' residuals);
//! * [`LocalFit::predict`] values new places with the local model at each,
//!   with intervals; [`LocalFit::variation_test`] asks, by shuffling the
//!   places, whether each coefficient really varies over space.
//!
//! The arithmetic is in `engine.rs`; memory is `O(n·k)` (no `n × n` matrix is
//! ever formed). Case weights are not supported and are refused.

mod engine;
mod holdout;
pub mod kernel;
pub mod search;

pub use kernel::{Bandwidth, Kernel};

use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::{fit, Fit};
use crate::model::{build_design, ModelSpec, TargetTransform};
use crate::predict::{outside_range, Prediction, Predictions};
use crate::spatial::{
    group_labels, moran_test, Coordinates, MoranAssumption, MoranTest, Neighbourhood, PlaceIndex, PlaceLabel,
    SpatialWeights, WeightStyle,
};
use crate::stats::quantile_of_sorted;
use engine::{aicc, at_every_sale, require_all, totals, LocalData, PointResult};
pub use holdout::{HoldoutComparison, HoldoutScore};
use serde::{Deserialize, Serialize};

/// Neighbours of each sale in the Moran's I of the residuals: 8, the spatial
/// check's default (common practice for parcel data).
const RESIDUAL_NEIGHBOURS: usize = 8;

/// How the bandwidth is set.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum BandwidthChoice {
    /// This bandwidth (of the kernel's kind).
    Given(Bandwidth),
    /// The bandwidth of least AICc ([`search`]).
    LeastAicc,
}

/// Where the sales lie and how a local fit weighs them.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct LocalOptions {
    /// Column of the first coordinate (or the longitude).
    pub x_column: String,
    /// Column of the second coordinate (or the latitude).
    pub y_column: String,
    /// Planar or geographic places.
    pub coordinates: Coordinates,
    /// The kernel.
    pub kernel: Kernel,
    /// The bandwidth, given or searched.
    pub bandwidth: BandwidthChoice,
    /// Location column (e.g. district) whose names the maps write at the
    /// middle of each group's sales ([`LocalSummary::labels`]); it does not
    /// enter the fit.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub label_column: Option<String>,
}

impl LocalOptions {
    /// Places in `x_column`, `y_column` (planar), adaptive bisquare kernel,
    /// bandwidth by least AICc.
    pub fn new(x_column: impl Into<String>, y_column: impl Into<String>) -> Self {
        Self {
            x_column: x_column.into(),
            y_column: y_column.into(),
            coordinates: Coordinates::Planar,
            kernel: Kernel::AdaptiveBisquare,
            bandwidth: BandwidthChoice::LeastAicc,
            label_column: None,
        }
    }

    /// Maps of the fit write each group of `column` (e.g. a district) at
    /// the middle of its sales.
    pub fn labelled_by(mut self, column: impl Into<String>) -> Self {
        self.label_column = Some(column.into());
        self
    }

    /// The columns are longitude and latitude in degrees (WGS 84).
    pub fn geographic(mut self) -> Self {
        self.coordinates = Coordinates::Geographic;
        self
    }

    /// Adaptive bisquare over the `count` nearest sales.
    pub fn nearest(mut self, count: usize) -> Self {
        self.kernel = Kernel::AdaptiveBisquare;
        self.bandwidth = BandwidthChoice::Given(Bandwidth::Neighbours(count));
        self
    }

    /// Fixed Gaussian of bandwidth `distance`.
    pub fn gaussian(mut self, distance: f64) -> Self {
        self.kernel = Kernel::FixedGaussian;
        self.bandwidth = BandwidthChoice::Given(Bandwidth::Distance(distance));
        self
    }

    /// The fixed Gaussian kernel with its bandwidth searched.
    pub fn gaussian_searched(mut self) -> Self {
        self.kernel = Kernel::FixedGaussian;
        self.bandwidth = BandwidthChoice::LeastAicc;
        self
    }
}

/// One sale's local model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct LocalRow {
    /// 1-based data row of the frame.
    pub row: usize,
    /// The sale's place.
    pub place: (f64, f64),
    /// Local coefficients, in the order of [`LocalSummary::terms`].
    pub coefficients: Vec<f64>,
    /// Their standard errors.
    pub std_errors: Vec<f64>,
    /// Local R².
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub local_r_squared: f64,
    /// The local model's value of the sale, model scale.
    pub fitted: f64,
    /// `y − ŷ`.
    pub residual: f64,
}

/// How one coefficient spreads over the sales.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct CoefficientSpread {
    /// The term.
    pub term: String,
    /// The global model's estimate.
    pub global: f64,
    /// Minimum, lower quartile, median, upper quartile and maximum of the local estimates.
    pub quantiles: [f64; 5],
    /// Share of sales whose local estimate is more than two standard errors from zero.
    pub share_distinct_from_zero: f64,
}

/// The global model beside the local one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct GlobalComparison {
    /// AICc of the global model by the same formula (`tr S = k`).
    pub aicc: f64,
    /// Its residual sum of squares.
    pub rss: f64,
    /// Moran's I of its residuals (8 nearest sales, randomisation moments).
    pub moran: MoranTest,
}

/// The machine-readable local fit (document `plumbline.local-fit`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct LocalSummary {
    /// The model in words.
    pub model: String,
    /// Places, kernel and how the bandwidth was set.
    pub options: LocalOptions,
    /// The bandwidth used.
    pub bandwidth: Bandwidth,
    /// Every bandwidth the search tried with its AICc, in the order tried
    /// (empty for a given bandwidth).
    pub search: Vec<(Bandwidth, f64)>,
    /// Sales used.
    pub n: usize,
    /// Design columns.
    pub terms: Vec<String>,
    /// `Σ (y − ŷ)²`.
    pub rss: f64,
    /// Effective number of parameters `tr(S)`.
    pub effective_parameters: f64,
    /// `tr(SᵀS)`.
    pub trace_sts: f64,
    /// Residual degrees of freedom `n − 2 tr(S) + tr(SᵀS)`.
    pub residual_df: f64,
    /// `σ̂ = √(RSS / residual_df)`, the scale of the standard errors.
    pub sigma: f64,
    /// AICc (Fotheringham et al. 2002, eq. 2.33).
    pub aicc: f64,
    /// Moran's I of the local model's residuals (8 nearest sales, randomisation moments).
    pub moran: MoranTest,
    /// The global model.
    pub global: GlobalComparison,
    /// Each coefficient's spread over the sales.
    pub spread: Vec<CoefficientSpread>,
    /// The Monte Carlo test of each coefficient's variation over space, when asked for.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub variation: Vec<VariationTest>,
    /// Each group of [`LocalOptions::label_column`] at the middle of its
    /// sales, where maps write its name (empty without a label column).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub labels: Vec<PlaceLabel>,
    /// Both models scored on held-out sales, when asked for
    /// ([`LocalFit::with_holdout`]; added in version 2 of the document).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub holdout: Option<HoldoutComparison>,
    /// Every sale's local model, in row order (empty in a notebook's bundle,
    /// which would otherwise carry megabytes; the command line writes them).
    pub rows: Vec<LocalRow>,
    /// Provenance of the data.
    pub data: crate::data::Provenance,
}

/// A local fit: the summary, and what valuing new places needs.
#[derive(Debug, Clone)]
pub struct LocalFit {
    summary: LocalSummary,
    spec: ModelSpec,
    global: Fit,
    design_rows: Vec<Vec<f64>>,
    target: Vec<f64>,
    places: PlaceIndex,
}

/// Fits `spec` at every sale of `frame`, weighting sales by distance as
/// `options` say (see the module docs).
pub fn fit_local(frame: &Frame, spec: &ModelSpec, options: &LocalOptions) -> Result<LocalFit> {
    if spec.weight_column().is_some() {
        return Err(Error::Specification(
            "a local fit weights sales by distance and does not combine that with case weights; fit without \
             `weights`"
                .into(),
        ));
    }
    let extra = [options.x_column.as_str(), options.y_column.as_str()];
    let design = build_design(frame, spec, &extra)?;
    let global = fit(frame, spec)?;
    if !global.aliased_names().is_empty() {
        return Err(Error::Specification(format!(
            "the global model has aliased columns ({}); a local fit needs every column estimable — leave them out",
            global.aliased_names().join(", ")
        )));
    }
    let n = design.n_rows();
    let k = design.columns().len();
    let rows: Vec<Vec<f64>> = (0..n).map(|i| design.columns().iter().map(|c| c.hi[i]).collect()).collect();
    let target = design.target().to_vec();
    let (xs, ys) = frame.places_at(
        (&options.x_column, &options.y_column),
        design.rows_used(),
        options.coordinates,
        "the local fit (every sale needs its place)",
        "`--coordinates geographic` (in code, `LocalOptions::geographic()`)",
    )?;
    let labels = match &options.label_column {
        Some(column) => {
            let groups = frame.label_column(column)?;
            let used: Vec<Option<String>> = design.rows_used().iter().map(|&r| groups[r].clone()).collect();
            group_labels(&used, &xs, &ys)
        }
        None => Vec::new(),
    };
    let places = PlaceIndex::new(options.coordinates, &xs, &ys)?;
    let data = LocalData { rows: &rows, target: &target, places: &places };
    let (bandwidth, trace) = match options.bandwidth {
        BandwidthChoice::Given(bandwidth) => {
            search::check_bandwidth(options.kernel, bandwidth, n, k)?;
            (bandwidth, Vec::new())
        }
        BandwidthChoice::LeastAicc => search::least_aicc(&data, options.kernel, k)?,
    };
    let points =
        require_all(at_every_sale(&data, options.kernel, bandwidth, true), bandwidth, |i| design.rows_used()[i])?;
    let sums = totals(&data, &points);
    let residual_df = n as f64 - 2.0 * sums.trace_s + sums.trace_sts;
    let sigma = (sums.rss / residual_df).sqrt();
    let terms: Vec<String> = design.columns().iter().map(|c| c.name.clone()).collect();
    let local_rows: Vec<LocalRow> = points
        .iter()
        .enumerate()
        .map(|(i, p)| LocalRow {
            row: design.rows_used()[i] + 1,
            place: places.place(i),
            coefficients: p.coefficients.clone(),
            std_errors: p.unscaled_variances.iter().map(|v| sigma * v.sqrt()).collect(),
            local_r_squared: p.local_r_squared,
            fitted: p.fitted,
            residual: target[i] - p.fitted,
        })
        .collect();
    let neighbours = SpatialWeights::build_in(
        options.coordinates,
        &xs,
        &ys,
        Neighbourhood::Nearest { k: RESIDUAL_NEIGHBOURS.min(n.saturating_sub(1)).max(1) },
        WeightStyle::RowStandardised,
    )?;
    let local_residuals: Vec<f64> = local_rows.iter().map(|r| r.residual).collect();
    let global_stats = global.statistics();
    let summary = LocalSummary {
        model: spec.describe(),
        options: options.clone(),
        bandwidth,
        search: trace,
        n,
        spread: spread(&terms, &points, &local_rows, global.solution().coefficients()),
        terms,
        rss: sums.rss,
        effective_parameters: sums.trace_s,
        trace_sts: sums.trace_sts,
        residual_df,
        sigma,
        aicc: aicc(n, sums.rss, sums.trace_s),
        moran: moran_test(&local_residuals, &neighbours, MoranAssumption::Randomisation)?,
        global: GlobalComparison {
            aicc: aicc(n, global_stats.ss_residual, k as f64),
            rss: global_stats.ss_residual,
            moran: moran_test(global.solution().residuals(), &neighbours, MoranAssumption::Randomisation)?,
        },
        variation: Vec::new(),
        labels,
        holdout: None,
        rows: local_rows,
        data: frame.provenance().clone(),
    };
    Ok(LocalFit { summary, spec: spec.clone(), global, design_rows: rows, target, places })
}

/// Each coefficient's quantiles over the sales.
fn spread(terms: &[String], points: &[PointResult], rows: &[LocalRow], global: &[f64]) -> Vec<CoefficientSpread> {
    terms
        .iter()
        .enumerate()
        .map(|(p, term)| {
            let mut values: Vec<f64> = points.iter().map(|pt| pt.coefficients[p]).collect();
            values.sort_by(f64::total_cmp);
            let q = |f: f64| quantile_of_sorted(&values, f);
            let distinct = rows.iter().filter(|r| r.coefficients[p].abs() > 2.0 * r.std_errors[p]).count();
            CoefficientSpread {
                term: term.clone(),
                global: global[p],
                quantiles: [q(0.0), q(0.25), q(0.5), q(0.75), q(1.0)],
                share_distinct_from_zero: distinct as f64 / rows.len().max(1) as f64,
            }
        })
        .collect()
}

impl LocalFit {
    /// The machine-readable fit.
    pub fn summary(&self) -> &LocalSummary {
        &self.summary
    }

    /// Runs [`LocalFit::variation_test`] and keeps its result in the summary.
    pub fn with_variation_test(mut self, permutations: usize, seed: u64) -> Result<Self> {
        self.summary.variation = self.variation_test(permutations, seed)?;
        Ok(self)
    }

    /// The global model fitted to the same sales.
    pub fn global(&self) -> &Fit {
        &self.global
    }

    /// The specification fitted.
    pub fn spec(&self) -> &ModelSpec {
        &self.spec
    }

    /// Predicts every row of `frame` that has its terms and place, each by
    /// the local regression at its own place (the fit's kernel and
    /// bandwidth), with intervals at `level`: `se = σ̂ √(x₀ᵀ C C ᵀ x₀)` for
    /// the local mean, `σ̂ √(1 + x₀ᵀ C Cᵀ x₀)` for one sale (Fotheringham et
    /// al. 2002, §2.8), `t` on the fit's residual degrees of freedom; for a
    /// logged target the median `exp(ŷ)` and Duan's smearing mean over the
    /// local residuals. A place whose local design is singular is an error.
    pub fn predict(&self, frame: &Frame, level: f64) -> Result<Predictions> {
        crate::stats::check_level(level)?;
        let recipe = self.global.design().recipe();
        let applied = recipe.apply(frame)?;
        let options = &self.summary.options;
        let (xs, ys) = (frame.numeric_column(&options.x_column)?, frame.numeric_column(&options.y_column)?);
        let data = LocalData { rows: &self.design_rows, target: &self.target, places: &self.places };
        let crit = crate::stats::t_critical(level, self.summary.residual_df);
        let sigma = self.summary.sigma;
        let smearing = (self.spec.target_transform() == TargetTransform::Log)
            .then(|| self.summary.rows.iter().map(|r| r.residual.exp()).sum::<f64>() / self.summary.rows.len() as f64);
        let mut rows = Vec::with_capacity(applied.rows.len());
        let mut skipped = Vec::new();
        for (position, &row) in applied.rows.iter().enumerate() {
            let (Some(x), Some(y)) = (xs[row], ys[row]) else {
                skipped.push(row + 1);
                continue;
            };
            if options.coordinates == Coordinates::Geographic {
                crate::spatial::geodesy::check_lon_lat(x, y, &|| format!("the place on data row {}", row + 1))?;
            }
            let design_row: Vec<f64> = applied.columns.iter().map(|c| c.hi[position]).collect();
            let (estimate, unscaled) =
                engine::estimate_at(&data, x, y, &design_row, options.kernel, self.summary.bandwidth)
                    .ok_or_else(|| engine::singular_at(row, self.summary.bandwidth))?;
            rows.push(Prediction::with_intervals(
                row,
                estimate,
                sigma * unscaled.max(0.0).sqrt(),
                sigma * sigma,
                crit,
                smearing,
                outside_range(recipe, &applied, position),
            ));
        }
        let used: std::collections::BTreeSet<usize> = applied.rows.iter().copied().collect();
        skipped.extend((0..frame.height()).filter(|r| !used.contains(r)).map(|r| r + 1));
        skipped.sort_unstable();
        Ok(Predictions { level, rows, skipped_rows: skipped })
    }

    /// The Monte Carlo test of whether each coefficient varies over space
    /// (Fotheringham et al. 2002, §4.5; after Hope 1968): the variance of
    /// its local estimates over the sales, against the same variance with
    /// the sales' places shuffled among them `permutations` times (the same
    /// kernel and bandwidth; shuffles seeded by `seed`, so reruns agree).
    /// The p-value is `(1 + #{shuffled ≥ observed}) / (1 + permutations)`.
    /// Each shuffle costs a local fit.
    ///
    /// The intercept is tested as the local level of the average sale,
    /// `x̄ᵀβᵢ` (x̄ the sales' mean design row), not as its raw estimate: the
    /// raw intercept is a value at zero for every term, far outside the data,
    /// so its variance is mostly the slopes' noise times the terms' means and
    /// grows when places are shuffled, hiding a level that truly varies.
    pub fn variation_test(&self, permutations: usize, seed: u64) -> Result<Vec<VariationTest>> {
        if permutations == 0 {
            return Err(Error::OutOfRange {
                what: "the number of shuffles".into(),
                requirement: "at least 1 (99 or 999 usual)".into(),
                value: "0".into(),
            });
        }
        let k = self.summary.terms.len();
        let statistic = self.variation_statistic();
        let observed = variances(&self.summary.rows.iter().map(|r| statistic(&r.coefficients)).collect::<Vec<_>>(), k);
        let mut at_least = vec![0usize; k];
        let n = self.target.len();
        let options = &self.summary.options;
        for shuffle in 0..permutations {
            let order = shuffled(n, seed, shuffle as u64);
            let (xs, ys): (Vec<f64>, Vec<f64>) = order.iter().map(|&i| self.places.place(i)).unzip();
            let places = PlaceIndex::new(options.coordinates, &xs, &ys)?;
            let data = LocalData { rows: &self.design_rows, target: &self.target, places: &places };
            let points = require_all(
                at_every_sale(&data, options.kernel, self.summary.bandwidth, false),
                self.summary.bandwidth,
                |i| self.summary.rows[i].row - 1,
            )?;
            let shuffled_variances =
                variances(&points.iter().map(|p| statistic(&p.coefficients)).collect::<Vec<_>>(), k);
            for p in 0..k {
                if shuffled_variances[p] >= observed[p] {
                    at_least[p] += 1;
                }
            }
        }
        Ok(self
            .summary
            .terms
            .iter()
            .enumerate()
            .map(|(p, term)| VariationTest {
                term: term.clone(),
                variance: observed[p],
                p_value: (1 + at_least[p]) as f64 / (1 + permutations) as f64,
                permutations,
            })
            .collect())
    }
}

impl LocalFit {
    /// What the variation test measures of one sale's local coefficients:
    /// each slope as estimated, and in the intercept's place the local level
    /// of the average sale, `x̄ᵀβᵢ` (see [`LocalFit::variation_test`]).
    fn variation_statistic(&self) -> impl Fn(&[f64]) -> Vec<f64> + '_ {
        let k = self.summary.terms.len();
        let n = self.design_rows.len().max(1) as f64;
        let mean_row: Vec<f64> = (0..k).map(|p| self.design_rows.iter().map(|r| r[p]).sum::<f64>() / n).collect();
        let intercept = self.summary.terms.iter().position(|t| t == crate::model::design::INTERCEPT_NAME);
        move |coefficients: &[f64]| {
            let mut measured = coefficients.to_vec();
            if let Some(i) = intercept {
                measured[i] = mean_row.iter().zip(coefficients).map(|(x, b)| x * b).sum();
            }
            measured
        }
    }
}

/// Whether one coefficient varies over space (see [`LocalFit::variation_test`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct VariationTest {
    /// The term.
    pub term: String,
    /// Variance of its local estimates over the sales (for the intercept, of
    /// the local level of the average sale, `x̄ᵀβᵢ`).
    pub variance: f64,
    /// Monte Carlo p-value against shuffled places.
    pub p_value: f64,
    /// Shuffles made.
    pub permutations: usize,
}

/// The variance (over rows, divisor n) of each of `k` coefficients.
fn variances(rows: &[Vec<f64>], k: usize) -> Vec<f64> {
    let n = rows.len().max(1) as f64;
    (0..k)
        .map(|p| {
            let mean = rows.iter().map(|r| r[p]).sum::<f64>() / n;
            rows.iter().map(|r| (r[p] - mean).powi(2)).sum::<f64>() / n
        })
        .collect()
}

/// A permutation of `0..n`, the `shuffle`-th for `seed`: indices ordered by
/// the SHA-256 of (seed, shuffle, index) — deterministic on every machine.
fn shuffled(n: usize, seed: u64, shuffle: u64) -> Vec<usize> {
    use sha2::{Digest, Sha256};
    let mut keyed: Vec<([u8; 32], usize)> = (0..n)
        .map(|i| {
            let mut hasher = Sha256::new();
            hasher.update(seed.to_le_bytes());
            hasher.update(shuffle.to_le_bytes());
            hasher.update((i as u64).to_le_bytes());
            (hasher.finalize().into(), i)
        })
        .collect();
    keyed.sort_unstable();
    keyed.into_iter().map(|(_, i)| i).collect()
}
