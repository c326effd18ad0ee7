//! The arithmetic of geographically weighted regression at every sale, for
//! one kernel and bandwidth (Fotheringham, Brunsdon & Charlton 2002, ch. 2).
//!
//! At regression point `i` with kernel weights `w_ij`:
//!
//! * `A_i = Σ_j w_ij x_j x_jᵀ`, `β̂_i = A_i⁻¹ Σ_j w_ij x_j y_j` (eq. 2.7);
//! * the hat matrix's row `S_ij = w_ij x_iᵀ A_i⁻¹ x_j`, so `ŷ_i = x_iᵀ β̂_i`,
//!   `S_ii = x_iᵀ A_i⁻¹ x_i` (`w_ii = 1`), and `Σ_j S_ij² = Σ_j w_ij² (x_jᵀ v_i)²`
//!   with `v_i = A_i⁻¹ x_i` — the traces `tr(S)` and `tr(SᵀS)` without ever
//!   holding an `n × n` matrix;
//! * `Var β̂_i = σ̂² A_i⁻¹ (Σ_j w_ij² x_j x_jᵀ) A_i⁻¹` (eq. 2.14, `C_i C_iᵀ σ̂²`);
//! * the local R², `1 − Σ_j w_ij (y_j − x_jᵀβ̂_i)² / Σ_j w_ij (y_j − ȳ_i)²`
//!   with `ȳ_i` the weighted mean.
//!
//! Points are shared out among threads in fixed chunks and results are
//! gathered in point order, so the sums are the same from run to run.
//!
//! For the bandwidth search with the adaptive bisquare, [`adaptive_aicc`]
//! scores many neighbour counts in one pass: with `u = d/r` the weight
//! `(1 − u²)² = 1 − 2u² + u⁴` splits `A_i` into `M₀ − 2M₂/r² + M₄/r⁴`, where
//! `M_p = Σ_j d_jᵖ x_j x_jᵀ` are running sums over the neighbours in order of
//! distance — so every count costs `O(k³)` once the sums reach it, instead
//! of a pass over its neighbours.

use super::kernel::{Bandwidth, Kernel};
use crate::error::{Error, Result};
use crate::numeric::parallel::over_chunks;
use crate::spatial::PlaceIndex;
use faer::linalg::solvers::Solve;
use faer::Mat;

/// The data of a local fit: the design rows, the target and the places.
pub(crate) struct LocalData<'a> {
    /// Design rows, `n × k`, row-major.
    pub rows: &'a [Vec<f64>],
    /// The target, one per row.
    pub target: &'a [f64],
    /// The sales' places, indexed.
    pub places: &'a PlaceIndex,
}

/// What one regression point gives.
#[derive(Debug, Clone)]
pub(crate) struct PointResult {
    /// `β̂_i`.
    pub coefficients: Vec<f64>,
    /// `ŷ_i`.
    pub fitted: f64,
    /// `S_ii`.
    pub leverage: f64,
    /// `Σ_j S_ij²`.
    pub hat_row_square: f64,
    /// `diag(A_i⁻¹ B_i A_i⁻¹)`, the coefficients' variances per unit σ².
    pub unscaled_variances: Vec<f64>,
    /// The local R².
    pub local_r_squared: f64,
}

/// Whole-fit quantities of one bandwidth.
#[derive(Debug, Clone)]
pub(crate) struct Totals {
    /// `Σ (y_i − ŷ_i)²`.
    pub rss: f64,
    /// `tr(S)`.
    pub trace_s: f64,
    /// `tr(SᵀS)`.
    pub trace_sts: f64,
}

/// The weights of regression point `(x, y)` as `(index, w)` pairs with
/// `w > 0` (or, for the fixed Gaussian, every sale).
pub(crate) fn kernel_weights(
    places: &PlaceIndex,
    x: f64,
    y: f64,
    kernel: Kernel,
    bandwidth: Bandwidth,
) -> Vec<(usize, f64)> {
    match (kernel, bandwidth) {
        (Kernel::AdaptiveBisquare, Bandwidth::Neighbours(count)) => {
            let nearest = places.nearest(x, y, count, None);
            let reach = nearest.last().map_or(0.0, |(d, _)| *d);
            nearest
                .into_iter()
                .filter_map(|(d, j)| {
                    let u = if reach > 0.0 { d / reach } else { 0.0 };
                    let w = (1.0 - u * u).powi(2);
                    (d < reach || reach == 0.0).then_some((j, w))
                })
                .collect()
        }
        (Kernel::FixedGaussian, Bandwidth::Distance(b)) => (0..places.len())
            .map(|j| {
                let u = places.distance(x, y, j) / b;
                (j, (-0.5 * u * u).exp())
            })
            .collect(),
        // The options type pairs each kernel with its bandwidth kind.
        _ => Vec::new(),
    }
}

/// `A⁻¹` of a symmetric positive definite `k × k` matrix by Cholesky, or
/// `None` when it is not positive definite (a singular local design).
fn spd_inverse(a: &Mat<f64>) -> Option<Mat<f64>> {
    let k = a.nrows();
    let llt = a.llt(faer::Side::Lower).ok()?;
    let inverse = llt.solve(Mat::<f64>::identity(k, k));
    let finite = (0..k).all(|p| (0..k).all(|q| inverse[(p, q)].is_finite()));
    finite.then_some(inverse)
}

/// The local regression at place `(x, y)`: `β̂`, `A⁻¹` and the kernel
/// weights, or `None` when the local design is singular.
pub(crate) fn regress_at(
    data: &LocalData,
    x: f64,
    y: f64,
    kernel: Kernel,
    bandwidth: Bandwidth,
) -> Option<LocalRegression> {
    let k = data.rows.first().map_or(0, Vec::len);
    let weights = kernel_weights(data.places, x, y, kernel, bandwidth);
    let mut a = Mat::<f64>::zeros(k, k);
    let mut c = vec![0.0; k];
    for &(j, w) in &weights {
        let row = &data.rows[j];
        for p in 0..k {
            let wp = w * row[p];
            c[p] += wp * data.target[j];
            for q in 0..=p {
                a[(p, q)] += wp * row[q];
            }
        }
    }
    for p in 0..k {
        for q in 0..p {
            a[(q, p)] = a[(p, q)];
        }
    }
    let inverse = spd_inverse(&a)?;
    let beta: Vec<f64> = (0..k).map(|p| (0..k).map(|q| inverse[(p, q)] * c[q]).sum()).collect();
    Some(LocalRegression { coefficients: beta, inverse, weights })
}

/// One local regression: `β̂`, `A⁻¹` and the kernel weights `(j, w_ij)`.
pub(crate) struct LocalRegression {
    pub coefficients: Vec<f64>,
    pub inverse: Mat<f64>,
    pub weights: Vec<(usize, f64)>,
}

/// The local model's estimate at place `(x, y)` for design row `row`, and
/// `rowᵀ A⁻¹ B A⁻¹ row` (its variance per unit σ², `B = Σ_j w_j² x_j x_jᵀ`);
/// `None` when the local design is singular.
pub(crate) fn estimate_at(
    data: &LocalData,
    x: f64,
    y: f64,
    row: &[f64],
    kernel: Kernel,
    bandwidth: Bandwidth,
) -> Option<(f64, f64)> {
    let LocalRegression { coefficients, inverse, weights } = regress_at(data, x, y, kernel, bandwidth)?;
    let k = coefficients.len();
    let v: Vec<f64> = (0..k).map(|p| (0..k).map(|q| inverse[(p, q)] * row[q]).sum()).collect();
    // rowᵀ A⁻¹ B A⁻¹ row = Σ_j w_j² (x_jᵀ v)².
    let variance = weights
        .iter()
        .map(|&(j, w)| {
            let s: f64 = (0..k).map(|p| data.rows[j][p] * v[p]).sum();
            w * w * s * s
        })
        .sum();
    Some(((0..k).map(|p| row[p] * coefficients[p]).sum(), variance))
}

/// Everything at sale `i` (see the module docs); `None` when its local design is singular.
fn at_sale(data: &LocalData, i: usize, kernel: Kernel, bandwidth: Bandwidth, full: bool) -> Option<PointResult> {
    let (x, y) = data.places.place(i);
    let LocalRegression { coefficients: beta, inverse, weights } = regress_at(data, x, y, kernel, bandwidth)?;
    let k = beta.len();
    let xi = &data.rows[i];
    let v: Vec<f64> = (0..k).map(|p| (0..k).map(|q| inverse[(p, q)] * xi[q]).sum()).collect();
    let leverage: f64 = (0..k).map(|p| xi[p] * v[p]).sum();
    let fitted: f64 = (0..k).map(|p| xi[p] * beta[p]).sum();
    let mut hat_row_square = 0.0;
    let mut unscaled_variances = Vec::new();
    let mut local_r_squared = f64::NAN;
    if full {
        let mut b = Mat::<f64>::zeros(k, k);
        let (mut sw, mut swy) = (0.0, 0.0);
        for &(j, w) in &weights {
            let row = &data.rows[j];
            let s: f64 = (0..k).map(|p| row[p] * v[p]).sum::<f64>() * w;
            hat_row_square += s * s;
            for p in 0..k {
                for q in 0..=p {
                    b[(p, q)] += w * w * row[p] * row[q];
                }
            }
            sw += w;
            swy += w * data.target[j];
        }
        for p in 0..k {
            for q in 0..p {
                b[(q, p)] = b[(p, q)];
            }
        }
        let sandwich = &inverse * &b * &inverse;
        unscaled_variances = (0..k).map(|p| sandwich[(p, p)]).collect();
        let mean = swy / sw;
        let (mut local_rss, mut local_tss) = (0.0, 0.0);
        for &(j, w) in &weights {
            let row = &data.rows[j];
            let e = data.target[j] - (0..k).map(|p| row[p] * beta[p]).sum::<f64>();
            local_rss += w * e * e;
            local_tss += w * (data.target[j] - mean).powi(2);
        }
        local_r_squared = 1.0 - local_rss / local_tss;
    }
    Some(PointResult { coefficients: beta, fitted, leverage, hat_row_square, unscaled_variances, local_r_squared })
}

/// The local regression at every sale (on all cores), or the first sale
/// whose local design is singular.
pub(crate) fn at_every_sale(
    data: &LocalData,
    kernel: Kernel,
    bandwidth: Bandwidth,
    full: bool,
) -> std::result::Result<Vec<PointResult>, usize> {
    let n = data.target.len();
    let parts = over_chunks(n, |range| -> std::result::Result<Vec<PointResult>, usize> {
        range.map(|i| at_sale(data, i, kernel, bandwidth, full).ok_or(i)).collect()
    });
    let mut out = Vec::with_capacity(n);
    for part in parts {
        out.extend(part?);
    }
    Ok(out)
}

/// The totals of a set of point results.
pub(crate) fn totals(data: &LocalData, points: &[PointResult]) -> Totals {
    let rss = points.iter().zip(data.target).map(|(p, y)| (y - p.fitted).powi(2)).sum();
    let trace_s = points.iter().map(|p| p.leverage).sum();
    let trace_sts = points.iter().map(|p| p.hat_row_square).sum();
    Totals { rss, trace_s, trace_sts }
}

/// AICc of a fit with `n` rows, residual sum of squares `rss` and hat-matrix
/// trace `trace_s` (Fotheringham et al. 2002, eq. 2.33; Hurvich, Simonoff &
/// Tsai 1998): `2n ln σ̂ + n ln 2π + n (n + tr S)/(n − 2 − tr S)` with
/// `σ̂ = √(RSS/n)`. Infinite when `tr S ≥ n − 2`.
pub(crate) fn aicc(n: usize, rss: f64, trace_s: f64) -> f64 {
    let n = n as f64;
    if trace_s >= n - 2.0 {
        return f64::INFINITY;
    }
    2.0 * n * (rss / n).sqrt().ln() + n * (2.0 * std::f64::consts::PI).ln() + n * (n + trace_s) / (n - 2.0 - trace_s)
}

/// The error for a singular local design at the place of 0-based data row `row`.
pub(crate) fn singular_at(row: usize, bandwidth: Bandwidth) -> Error {
    Error::Specification(format!(
        "the local design at the place of data row {} is singular with {}: too few neighbours, or a term (such as \
         a category's level) that does not vary among them; widen the bandwidth or leave the term out",
        row + 1,
        bandwidth.describe()
    ))
}

/// Result check, used by callers that need every point; `frame_row` maps a
/// sale's index to its 0-based data row, for the message.
pub(crate) fn require_all(
    result: std::result::Result<Vec<PointResult>, usize>,
    bandwidth: Bandwidth,
    frame_row: impl Fn(usize) -> usize,
) -> Result<Vec<PointResult>> {
    result.map_err(|i| singular_at(frame_row(i), bandwidth))
}

/// `a` (`k × k`, row-major, symmetric) factored in place by Cholesky, then
/// solved for each right-hand side in `rhs`; false when not positive definite.
fn cholesky_solve(a: &mut [f64], k: usize, rhs: &mut [&mut [f64]]) -> bool {
    for j in 0..k {
        let mut diagonal = a[j * k + j];
        for p in 0..j {
            diagonal -= a[j * k + p] * a[j * k + p];
        }
        if !(diagonal > 0.0) || !diagonal.is_finite() {
            return false;
        }
        let root = diagonal.sqrt();
        a[j * k + j] = root;
        for i in j + 1..k {
            let mut value = a[i * k + j];
            for p in 0..j {
                value -= a[i * k + p] * a[j * k + p];
            }
            a[i * k + j] = value / root;
        }
    }
    for b in rhs.iter_mut() {
        for i in 0..k {
            let mut value = b[i];
            for p in 0..i {
                value -= a[i * k + p] * b[p];
            }
            b[i] = value / a[i * k + i];
        }
        for i in (0..k).rev() {
            let mut value = b[i];
            for p in i + 1..k {
                value -= a[p * k + i] * b[p];
            }
            b[i] = value / a[i * k + i];
        }
    }
    true
}

/// AICc of the adaptive bisquare fit at each neighbour count of `counts`
/// (ascending, each ≥ 2), in one pass over every sale's neighbours (see the
/// module docs); infinite where some local design is singular.
pub(crate) fn adaptive_aicc(data: &LocalData, counts: &[usize]) -> Vec<f64> {
    let n = data.target.len();
    let k = data.rows.first().map_or(0, Vec::len);
    let most = counts.iter().copied().max().unwrap_or(0).min(n);
    // Per count: (RSS, tr S, singular somewhere).
    let work = |range: std::ops::Range<usize>| -> Vec<(f64, f64, bool)> {
        let mut sums = vec![(0.0, 0.0, false); counts.len()];
        let (mut m0, mut m2, mut m4) = (vec![0.0; k * k], vec![0.0; k * k], vec![0.0; k * k]);
        let (mut c0, mut c2, mut c4) = (vec![0.0; k], vec![0.0; k], vec![0.0; k]);
        let mut a = vec![0.0; k * k];
        let (mut beta, mut v) = (vec![0.0; k], vec![0.0; k]);
        for i in range {
            let (x, y) = data.places.place(i);
            let neighbours = data.places.nearest(x, y, most, None);
            for buffer in [&mut m0, &mut m2, &mut m4, &mut c0, &mut c2, &mut c4] {
                buffer.iter_mut().for_each(|value| *value = 0.0);
            }
            let mut taken = 0;
            for (slot, &count) in counts.iter().enumerate() {
                if count > neighbours.len() || count < 2 {
                    sums[slot].2 = true;
                    continue;
                }
                // The sums over the neighbours nearer than the count-th.
                while taken < count - 1 {
                    let (d, j) = neighbours[taken];
                    let (d2, row, target) = (d * d, &data.rows[j], data.target[j]);
                    for p in 0..k {
                        let (xp, xpy) = (row[p], row[p] * target);
                        c0[p] += xpy;
                        c2[p] += d2 * xpy;
                        c4[p] += d2 * d2 * xpy;
                        for q in 0..=p {
                            let product = xp * row[q];
                            m0[p * k + q] += product;
                            m2[p * k + q] += d2 * product;
                            m4[p * k + q] += d2 * d2 * product;
                        }
                    }
                    taken += 1;
                }
                let reach = neighbours[count - 1].0;
                if !(reach > 0.0) {
                    sums[slot].2 = true;
                    continue;
                }
                let (s2, s4) = (2.0 / (reach * reach), 1.0 / (reach * reach * reach * reach));
                for p in 0..k {
                    beta[p] = c0[p] - s2 * c2[p] + s4 * c4[p];
                    v[p] = data.rows[i][p];
                    for q in 0..=p {
                        let value = m0[p * k + q] - s2 * m2[p * k + q] + s4 * m4[p * k + q];
                        a[p * k + q] = value;
                        a[q * k + p] = value;
                    }
                }
                if !cholesky_solve(&mut a, k, &mut [&mut beta, &mut v]) {
                    sums[slot].2 = true;
                    continue;
                }
                let xi = &data.rows[i];
                let fitted: f64 = (0..k).map(|p| xi[p] * beta[p]).sum();
                let leverage: f64 = (0..k).map(|p| xi[p] * v[p]).sum();
                sums[slot].0 += (data.target[i] - fitted).powi(2);
                sums[slot].1 += leverage;
            }
        }
        sums
    };
    let parts = over_chunks(n, work);
    (0..counts.len())
        .map(|slot| {
            let (mut rss, mut trace, mut singular) = (0.0, 0.0, false);
            for part in &parts {
                rss += part[slot].0;
                trace += part[slot].1;
                singular |= part[slot].2;
            }
            if singular {
                f64::INFINITY
            } else {
                aicc(n, rss, trace)
            }
        })
        .collect()
}
