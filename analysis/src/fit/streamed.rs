//! Fits assembled from pieces: row batches of data larger than memory, or
//! partitions factored apart (on other threads or machines) and merged.
//!
//! Everything a least-squares fit with classical, HC0 or HC1 standard errors
//! needs is a sum over rows, so it can be gathered piece by piece in two
//! rounds, each piece reduced to a few `p × p` numbers:
//!
//! 1. [`FactorAggregate`] — the tall-skinny QR factor of the weighted
//!    `[X | y]` ([`crate::numeric::tsqr`]), `Σ wᵢ` and `Σ wᵢ yᵢ`. Pieces merge
//!    by factoring their stacked factors. From the merged factor,
//!    [`FirstSolution`] takes the numerical rank (the same pivoted QR as an
//!    in-memory fit), the coefficients `b₀` and the weighted mean of `y`.
//! 2. [`ResidualAggregate`], given `b₀`: the gradient `g = Σ wᵢ xᵢ rᵢ`, the
//!    residual sum of squares `Σ wᵢ rᵢ²` (residuals in double-double), the
//!    total sum of squares about the mean, and for HC0/HC1 the middle matrix
//!    `Σ wᵢ² rᵢ² xᵢxᵢᵀ` (White 1980). Pieces merge by adding.
//!
//! [`finish`] then takes one step of refinement by the corrected seminormal
//! equations, `RᵀR d = g`, `b = b₀ + d` (Björck 1987; the same step as the
//! in-memory blocked solver), with `RSS(b) = RSS(b₀) − dᵀg`, which is exact
//! for the least-squares correction. The middle matrix uses the residuals at
//! `b₀`, which differ from those at `b` only in rounding.
//!
//! HC2, HC3, cluster-robust errors and the row-level diagnostics need every
//! row's leverage or group at once; a fit from pieces refuses them and says so.

use super::solver::{SmallFactor, SEMINORMAL_CONDITION_LIMIT};
use super::{default_rank_tolerance, CovarianceKind, FitOptions, SolverMethod};
use crate::data::{NonFinite, Provenance, RowBatches};
use crate::error::{Error, Result};
use crate::model::design::{columns_read, RecipeLearner};
use crate::model::{Design, DesignRecipe, DroppedRows, ModelSpec};
use crate::numeric::tsqr::{self, TallSkinnyQr};
use crate::numeric::{dd_qr, DoubleDouble};
use crate::state_bytes::{StateReader, StateWriter};
use faer::Mat;

/// Round one of a fit from pieces: the factor of the weighted `[X | y]` and
/// the weight and target sums (see the module docs).
#[derive(Debug, Clone, PartialEq)]
pub struct FactorAggregate {
    factor: Factor,
    rows: usize,
    total_weight: DoubleDouble,
    weighted_target: DoubleDouble,
    sum_log_weight: f64,
}

/// The triangular factor, in double or in double-double.
#[derive(Debug, Clone, PartialEq)]
enum Factor {
    /// Blocked Householder TSQR in double (faer), the fast path.
    Double(TallSkinnyQr),
    /// TSQR in double-double ([`dd_qr::triangular_factor`]) on the design's
    /// full values (both parts of powers and products): for designs whose
    /// condition number exceeds [`SEMINORMAL_CONDITION_LIMIT`], where one
    /// refinement step from a double factor cannot recover every digit.
    Extended {
        /// `R`, row-major, `min(rows, width) × width`.
        r: Vec<Vec<DoubleDouble>>,
        /// Columns of `[X | y]`.
        width: usize,
    },
}

impl Factor {
    fn width(&self) -> usize {
        match self {
            Factor::Double(f) => f.width(),
            Factor::Extended { width, .. } => *width,
        }
    }

    /// The factor of both row sets (the same kind on both sides).
    fn merge(self, other: &Factor) -> Factor {
        match (self, other) {
            (Factor::Double(a), Factor::Double(b)) => Factor::Double(a.merge(b)),
            (Factor::Extended { r, width }, Factor::Extended { r: theirs, .. }) => {
                Factor::Extended { r: stack_and_factor(&r, theirs, width, |_| None), width }
            }
            (mine, _) => mine,
        }
    }
}

/// The double-double factor of `mine` stacked on `theirs` and on `new_rows`
/// further rows (`row(i)` gives row `i`, `None` past the last).
fn stack_and_factor<'a>(
    mine: &[Vec<DoubleDouble>],
    theirs: &[Vec<DoubleDouble>],
    width: usize,
    row: impl Fn(usize) -> Option<&'a [DoubleDouble]>,
) -> Vec<Vec<DoubleDouble>> {
    let mut columns: Vec<Vec<DoubleDouble>> = vec![Vec::new(); width];
    let mut push = |values: &[DoubleDouble]| {
        for (column, &v) in columns.iter_mut().zip(values) {
            column.push(v);
        }
    };
    mine.iter().chain(theirs).for_each(|r| push(r));
    let mut i = 0;
    while let Some(values) = row(i) {
        push(values);
        i += 1;
    }
    dd_qr::triangular_factor(columns)
}

impl FactorAggregate {
    /// The aggregate of no rows, for designs of `columns` columns.
    pub fn new(columns: usize) -> Self {
        Self::with_factor(Factor::Double(TallSkinnyQr::new(columns + 1)))
    }

    /// The aggregate of no rows whose factor is computed in double-double on
    /// the design's full values: for designs whose condition number exceeds
    /// [`SEMINORMAL_CONDITION_LIMIT`] (see [`FirstSolution::needs_extended`]).
    pub fn new_extended(columns: usize) -> Self {
        Self::with_factor(Factor::Extended { r: Vec::new(), width: columns + 1 })
    }

    /// The aggregate of no rows for `rows` rows of `columns` columns, in the
    /// precision the automatic rule chooses: double-double where it is cheap
    /// ([`super::solver::extended_is_cheap`]), double otherwise (then
    /// [`FirstSolution::needs_extended`] tells whether to factor again).
    pub fn for_rows(columns: usize, rows: usize) -> Self {
        if super::solver::extended_is_cheap(rows, columns) {
            Self::new_extended(columns)
        } else {
            Self::new(columns)
        }
    }

    fn with_factor(factor: Factor) -> Self {
        Self {
            factor,
            rows: 0,
            total_weight: DoubleDouble::ZERO,
            weighted_target: DoubleDouble::ZERO,
            sum_log_weight: 0.0,
        }
    }

    /// Whether the factor is computed in double-double.
    pub fn is_extended(&self) -> bool {
        matches!(self.factor, Factor::Extended { .. })
    }

    /// Takes in a design's rows (on all cores).
    pub fn absorb(&mut self, design: &Design) {
        self.absorb_on(design, tsqr::available_threads());
    }

    /// Takes in a design's rows on up to `threads` threads (one inside a
    /// query engine's partition, which is already one core's work).
    pub fn absorb_on(&mut self, design: &Design, threads: usize) {
        let n = design.n_rows();
        if n == 0 {
            return;
        }
        let p = design.columns().len();
        let weight = |i: usize| design.weights().map_or(1.0, |w| w[i]);
        match &mut self.factor {
            // Unweighted: the columns as they are (the weighted path's
            // products by √1 = 1 are exact, so the factor is the same).
            Factor::Double(factor) if design.weights().is_none() => {
                let columns: Vec<&[f64]> =
                    design.columns().iter().map(|c| c.hi.as_slice()).chain([design.target()]).collect();
                let piece = tsqr::factor_columns(&columns, threads);
                *factor = std::mem::replace(factor, TallSkinnyQr::new(p + 1)).merge(&piece);
            }
            Factor::Double(factor) => {
                let root: Vec<f64> = (0..n).map(|i| DoubleDouble::from(weight(i)).sqrt().to_f64()).collect();
                let piece = tsqr::factor_rows(n, p + 1, threads, |i, j| {
                    if j < p {
                        design.columns()[j].hi[i] * root[i]
                    } else {
                        design.target()[i] * root[i]
                    }
                });
                *factor = std::mem::replace(factor, TallSkinnyQr::new(p + 1)).merge(&piece);
            }
            Factor::Extended { r, width } => {
                let rows: Vec<Vec<DoubleDouble>> = (0..n)
                    .map(|i| {
                        let root = DoubleDouble::from(weight(i)).sqrt();
                        let mut row: Vec<DoubleDouble> = design
                            .columns()
                            .iter()
                            .map(|c| DoubleDouble::new(c.hi[i], c.lo.as_ref().map_or(0.0, |lo| lo[i])) * root)
                            .collect();
                        row.push(DoubleDouble::from(design.target()[i]) * root);
                        row
                    })
                    .collect();
                *r = stack_and_factor(r, &[], *width, |i| rows.get(i).map(Vec::as_slice));
            }
        }
        self.rows += n;
        match design.weights() {
            // Unweighted: the total weight is the row count (exact: an
            // integer below 2⁵³), and each product by a weight of 1 is exact.
            None => {
                self.total_weight += DoubleDouble::from(n as f64);
                for &y in design.target() {
                    self.weighted_target += DoubleDouble::from(y);
                }
            }
            Some(_) => {
                for i in 0..n {
                    self.total_weight += DoubleDouble::from(weight(i));
                    self.weighted_target += DoubleDouble::from_product(weight(i), design.target()[i]);
                }
            }
        }
        if let Some(w) = &design.weights() {
            self.sum_log_weight += w.iter().map(|v| v.ln()).sum::<f64>();
        }
    }

    /// Refuses to merge `other` into this aggregate unless both are factors
    /// of the same kind (double or double-double) and width: states read
    /// from bytes ([`Self::from_bytes`]) may be of another model or damaged,
    /// and [`Self::merge`] assumes they match.
    pub fn check_mergeable(&self, other: &FactorAggregate) -> Result<()> {
        if self.is_extended() != other.is_extended() || self.factor.width() != other.factor.width() {
            return Err(Error::DamagedState {
                kind: "factor".into(),
                detail: format!(
                    "a piece of width {} ({}) cannot merge with one of width {} ({})",
                    other.factor.width(),
                    if other.is_extended() { "double-double" } else { "double" },
                    self.factor.width(),
                    if self.is_extended() { "double-double" } else { "double" },
                ),
            });
        }
        Ok(())
    }

    /// The aggregate of both pieces' rows (pieces of one kind and width; see
    /// [`Self::check_mergeable`] for pieces read from bytes).
    pub fn merge(mut self, other: &FactorAggregate) -> FactorAggregate {
        self.factor = self.factor.merge(&other.factor);
        self.rows += other.rows;
        self.total_weight += other.total_weight;
        self.weighted_target += other.weighted_target;
        self.sum_log_weight += other.sum_log_weight;
        self
    }

    /// Rows taken in.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// The state's exact bytes ([`crate::state_bytes`]), for merging in
    /// another process.
    pub fn to_bytes(&self) -> Vec<u8> {
        let mut writer = StateWriter::new(FACTOR_TAG);
        match &self.factor {
            Factor::Double(factor) => {
                let r = factor.r();
                writer.count(0).count(r.nrows()).count(r.ncols()).count(factor.rows() as usize);
                for i in 0..r.nrows() {
                    for j in i..r.ncols() {
                        writer.number(r[(i, j)]);
                    }
                }
            }
            Factor::Extended { r, width } => {
                writer.count(1).count(r.len()).count(*width).count(self.rows);
                for (i, row) in r.iter().enumerate() {
                    for value in &row[i..] {
                        writer.number(value.hi).number(value.lo);
                    }
                }
            }
        }
        writer
            .count(self.rows)
            .number(self.total_weight.hi)
            .number(self.total_weight.lo)
            .number(self.weighted_target.hi)
            .number(self.weighted_target.lo)
            .number(self.sum_log_weight)
            .finish()
    }

    /// Reads a state [`Self::to_bytes`] wrote; anything else is refused.
    /// (Its width is checked against the design's when it is solved.)
    pub fn from_bytes(bytes: &[u8]) -> Result<Self> {
        let mut reader = StateReader::new(bytes, FACTOR_TAG, "factor")?;
        let damaged = |detail: &str| Error::DamagedState { kind: "factor".into(), detail: detail.into() };
        let (kind, height, width, factored) = (reader.count()?, reader.count()?, reader.count()?, reader.count()?);
        // Entries are read one by one, so a damaged length ends in "it ends
        // early"; the width alone must still not ask for an absurd matrix.
        if width == 0 || width > 1 << 20 || height > width || height.saturating_mul(width) > bytes.len() {
            return Err(damaged("its factor's shape"));
        }
        let factor = match kind {
            0 => {
                let mut r = Mat::<f64>::zeros(height, width);
                for i in 0..height {
                    for j in i..width {
                        r[(i, j)] = reader.number()?;
                    }
                }
                Factor::Double(
                    TallSkinnyQr::from_parts(r, factored as u64).ok_or_else(|| damaged("its factor's shape"))?,
                )
            }
            1 => {
                if height != factored.min(width) {
                    return Err(damaged("its factor's shape"));
                }
                let mut r = vec![vec![DoubleDouble::ZERO; width]; height];
                for (i, row) in r.iter_mut().enumerate() {
                    for value in &mut row[i..] {
                        *value = DoubleDouble::new(reader.number()?, reader.number()?);
                    }
                }
                Factor::Extended { r, width }
            }
            _ => return Err(damaged("its kind of factor")),
        };
        let rows = reader.count()?;
        if kind == 1 && rows != factored {
            return Err(damaged("its row count"));
        }
        let total_weight = DoubleDouble::new(reader.number()?, reader.number()?);
        let weighted_target = DoubleDouble::new(reader.number()?, reader.number()?);
        let sum_log_weight = reader.number()?;
        reader.finish()?;
        Ok(Self { factor, rows, total_weight, weighted_target, sum_log_weight })
    }
}

/// The tags of the two rounds' states ([`crate::state_bytes`]).
const FACTOR_TAG: &[u8; 4] = b"PLF1";
const RESIDUAL_TAG: &[u8; 4] = b"PLR2";

/// What round one decides: rank, aliased columns, first coefficients `b₀`.
#[derive(Debug, Clone)]
pub struct FirstSolution {
    small: SmallFactor,
    coefficients: Vec<DoubleDouble>,
    aggregate: FactorAggregate,
    with_intercept: bool,
}

impl FirstSolution {
    /// Solves from a merged round-one aggregate. `tolerance` as in
    /// [`FitOptions::rank_tolerance`] (`None`: the default for the design's size).
    pub fn from_aggregate(aggregate: FactorAggregate, recipe: &DesignRecipe, tolerance: Option<f64>) -> Result<Self> {
        let p = recipe.column_names.len();
        if aggregate.factor.width() != p + 1 {
            return Err(Error::DamagedState {
                kind: "factor".into(),
                detail: format!("it has {} columns, the design {}", aggregate.factor.width() - 1, p),
            });
        }
        // As in memory: more coefficients than rows is refused whatever the rank.
        if aggregate.rows <= p {
            return Err(Error::TooFewRows { rows: aggregate.rows, columns: p });
        }
        let tolerance = tolerance.unwrap_or_else(|| default_rank_tolerance(aggregate.rows, p));
        let small = match &aggregate.factor {
            Factor::Double(factor) => SmallFactor::from_augmented(factor.r(), tolerance),
            Factor::Extended { r, width } => {
                SmallFactor::from_augmented_entries(r.len(), *width, |i, j| r[i][j], tolerance)
            }
        };
        if small.kept.is_empty() {
            return Err(Error::SingularDesign { detail: "every design column is zero on the rows used".into() });
        }
        let coefficients = small.solution();
        Ok(Self { small, coefficients, aggregate, with_intercept: recipe.spec.has_intercept() })
    }

    /// Whether this solution came from a factor in double where the automatic
    /// rule wants double-double, so that round one should be run again with
    /// [`FactorAggregate::new_extended`]: the design's condition number
    /// exceeds [`SEMINORMAL_CONDITION_LIMIT`] (one refinement step cannot
    /// then recover every digit), or the rows factored make a small design
    /// ([`super::solver::extended_is_cheap`]; a round one that did not know
    /// its rows beforehand, [`FactorAggregate::for_rows`] otherwise).
    pub fn needs_extended(&self) -> bool {
        let columns = self.aggregate.factor.width().saturating_sub(1);
        !self.aggregate.is_extended()
            && (self.small.condition_number > SEMINORMAL_CONDITION_LIMIT
                || super::solver::extended_is_cheap(self.aggregate.rows, columns))
    }

    /// The condition number of the equilibrated kept design.
    pub fn condition_number(&self) -> f64 {
        self.small.condition_number
    }

    /// The weighted mean of the target (zero without an intercept, where the
    /// total sum of squares is uncentred).
    fn centre(&self) -> DoubleDouble {
        if self.with_intercept {
            self.aggregate.weighted_target / self.aggregate.total_weight
        } else {
            DoubleDouble::ZERO
        }
    }
}

/// Round two of a fit from pieces, given [`FirstSolution`] (see the module docs).
#[derive(Debug, Clone, PartialEq)]
pub struct ResidualAggregate {
    gradient: Vec<DoubleDouble>,
    rss: DoubleDouble,
    ss_total: DoubleDouble,
    /// `Σ exp(rᵢ)`, for the smearing estimate of a logged target's mean.
    exp_residual_sum: f64,
    /// `Σ wᵢ² rᵢ² xᵢxᵢᵀ` over the kept columns, row-major, when asked for.
    middle: Option<Vec<f64>>,
}

impl ResidualAggregate {
    /// The aggregate of no rows; `with_middle` gathers the HC0/HC1 middle matrix.
    pub fn new(first: &FirstSolution, with_middle: bool) -> Self {
        let k = first.small.kept.len();
        Self {
            gradient: vec![DoubleDouble::ZERO; k],
            rss: DoubleDouble::ZERO,
            ss_total: DoubleDouble::ZERO,
            exp_residual_sum: 0.0,
            middle: with_middle.then(|| vec![0.0; k * k]),
        }
    }

    /// Takes in a design's rows.
    pub fn absorb(&mut self, design: &Design, first: &FirstSolution) {
        let n = design.n_rows();
        if n == 0 {
            return;
        }
        let kept = &first.small.kept;
        let residuals = super::solver::residuals_dd(design.columns(), kept, &first.coefficients, design.target());
        let centre = first.centre();
        let weighted = super::solver::weighted_residuals(&residuals, design.weights());
        for (g, sum) in self.gradient.iter_mut().zip(super::solver::gradient(design.columns(), kept, &weighted)) {
            *g += DoubleDouble::from(sum);
        }
        let sums = pulp::Arch::new().dispatch(RowSums {
            residuals: &residuals,
            target: design.target(),
            weights: design.weights(),
            centre,
        });
        self.rss += sums.rss;
        self.ss_total += sums.ss_total;
        self.exp_residual_sum += sums.exp_residual_sum;
        if let Some(middle) = &mut self.middle {
            let k = kept.len();
            let scaled = Mat::<f64>::from_fn(n, k, |i, a| design.columns()[kept[a]].hi[i] * weighted[i]);
            let product = scaled.transpose() * &scaled;
            for a in 0..k {
                for b in 0..k {
                    middle[a * k + b] += product[(a, b)];
                }
            }
        }
    }

    /// The state's exact bytes ([`crate::state_bytes`]).
    pub fn to_bytes(&self) -> Vec<u8> {
        let mut writer = StateWriter::new(RESIDUAL_TAG);
        writer.count(self.gradient.len());
        for g in &self.gradient {
            writer.number(g.hi).number(g.lo);
        }
        writer
            .number(self.rss.hi)
            .number(self.rss.lo)
            .number(self.ss_total.hi)
            .number(self.ss_total.lo)
            .number(self.exp_residual_sum);
        match &self.middle {
            Some(middle) => writer.count(1).numbers(middle),
            None => writer.count(0),
        };
        writer.finish()
    }

    /// Reads a state [`Self::to_bytes`] wrote; anything else is refused.
    /// (Its size is checked against the first solution in [`finish`].)
    pub fn from_bytes(bytes: &[u8]) -> Result<Self> {
        let mut reader = StateReader::new(bytes, RESIDUAL_TAG, "residual sums")?;
        let damaged = |detail: &str| Error::DamagedState { kind: "residual sums".into(), detail: detail.into() };
        let k = reader.count()?;
        if k.saturating_mul(16) > bytes.len() {
            return Err(damaged("its gradient's length"));
        }
        let mut gradient = Vec::with_capacity(k);
        for _ in 0..k {
            gradient.push(DoubleDouble::new(reader.number()?, reader.number()?));
        }
        let rss = DoubleDouble::new(reader.number()?, reader.number()?);
        let ss_total = DoubleDouble::new(reader.number()?, reader.number()?);
        let exp_residual_sum = reader.number()?;
        let middle = match reader.count()? {
            0 => None,
            1 => Some(reader.numbers()?),
            _ => return Err(damaged("its middle-matrix flag")),
        };
        reader.finish()?;
        if middle.as_ref().is_some_and(|m| m.len() != k * k) {
            return Err(damaged("its middle matrix's size"));
        }
        Ok(Self { gradient, rss, ss_total, exp_residual_sum, middle })
    }

    /// Refuses to merge `other` into these sums unless both have the same
    /// number of kept columns and both (or neither) gather the middle matrix
    /// of the same size: states read from bytes may be of another model or
    /// damaged, and [`Self::merge`] assumes they match.
    pub fn check_mergeable(&self, other: &ResidualAggregate) -> Result<()> {
        let middle = |sums: &ResidualAggregate| sums.middle.as_ref().map(Vec::len);
        if self.gradient.len() != other.gradient.len() || middle(self) != middle(other) {
            return Err(Error::DamagedState {
                kind: "residual sums".into(),
                detail: format!(
                    "sums over {} columns (middle matrix {:?}) cannot merge with sums over {} (middle matrix {:?})",
                    other.gradient.len(),
                    middle(other),
                    self.gradient.len(),
                    middle(self)
                ),
            });
        }
        Ok(())
    }

    /// The sums of both pieces' rows (pieces of one shape; see
    /// [`Self::check_mergeable`] for pieces read from bytes).
    pub fn merge(mut self, other: &ResidualAggregate) -> ResidualAggregate {
        for (a, b) in self.gradient.iter_mut().zip(&other.gradient) {
            *a += *b;
        }
        self.rss += other.rss;
        self.ss_total += other.ss_total;
        self.exp_residual_sum += other.exp_residual_sum;
        if let (Some(mine), Some(theirs)) = (&mut self.middle, &other.middle) {
            mine.iter_mut().zip(theirs).for_each(|(a, b)| *a += b);
        }
        self
    }
}

/// The per-row sums of one piece: `Σ wᵢrᵢ²` and `Σ wᵢ(yᵢ − ȳ)²` in
/// double-double, and `Σ exp(rᵢ)` (for the smearing retransform).
struct PieceSums {
    rss: DoubleDouble,
    ss_total: DoubleDouble,
    exp_residual_sum: f64,
}

/// The operation computing [`PieceSums`], dispatched through pulp so that its
/// double-double products compile to fused multiply-adds where the processor
/// has them (as the solver's residual pass; see `solver::residual_rows`).
struct RowSums<'a> {
    residuals: &'a [DoubleDouble],
    target: &'a [f64],
    weights: Option<&'a [f64]>,
    centre: DoubleDouble,
}

impl pulp::WithSimd for RowSums<'_> {
    type Output = PieceSums;

    #[inline(always)]
    fn with_simd<S: pulp::Simd>(self, _simd: S) -> PieceSums {
        let Self { residuals, target, weights, centre } = self;
        let weight = |i: usize| weights.map_or(1.0, |w| w[i]);
        let mut sums = PieceSums { rss: DoubleDouble::ZERO, ss_total: DoubleDouble::ZERO, exp_residual_sum: 0.0 };
        for (i, (r, &y)) in residuals.iter().zip(target).enumerate() {
            sums.exp_residual_sum += r.to_f64().exp();
            sums.rss += (*r * *r).mul_f64(weight(i));
            let d = DoubleDouble::from(y) - centre;
            sums.ss_total += (d * d).mul_f64(weight(i));
        }
        sums
    }
}

/// A least-squares fit assembled from pieces: the coefficients, their
/// covariance and the whole-fit sums (no row-level results).
#[derive(Debug, Clone)]
pub struct AssembledFit {
    /// How the rows were coded.
    pub recipe: DesignRecipe,
    /// Indices of the estimated design columns, ascending.
    pub kept: Vec<usize>,
    /// Indices of the aliased design columns, ascending.
    pub aliased: Vec<usize>,
    /// Estimates of the kept columns.
    pub coefficients: Vec<f64>,
    /// Their covariance under `covariance_kind`, row-major `k × k`.
    pub covariance: Vec<Vec<f64>>,
    /// The covariance estimator.
    pub covariance_kind: CovarianceKind,
    /// Rows used.
    pub rows: usize,
    /// Rows dropped for missing values.
    pub dropped: DroppedRows,
    /// `Σ wᵢ rᵢ²`.
    pub weighted_rss: f64,
    /// `Σ wᵢ (yᵢ − ȳ)²` (uncentred without intercept), in double-double.
    pub ss_total: DoubleDouble,
    /// `Σ ln wᵢ` (zero without weights), for the log-likelihood.
    pub sum_log_weight: f64,
    /// `Σ exp(rᵢ)` over the rows used (residuals at the round-one
    /// coefficients), for the smearing estimate of a logged target's mean.
    pub exp_residual_sum: f64,
    /// Condition number of the equilibrated design.
    pub condition_number: f64,
    /// The solver (blocked QR with one refinement step).
    pub method: SolverMethod,
    /// The data.
    pub provenance: Provenance,
    /// Pieces (batches or partitions) the rows came in.
    pub pieces: usize,
}

impl AssembledFit {
    /// Names of the estimated design columns.
    pub fn estimated_names(&self) -> Vec<&str> {
        self.kept.iter().map(|&j| self.recipe.column_names[j].as_str()).collect()
    }

    /// Names of the aliased design columns.
    pub fn aliased_names(&self) -> Vec<&str> {
        self.aliased.iter().map(|&j| self.recipe.column_names[j].as_str()).collect()
    }
}

/// Refuses covariance estimators a fit from pieces cannot compute.
pub fn check_covariance_for_pieces(kind: &CovarianceKind) -> Result<()> {
    match kind {
        CovarianceKind::Classical | CovarianceKind::Hc0 | CovarianceKind::Hc1 => Ok(()),
        other => Err(Error::Specification(format!(
            "{} standard errors need every row at once (each row's leverage, or its group), which a fit read \
             in batches does not keep; use classical, HC0 or HC1 errors here, or load the data and fit in memory",
            other.label()
        ))),
    }
}

/// Completes a fit from its two merged rounds.
pub fn finish(
    first: FirstSolution,
    second: ResidualAggregate,
    recipe: DesignRecipe,
    kind: &CovarianceKind,
    dropped: DroppedRows,
    provenance: Provenance,
    pieces: usize,
) -> Result<AssembledFit> {
    check_covariance_for_pieces(kind)?;
    if second.gradient.len() != first.small.kept.len() {
        return Err(Error::DamagedState {
            kind: "residual sums".into(),
            detail: format!(
                "they hold {} columns, the first solution {}",
                second.gradient.len(),
                first.small.kept.len()
            ),
        });
    }
    let gradient: Vec<f64> = second.gradient.iter().map(|g| g.to_f64()).collect();
    // A factor in double-double gives b₀ to every digit already; the
    // correction, whose gradient is summed in double, could only add the
    // gradient's rounding amplified by κ² (ruinous on NIST's Filip).
    let extended = first.aggregate.is_extended();
    let delta = if extended { vec![0.0; gradient.len()] } else { first.small.seminormal_correction(&gradient) };
    let correction: DoubleDouble = delta.iter().zip(&second.gradient).map(|(&d, g)| g.mul_f64(d)).sum();
    let weighted_rss = (second.rss - correction).to_f64().max(0.0);
    let coefficients: Vec<f64> =
        first.coefficients.iter().zip(&delta).map(|(b, &d)| (*b + DoubleDouble::from(d)).to_f64()).collect();
    if first.with_intercept && second.ss_total.to_f64() == 0.0 {
        return Err(Error::ConstantTarget { target: recipe.spec.target_label(), value: first.centre().to_f64() });
    }
    let n = first.aggregate.rows;
    let k = first.small.kept.len();
    let unscaled = first.small.unscaled_covariance();
    let covariance = match (kind, &second.middle) {
        (CovarianceKind::Classical, _) => {
            let s2 = weighted_rss / (n - k) as f64;
            unscaled.iter().map(|row| row.iter().map(|v| v * s2).collect()).collect()
        }
        (_, Some(middle)) => {
            let c = Mat::<f64>::from_fn(k, k, |a, b| unscaled[a][b]);
            let m = Mat::<f64>::from_fn(k, k, |a, b| middle[a * k + b]);
            let sandwich = &c * &m * &c;
            let factor = if *kind == CovarianceKind::Hc1 { n as f64 / (n - k) as f64 } else { 1.0 };
            (0..k).map(|a| (0..k).map(|b| sandwich[(a, b)] * factor).collect()).collect()
        }
        (_, None) => {
            return Err(Error::Specification(
                "robust standard errors need the middle matrix gathered in round two".into(),
            ))
        }
    };
    Ok(AssembledFit {
        kept: first.small.kept.clone(),
        aliased: first.small.aliased.clone(),
        coefficients,
        covariance,
        covariance_kind: kind.clone(),
        rows: n,
        dropped,
        weighted_rss,
        ss_total: second.ss_total,
        sum_log_weight: first.aggregate.sum_log_weight,
        exp_residual_sum: second.exp_residual_sum,
        condition_number: first.small.condition_number,
        method: if extended { SolverMethod::ExtendedQr } else { SolverMethod::RefinedQr { refinement_steps: 1 } },
        provenance,
        pieces,
        recipe,
    })
}

/// Fits `spec` to data read in batches of `batches.batch_rows()` rows:
/// one pass learns the coding, one factors, one gathers residual sums, and
/// one hashes the files for the provenance stamp. Memory is bounded by a
/// batch and `p²`, not by the rows.
///
/// `non_finite` says what the batches do with values that are not finite
/// numbers (refuse them, by default, or read them as missing).
pub fn fit_batches(
    path: &std::path::Path,
    spec: &ModelSpec,
    options: &FitOptions,
    batch_rows: usize,
    non_finite: NonFinite,
) -> Result<AssembledFit> {
    check_covariance_for_pieces(&options.covariance)?;
    let (numbers, labels) = columns_read(spec);
    let mut batches = RowBatches::open(path, &numbers, &labels, batch_rows)?;
    if non_finite == NonFinite::AsMissing {
        batches = batches.non_finite_as_missing();
    }
    let mut learner = RecipeLearner::new(spec)?;
    let mut rows_read = 0;
    let mut pieces = 0;
    batches.for_each_batch(|frame| {
        rows_read += frame.height();
        pieces += 1;
        learner.absorb(frame)
    })?;
    let recipe = learner.finish()?;
    let mut factor = FactorAggregate::for_rows(recipe.column_names.len(), learner.rows_kept());
    batches.for_each_batch(|frame| {
        factor.absorb(&recipe.fitting_design(frame)?);
        Ok(())
    })?;
    let mut first = FirstSolution::from_aggregate(factor, &recipe, options.rank_tolerance)?;
    if first.needs_extended() {
        let mut factor = FactorAggregate::new_extended(recipe.column_names.len());
        batches.for_each_batch(|frame| {
            factor.absorb(&recipe.fitting_design(frame)?);
            Ok(())
        })?;
        first = FirstSolution::from_aggregate(factor, &recipe, options.rank_tolerance)?;
    }
    let mut second = ResidualAggregate::new(&first, options.covariance != CovarianceKind::Classical);
    batches.for_each_batch(|frame| {
        second.absorb(&recipe.fitting_design(frame)?, &first);
        Ok(())
    })?;
    let provenance = batches.fingerprint(rows_read)?;
    finish(first, second, recipe, &options.covariance, learner.dropped().clone(), provenance, pieces)
}
