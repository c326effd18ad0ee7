//! Least squares to the last certified digit.
//!
//! Two paths, both rank-revealing and both reporting the same quantities:
//!
//! * **Extended** — column-pivoted Householder QR carried out in double-double
//!   arithmetic ([`crate::numeric::dd_qr`]) on the exact-equilibrated, weighted
//!   design. Design values that transforms produced with more digits than a
//!   double holds (polynomial powers, products) enter with those digits. With
//!   ~32 significant digits in every operation the solution keeps about
//!   `32 − log10 κ` digits, enough for every NIST StRD linear problem (Filip's
//!   equilibrated κ ≈ 5e9). Chosen automatically for designs with `n·p² ≤ 10⁷`
//!   and for larger ill-conditioned ones with `n·p² ≤ 2·10⁸`.
//! * **Double** — for large designs. The weighted `[X | y]` is reduced to its
//!   small triangular factor by tall-skinny QR on all cores
//!   ([`crate::numeric::tsqr`]); the rank-revealing pivoted QR then runs in
//!   double-double on that `p × p` factor, and the solution is refined with
//!   residuals recomputed with error-free products and double-double
//!   accumulation (Golub & Wilkinson 1966, "Note on the iterative refinement
//!   of least squares solution", *Numer. Math.* 9, 139–148; Higham, *Accuracy
//!   and Stability of Numerical Algorithms*, 2nd ed., §20.5), the correction
//!   coming from the corrected seminormal equations (Björck 1987). Designs too
//!   ill-conditioned for that refinement ([`SEMINORMAL_CONDITION_LIMIT`]) take
//!   the extended path when affordable, and otherwise faer's whole-matrix
//!   column-pivoted QR, refined through its `Q`.
//!
//! **Numerical rank.** Columns are first scaled to unit length by powers of two
//! (exact). A column is aliased when, at its pivot step, its remaining norm is
//! at most `τ · |R₁₁|` with `τ = ε · max(n, p)` (`ε` = 2.2e-16), the threshold
//! LAPACK's `xGELSD` uses by default for singular values. Aliased columns are
//! excluded from the fit and named in its result; the remaining columns are
//! refitted alone, so the reported coefficients are those of the reduced model.

use super::Precision;
use crate::model::DesignColumn;
use crate::numeric::equilibrate::power_of_two_scale;
use crate::numeric::DoubleDouble;
use crate::numeric::{dd_qr, tsqr};
use faer::linalg::solvers::SolveLstsq;
use faer::Mat;
use serde::{Deserialize, Serialize};

/// Which algorithm produced a solution.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "snake_case")]
pub enum SolverMethod {
    /// Pivoted QR in double-double arithmetic.
    ExtendedQr,
    /// QR in double precision (blocked tall-skinny QR with a pivoted QR of the
    /// small factor, or a whole-matrix pivoted QR for ill-conditioned
    /// designs) with `refinement_steps` steps of refinement.
    RefinedQr {
        /// Steps of iterative refinement taken.
        refinement_steps: usize,
    },
}

/// The solution of a (weighted) least-squares problem. Built only by the
/// solvers of this module; read through its accessors.
#[derive(Debug, Clone)]
pub struct Solution {
    /// Indices (into the design columns) of the columns estimated, ascending.
    kept: Vec<usize>,
    /// Indices of the columns found linearly dependent on the kept ones.
    aliased: Vec<usize>,
    /// Estimates for the kept columns, in the order of `kept`.
    coefficients: Vec<f64>,
    /// `(XᵀWX)⁻¹` restricted to the kept columns (original units), row-major.
    unscaled_covariance: Vec<Vec<f64>>,
    /// Raw residuals `y − Xb` (unweighted), one per design row.
    residuals: Vec<f64>,
    /// `Σ wᵢ rᵢ²`, accumulated in double-double.
    weighted_rss: f64,
    /// 2-norm condition number of the weighted design with columns scaled to
    /// unit length (Belsley, Kuh & Welsch 1980, *Regression Diagnostics*, §3.2).
    condition_number: f64,
    /// The algorithm used.
    method: SolverMethod,
}

impl Solution {
    /// Indices (into the design columns) of the columns estimated, ascending.
    pub fn kept(&self) -> &[usize] {
        &self.kept
    }

    /// Indices of the columns found linearly dependent on the kept ones.
    pub fn aliased(&self) -> &[usize] {
        &self.aliased
    }

    /// Estimates for the kept columns, in the order of [`Solution::kept`].
    pub fn coefficients(&self) -> &[f64] {
        &self.coefficients
    }

    /// `(XᵀWX)⁻¹` restricted to the kept columns (original units), row by row.
    pub fn unscaled_covariance(&self) -> &[Vec<f64>] {
        &self.unscaled_covariance
    }

    /// Raw residuals `y − Xb` (unweighted), one per design row.
    pub fn residuals(&self) -> &[f64] {
        &self.residuals
    }

    /// `Σ wᵢ rᵢ²`, accumulated in double-double.
    pub fn weighted_rss(&self) -> f64 {
        self.weighted_rss
    }

    /// 2-norm condition number of the weighted, unit-scaled design
    /// (Belsley, Kuh & Welsch 1980, §3.2).
    pub fn condition_number(&self) -> f64 {
        self.condition_number
    }

    /// The algorithm used.
    pub fn method(&self) -> SolverMethod {
        self.method
    }
}

/// The default numerical-rank tolerance for an `n × p` design.
pub fn default_rank_tolerance(n: usize, p: usize) -> f64 {
    f64::EPSILON * n.max(p) as f64
}

/// Solves `min ‖W^½ (y − X b)‖₂` over the design columns.
pub fn solve(
    columns: &[DesignColumn],
    y: &[f64],
    weights: Option<&[f64]>,
    precision: Precision,
    tolerance: f64,
) -> Solution {
    let n = y.len();
    let p = columns.len();
    let work = (n as f64) * (p as f64) * (p as f64);
    match precision {
        Precision::Extended => solve_extended(columns, y, weights, tolerance),
        Precision::Double => solve_blocked(columns, y, weights, tolerance)
            .unwrap_or_else(|| solve_double(columns, y, weights, tolerance)),
        Precision::Auto if extended_is_cheap(n, p) => solve_extended(columns, y, weights, tolerance),
        Precision::Auto => match solve_blocked(columns, y, weights, tolerance) {
            Some(solution) => solution,
            None if work <= 2e8 => solve_extended(columns, y, weights, tolerance),
            None => solve_double(columns, y, weights, tolerance),
        },
    }
}

/// The size of design, in `n·p²` multiply-adds, up to which the automatic
/// precision always solves in double-double: there it costs milliseconds,
/// and it needs no judgement of the condition number (a double factor with
/// one refinement step loses digits on large-residual, ill-conditioned
/// problems such as NIST's Wampler4–5 even below
/// [`SEMINORMAL_CONDITION_LIMIT`]). Chosen from timings on this project's
/// machine, not from a source.
pub const EXTENDED_WORK_LIMIT: f64 = 1e7;

/// Whether a design of `rows × columns` is within [`EXTENDED_WORK_LIMIT`].
pub fn extended_is_cheap(rows: usize, columns: usize) -> bool {
    (rows as f64) * (columns as f64) * (columns as f64) <= EXTENDED_WORK_LIMIT
}

/// The largest condition number (of the equilibrated design) at which the
/// blocked path's refinement, by the corrected seminormal equations, still
/// gives a solution as accurate as a backward-stable QR solve: that holds
/// while `κ·√ε` stays well below one (Björck 1987, "Stability analysis of the
/// method of seminormal equations for linear least squares problems", *Linear
/// Algebra Appl.* 88/89, 31–48, §4; `1/√ε ≈ 6.7e7`). Above it the fit takes
/// the extended path, or the whole-matrix QR whose refinement uses `Q`.
pub const SEMINORMAL_CONDITION_LIMIT: f64 = 1e7;

/// `√wᵢ` in double-double, or one.
fn root_weights(weights: Option<&[f64]>, n: usize) -> Vec<DoubleDouble> {
    match weights {
        None => vec![DoubleDouble::ONE; n],
        Some(w) => w.iter().map(|&v| DoubleDouble::from(v).sqrt()).collect(),
    }
}

/// Power-of-two scale for each column of the weighted design.
fn column_scales(columns: &[DesignColumn], root_w: &[DoubleDouble]) -> Vec<f64> {
    columns
        .iter()
        .map(|c| {
            let norm_sq: f64 = c.hi.iter().zip(root_w).map(|(x, s)| (x * s.hi).powi(2)).sum();
            power_of_two_scale(norm_sq.sqrt())
        })
        .collect()
}

/// Rows per block of the residual pass: a block's double-double accumulators
/// (16 bytes a row, 32 KiB) stay in the core's cache while every design
/// column streams through them once.
const RESIDUAL_BLOCK_ROWS: usize = 2048;

/// Below this many rows the residual pass runs on the calling thread; above,
/// it is split across the available cores (a thread costs more than the pass
/// saves on small designs).
const RESIDUAL_PARALLEL_ROWS: usize = 1 << 16;

/// Residuals `y − Xb` with every product error-free and every sum in double-double.
///
/// Each row's value is the same sequence of operations whatever the split —
/// `y_i`, minus `b_k x_ik` column by column in `kept` order — so the result is
/// identical bit for bit on one core or many. Rows are taken in cache-sized
/// blocks, and contiguous runs of blocks are shared among the cores.
pub(crate) fn residuals_dd(
    columns: &[DesignColumn],
    kept: &[usize],
    b: &[DoubleDouble],
    y: &[f64],
) -> Vec<DoubleDouble> {
    let n = y.len();
    let mut out = vec![DoubleDouble::ZERO; n];
    let threads = if n < RESIDUAL_PARALLEL_ROWS { 1 } else { crate::numeric::tsqr::available_threads() };
    if threads <= 1 {
        residual_rows(columns, kept, b, y, 0, &mut out);
        return out;
    }
    let share = n.div_ceil(threads).div_ceil(RESIDUAL_BLOCK_ROWS) * RESIDUAL_BLOCK_ROWS;
    std::thread::scope(|scope| {
        for (part, rows) in out.chunks_mut(share).enumerate() {
            scope.spawn(move || residual_rows(columns, kept, b, y, part * share, rows));
        }
    });
    out
}

/// The residuals of rows `first..first + out.len()` into `out`, compiled for
/// the processor's fused multiply-add when it has one: pulp (faer's SIMD
/// dispatcher) checks the features at run time and enters a copy of
/// [`ResidualRows::with_simd`] built with them. Without that, each error-free
/// product calls the software `fma` routine, several times slower.
fn residual_rows(
    columns: &[DesignColumn],
    kept: &[usize],
    b: &[DoubleDouble],
    y: &[f64],
    first: usize,
    out: &mut [DoubleDouble],
) {
    pulp::Arch::new().dispatch(ResidualRows { columns, kept, b, y, first, out });
}

/// The arguments of [`residual_rows`], as the operation pulp dispatches.
struct ResidualRows<'a> {
    columns: &'a [DesignColumn],
    kept: &'a [usize],
    b: &'a [DoubleDouble],
    y: &'a [f64],
    first: usize,
    out: &'a mut [DoubleDouble],
}

impl pulp::WithSimd for ResidualRows<'_> {
    type Output = ();

    #[inline(always)]
    fn with_simd<S: pulp::Simd>(self, _simd: S) {
        let Self { columns, kept, b, y, first, out } = self;
        // The block's accumulators as two plain arrays (high and low parts),
        // so that the compiler can run each column's update in vector lanes.
        let mut high = [0.0f64; RESIDUAL_BLOCK_ROWS];
        let mut low = [0.0f64; RESIDUAL_BLOCK_ROWS];
        for (block, acc) in out.chunks_mut(RESIDUAL_BLOCK_ROWS).enumerate() {
            let start = first + block * RESIDUAL_BLOCK_ROWS;
            let rows = start..start + acc.len();
            let (high, low) = (&mut high[..acc.len()], &mut low[..acc.len()]);
            high.copy_from_slice(&y[rows.clone()]);
            low.fill(0.0);
            for (&j, &coefficient) in kept.iter().zip(b) {
                let column = &columns[j];
                match &column.lo {
                    None => {
                        for ((h, l), &x) in high.iter_mut().zip(low.iter_mut()).zip(&column.hi[rows.clone()]) {
                            let v = DoubleDouble { hi: *h, lo: *l } - coefficient.mul_f64(x);
                            (*h, *l) = (v.hi, v.lo);
                        }
                    }
                    Some(lo) => {
                        let parts = column.hi[rows.clone()].iter().zip(&lo[rows.clone()]);
                        for ((h, l), (&x, &xl)) in high.iter_mut().zip(low.iter_mut()).zip(parts) {
                            let v = DoubleDouble { hi: *h, lo: *l } - DoubleDouble { hi: x, lo: xl } * coefficient;
                            (*h, *l) = (v.hi, v.lo);
                        }
                    }
                }
            }
            for ((a, &h), &l) in acc.iter_mut().zip(high.iter()).zip(low.iter()) {
                *a = DoubleDouble { hi: h, lo: l };
            }
        }
    }
}

/// `W r` rounded to double from the accurately computed residuals: what the
/// refinement's gradient and the robust middle matrix are formed from.
pub(crate) fn weighted_residuals(residuals: &[DoubleDouble], weights: Option<&[f64]>) -> Vec<f64> {
    match weights {
        None => residuals.iter().map(|r| r.to_f64()).collect(),
        Some(w) => residuals.iter().zip(w).map(|(r, &wi)| r.mul_f64(wi).to_f64()).collect(),
    }
}

/// The gradient `Xᵀ W r` over the `kept` columns, in double precision, from
/// [`weighted_residuals`]; the right-hand side of the seminormal correction.
pub(crate) fn gradient(columns: &[DesignColumn], kept: &[usize], weighted: &[f64]) -> Vec<f64> {
    kept.iter().map(|&j| columns[j].hi.iter().zip(weighted).map(|(x, r)| x * r).sum()).collect()
}

fn weighted_rss(residuals: &[DoubleDouble], weights: Option<&[f64]>) -> f64 {
    let total: DoubleDouble = residuals
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let sq = *r * *r;
            weights.map_or(sq, |w| sq.mul_f64(w[i]))
        })
        .sum();
    total.to_f64()
}

/// `R⁻¹R⁻ᵀ` for the pivoted, scaled problem, returned in `kept` order and original units.
fn unscaled_covariance(r: &[Vec<DoubleDouble>], pivot_of_kept: &[usize], scales_of_kept: &[f64]) -> Vec<Vec<f64>> {
    let rank = r.len();
    let inv = dd_qr::invert_upper(r);
    let mut pivoted = vec![vec![DoubleDouble::ZERO; rank]; rank];
    for a in 0..rank {
        for b in a..rank {
            let mut s = DoubleDouble::ZERO;
            for k in b.max(a)..rank {
                s += inv[a][k] * inv[b][k];
            }
            pivoted[a][b] = s;
            pivoted[b][a] = s;
        }
    }
    let k = pivot_of_kept.len();
    let mut out = vec![vec![0.0; k]; k];
    for a in 0..k {
        for b in 0..k {
            let v = pivoted[pivot_of_kept[a]][pivot_of_kept[b]];
            out[a][b] = v.mul_f64(scales_of_kept[a]).mul_f64(scales_of_kept[b]).to_f64();
        }
    }
    out
}

fn condition_from_r(r: &[Vec<DoubleDouble>]) -> f64 {
    let k = r.len();
    if k == 0 {
        return f64::INFINITY;
    }
    // Columns of R have the norms of the design's columns (Q is orthogonal), so
    // scaling them to unit length gives exactly the unit-length-scaled design.
    let norms: Vec<f64> = (0..k).map(|j| (0..=j).map(|i| r[i][j].to_f64().powi(2)).sum::<f64>().sqrt()).collect();
    let m = Mat::<f64>::from_fn(k, k, |i, j| r[i][j].to_f64() / norms[j]);
    match m.singular_values() {
        Ok(s) => {
            let max = s.iter().cloned().fold(0.0, f64::max);
            let min = s.iter().cloned().fold(f64::INFINITY, f64::min);
            if min > 0.0 {
                max / min
            } else {
                f64::INFINITY
            }
        }
        Err(_) => f64::NAN,
    }
}

/// Splits a pivot order at the rank into kept/aliased (ascending) and, for each
/// kept column, its position in the pivoted factor.
fn split_by_rank(permutation: &[usize], rank: usize) -> (Vec<usize>, Vec<usize>, Vec<usize>) {
    let mut kept: Vec<usize> = permutation[..rank].to_vec();
    kept.sort_unstable();
    let mut aliased: Vec<usize> = permutation[rank..].to_vec();
    aliased.sort_unstable();
    let pivot_of_kept = kept.iter().map(|j| permutation.iter().position(|x| x == j).unwrap_or(0)).collect();
    (kept, aliased, pivot_of_kept)
}

fn solve_extended(columns: &[DesignColumn], y: &[f64], weights: Option<&[f64]>, tolerance: f64) -> Solution {
    let n = y.len();
    let root_w = root_weights(weights, n);
    let scales = column_scales(columns, &root_w);
    let scaled: Vec<Vec<DoubleDouble>> = columns
        .iter()
        .zip(&scales)
        .map(|(c, &s)| (0..n).map(|i| (c.value(i) * root_w[i]).scale_pow2(s)).collect())
        .collect();
    let rhs: Vec<DoubleDouble> = (0..n).map(|i| root_w[i].mul_f64(y[i])).collect();
    let qr = dd_qr::factor(scaled, rhs, tolerance);
    let (kept, aliased, pivot_of_kept) = split_by_rank(&qr.permutation, qr.rank);
    let z = dd_qr::back_substitute(&qr.r, &qr.qt_rhs);
    let b: Vec<DoubleDouble> = kept.iter().zip(&pivot_of_kept).map(|(&j, &pos)| z[pos].scale_pow2(scales[j])).collect();
    let kept_scales: Vec<f64> = kept.iter().map(|&j| scales[j]).collect();
    let residuals = residuals_dd(columns, &kept, &b, y);
    Solution {
        unscaled_covariance: unscaled_covariance(&qr.r, &pivot_of_kept, &kept_scales),
        weighted_rss: weighted_rss(&residuals, weights),
        residuals: residuals.iter().map(|r| r.to_f64()).collect(),
        coefficients: b.iter().map(|v| v.to_f64()).collect(),
        condition_number: condition_from_r(&qr.r),
        kept,
        aliased,
        method: SolverMethod::ExtendedQr,
    }
}

/// The blocked path for large designs: the weighted `[X | y]` is factored by
/// tall-skinny QR on all cores ([`tsqr`]), columns are equilibrated on the
/// small factor (`XS = Q(RS)` exactly, `S` a power-of-two diagonal), and the
/// rank-revealing column-pivoted QR runs in double-double on that `p × p`
/// factor alone — it sees the design's column norms and singular values, so it
/// names the same aliased columns as pivoting the whole design would. The
/// solution is refined with residuals in double-double and the corrected
/// seminormal equations `RᵀR d = Xᵀ W r` (Björck 1987, see
/// [`SEMINORMAL_CONDITION_LIMIT`]), since the blocked factorisation keeps no
/// `Q`. Returns `None` when the design is too ill-conditioned for that refinement.
fn solve_blocked(columns: &[DesignColumn], y: &[f64], weights: Option<&[f64]>, tolerance: f64) -> Option<Solution> {
    let n = y.len();
    let p = columns.len();
    let threads = tsqr::available_threads();
    let factor = match weights {
        None => tsqr::factor_rows(n, p + 1, threads, |i, j| if j < p { columns[j].hi[i] } else { y[i] }),
        Some(w) => {
            let root_w: Vec<f64> = w.iter().map(|&v| DoubleDouble::from(v).sqrt().to_f64()).collect();
            tsqr::factor_rows(n, p + 1, threads, |i, j| if j < p { columns[j].hi[i] } else { y[i] } * root_w[i])
        }
    };
    let small = SmallFactor::from_augmented(factor.r(), tolerance);
    if small.condition_number > SEMINORMAL_CONDITION_LIMIT {
        return None;
    }
    let mut b = small.solution();
    let rough_condition = small.rough_condition();
    let max_steps = if rough_condition < 1e5 { 1 } else { 3 };
    let mut steps = 0;
    let mut r = residuals_dd(columns, &small.kept, &b, y);
    for _ in 0..max_steps {
        // Xᵀ W r in double precision from the accurately computed residual.
        let weighted = weighted_residuals(&r, weights);
        let gradient = gradient(columns, &small.kept, &weighted);
        let delta = small.seminormal_correction(&gradient);
        let mut largest_change = 0.0f64;
        let mut largest = 0.0f64;
        for (bk, d) in b.iter_mut().zip(delta) {
            *bk += DoubleDouble::from(d);
            largest_change = largest_change.max(d.abs());
            largest = largest.max(bk.to_f64().abs());
        }
        steps += 1;
        r = residuals_dd(columns, &small.kept, &b, y);
        if largest_change <= f64::EPSILON * largest {
            break;
        }
    }
    Some(Solution {
        unscaled_covariance: small.unscaled_covariance(),
        weighted_rss: weighted_rss(&r, weights),
        residuals: r.iter().map(|v| v.to_f64()).collect(),
        coefficients: b.iter().map(|v| v.to_f64()).collect(),
        condition_number: small.condition_number,
        kept: small.kept,
        aliased: small.aliased,
        method: SolverMethod::RefinedQr { refinement_steps: steps },
    })
}

/// What the small factor of a tall-skinny QR gives: rank, aliased columns,
/// the solution and the unscaled covariance. Shared by the in-memory blocked
/// path and fits assembled from streamed or partitioned factors.
#[derive(Debug, Clone)]
pub(crate) struct SmallFactor {
    /// Power-of-two column scales (from the factor's column norms).
    scales: Vec<f64>,
    /// Double-double pivoted QR of the scaled factor of `X`, with `Qᵀz`.
    qr: dd_qr::PivotedQr,
    /// Design columns estimated, ascending.
    pub(crate) kept: Vec<usize>,
    /// Design columns aliased, ascending.
    pub(crate) aliased: Vec<usize>,
    /// Pivot position of each kept column.
    pivot_of_kept: Vec<usize>,
    /// Condition number of the equilibrated kept design.
    pub(crate) condition_number: f64,
}

impl SmallFactor {
    /// From the factor `R` of the weighted `[X | y]` (`p + 1` columns, target last).
    pub(crate) fn from_augmented(r: faer::MatRef<'_, f64>, tolerance: f64) -> SmallFactor {
        Self::from_augmented_entries(r.nrows(), r.ncols(), |i, j| DoubleDouble::from(r[(i, j)]), tolerance)
    }

    /// From the factor of the weighted `[X | y]` given entry by entry in
    /// double-double (`rows × width`, target last): a factor computed in
    /// double-double keeps its digits into the small QR.
    pub(crate) fn from_augmented_entries(
        rows: usize,
        width: usize,
        entry: impl Fn(usize, usize) -> DoubleDouble,
        tolerance: f64,
    ) -> SmallFactor {
        let p = width - 1;
        let scales: Vec<f64> =
            (0..p).map(|j| power_of_two_scale((0..rows).map(|i| entry(i, j).hi.powi(2)).sum::<f64>().sqrt())).collect();
        let scaled: Vec<Vec<DoubleDouble>> =
            (0..p).map(|j| (0..rows).map(|i| entry(i, j).scale_pow2(scales[j])).collect()).collect();
        let rhs: Vec<DoubleDouble> = (0..rows).map(|i| entry(i, p)).collect();
        let qr = dd_qr::factor(scaled, rhs, tolerance);
        let (kept, aliased, pivot_of_kept) = split_by_rank(&qr.permutation, qr.rank);
        let condition_number = condition_from_r(&qr.r);
        SmallFactor { scales, qr, kept, aliased, pivot_of_kept, condition_number }
    }

    /// The least-squares coefficients of the kept columns (original units).
    pub(crate) fn solution(&self) -> Vec<DoubleDouble> {
        let z = dd_qr::back_substitute(&self.qr.r, &self.qr.qt_rhs);
        self.kept.iter().zip(&self.pivot_of_kept).map(|(&j, &pos)| z[pos].scale_pow2(self.scales[j])).collect()
    }

    /// Ratio of the largest to the smallest `|R_kk|` (a cheap lower bound of κ).
    fn rough_condition(&self) -> f64 {
        let d = &self.qr.diagonal;
        d.iter().cloned().fold(0.0, f64::max) / d.iter().cloned().fold(f64::INFINITY, f64::min)
    }

    /// `d` solving `RᵀR d = g` for the gradient `g = Xᵀ W r` of the kept
    /// columns (original units, in `kept` order).
    pub(crate) fn seminormal_correction(&self, gradient: &[f64]) -> Vec<f64> {
        let rank = self.kept.len();
        let mut g = vec![DoubleDouble::ZERO; rank];
        for (k, (&j, &pos)) in self.kept.iter().zip(&self.pivot_of_kept).enumerate() {
            g[pos] = DoubleDouble::from(gradient[k]).scale_pow2(self.scales[j]);
        }
        let u = dd_qr::forward_substitute_transposed(&self.qr.r, &g);
        let d = dd_qr::back_substitute(&self.qr.r, &u);
        self.kept.iter().zip(&self.pivot_of_kept).map(|(&j, &pos)| d[pos].scale_pow2(self.scales[j]).to_f64()).collect()
    }

    /// `(XᵀWX)⁻¹` of the kept columns, in `kept` order and original units.
    pub(crate) fn unscaled_covariance(&self) -> Vec<Vec<f64>> {
        let kept_scales: Vec<f64> = self.kept.iter().map(|&j| self.scales[j]).collect();
        unscaled_covariance(&self.qr.r, &self.pivot_of_kept, &kept_scales)
    }
}

fn solve_double(columns: &[DesignColumn], y: &[f64], weights: Option<&[f64]>, tolerance: f64) -> Solution {
    let n = y.len();
    let root_w = root_weights(weights, n);
    let root_w_f64: Vec<f64> = root_w.iter().map(|v| v.to_f64()).collect();
    let scales = column_scales(columns, &root_w);
    let build = |set: &[usize]| {
        Mat::<f64>::from_fn(n, set.len(), |i, k| columns[set[k]].hi[i] * root_w_f64[i] * scales[set[k]])
    };

    // First pass: rank.
    let all: Vec<usize> = (0..columns.len()).collect();
    let mut a = build(&all);
    let mut qr = a.col_piv_qr();
    let diag_len = n.min(all.len());
    let r_first = qr.R();
    let r11 = r_first[(0, 0)].abs();
    let mut rank = 0;
    while rank < diag_len && r_first[(rank, rank)].abs() > tolerance * r11 && r_first[(rank, rank)] != 0.0 {
        rank += 1;
    }
    let forward: Vec<usize> = qr.P().arrays().0.to_vec();
    let (kept, aliased, _) = split_by_rank(&forward, rank);
    if rank < all.len() {
        a = build(&kept);
        qr = a.col_piv_qr();
    }
    let forward: Vec<usize> = qr.P().arrays().0.to_vec();
    let rhs = Mat::<f64>::from_fn(n, 1, |i, _| y[i] * root_w_f64[i]);
    let first = qr.solve_lstsq(&rhs);
    let mut b: Vec<DoubleDouble> =
        (0..kept.len()).map(|k| DoubleDouble::from(first[(k, 0)] * scales[kept[k]])).collect();

    // Iterative refinement with double-double residuals. A well-conditioned
    // problem is converged after one step; an ill-conditioned one gets up to three.
    let r_first = qr.R();
    let diagonal: Vec<f64> = (0..kept.len()).map(|k| r_first[(k, k)].abs()).collect();
    let rough_condition =
        diagonal.iter().cloned().fold(0.0, f64::max) / diagonal.iter().cloned().fold(f64::INFINITY, f64::min);
    let max_steps = if rough_condition < 1e5 { 1 } else { 3 };
    let mut steps = 0;
    let mut r = residuals_dd(columns, &kept, &b, y);
    for _ in 0..max_steps {
        let weighted = Mat::<f64>::from_fn(n, 1, |i, _| (r[i] * root_w[i]).to_f64());
        let delta = qr.solve_lstsq(&weighted);
        let mut largest_change = 0.0f64;
        let mut largest = 0.0f64;
        for k in 0..kept.len() {
            let d = delta[(k, 0)] * scales[kept[k]];
            b[k] += DoubleDouble::from(d);
            largest_change = largest_change.max(d.abs());
            largest = largest.max(b[k].to_f64().abs());
        }
        steps += 1;
        r = residuals_dd(columns, &kept, &b, y);
        if largest_change <= f64::EPSILON * largest {
            break;
        }
    }

    // Covariance from R of the kept columns.
    let rank = kept.len();
    let r_mat = qr.R();
    let r_dd: Vec<Vec<DoubleDouble>> = (0..rank)
        .map(|i| {
            (0..rank).map(|j| if j >= i { DoubleDouble::from(r_mat[(i, j)]) } else { DoubleDouble::ZERO }).collect()
        })
        .collect();
    // forward[pos] = index (within `kept`) of the column at pivot position pos.
    let pivot_of_kept: Vec<usize> = (0..rank).map(|k| forward.iter().position(|&x| x == k).unwrap_or(0)).collect();
    let kept_scales: Vec<f64> = kept.iter().map(|&j| scales[j]).collect();
    Solution {
        unscaled_covariance: unscaled_covariance(&r_dd, &pivot_of_kept, &kept_scales),
        weighted_rss: weighted_rss(&r, weights),
        residuals: r.iter().map(|v| v.to_f64()).collect(),
        coefficients: b.iter().map(|v| v.to_f64()).collect(),
        condition_number: condition_from_r(&r_dd),
        kept,
        aliased,
        method: SolverMethod::RefinedQr { refinement_steps: steps },
    }
}
