//! Tall-skinny QR: the triangular factor of a tall matrix, built block by block.
//!
//! For an `n × w` matrix `A` with `n ≫ w`, least squares needs only the
//! `w × w` factor `R` of `A = QR` (with the target as the last column of `A`,
//! the last column of `R` holds `Qᵀy` and its corner the residual norm). `R`
//! can be built from row blocks: if `[R₁; A₂] = Q₂ R₂` then `R₂` is the factor
//! of `[A₁; A₂]`, because `Q = diag(Q₁, I) Q₂` is orthogonal. So a factor is
//! *absorbed* block by block, and two factors of disjoint row sets *merge* by
//! factoring their stacked `R`s. The order of merging changes only rounding:
//! each step is a backward-stable Householder QR, so any tree of merges is
//! backward stable (Demmel, Grigori, Hoemmen & Langou 2012,
//! "Communication-optimal parallel and sequential QR and LU factorizations",
//! *SIAM J. Sci. Comput.* 34(1), A206–A239, §3; the merge is their TSQR
//! reduction).
//!
//! That makes one algorithm serve three uses: a fit of an in-memory design
//! split across threads, a fit streamed from files larger than memory, and
//! partitions factored on different machines and merged. What travels between
//! them is `w²` numbers per partition, independent of its rows.
//!
//! Each step is faer's blocked, unpivoted Householder QR in `f64`. Column
//! pivoting (for the numerical rank) is done afterwards on the small factor,
//! which has the same column norms and singular values as `A`.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::qr::no_pivoting::factor::{qr_in_place, qr_in_place_scratch, recommended_block_size};
use faer::{Mat, MatMut, MatRef, Par};

/// Rows per block when an in-memory matrix is absorbed: large enough for the
/// blocked Householder kernels, small enough that a block of a few dozen
/// columns stays in a core's cache.
pub const BLOCK_ROWS: usize = 2048;

/// The triangular factor `R` of the rows absorbed so far (see the module docs).
#[derive(Debug, Clone, PartialEq)]
pub struct TallSkinnyQr {
    /// Upper trapezoidal, `min(rows, width) × width`.
    r: Mat<f64>,
    /// Rows absorbed.
    rows: u64,
}

impl TallSkinnyQr {
    /// The factor of no rows, for matrices of `width` columns.
    pub fn new(width: usize) -> Self {
        Self { r: Mat::zeros(0, width), rows: 0 }
    }

    /// Columns of the factored matrix.
    pub fn width(&self) -> usize {
        self.r.ncols()
    }

    /// Rows absorbed so far.
    pub fn rows(&self) -> u64 {
        self.rows
    }

    /// The factor `R`: upper trapezoidal, `min(rows, width) × width`. Its
    /// diagonal may carry either sign.
    pub fn r(&self) -> MatRef<'_, f64> {
        self.r.as_ref()
    }

    /// A factor from its parts, as [`Self::r`] and [`Self::rows`] gave them
    /// (a factor read back from another process). `None` unless `r` has
    /// `min(rows, width)` rows and is zero below its diagonal.
    pub fn from_parts(r: Mat<f64>, rows: u64) -> Option<Self> {
        let expected = (r.ncols() as u64).min(rows) as usize;
        let trapezoidal = (0..r.nrows()).all(|i| (0..i.min(r.ncols())).all(|j| r[(i, j)] == 0.0));
        (r.nrows() == expected && trapezoidal).then_some(Self { r, rows })
    }

    /// Absorbs `count` new rows, which `fill` writes into the `count × width`
    /// block it is given (column-major; every entry must be written).
    pub fn absorb_rows(&mut self, count: usize, fill: impl FnOnce(MatMut<'_, f64>)) {
        if count == 0 {
            return;
        }
        let width = self.width();
        let held = self.r.nrows();
        let mut stacked = Mat::<f64>::zeros(held + count, width);
        stacked.as_mut().subrows_mut(0, held).copy_from(self.r.as_ref());
        fill(stacked.as_mut().subrows_mut(held, count));
        self.r = factor_in_place(stacked);
        self.rows += count as u64;
    }

    /// Absorbs the rows of `block` (`width` columns).
    pub fn absorb(&mut self, block: MatRef<'_, f64>) {
        assert_eq!(block.ncols(), self.width(), "a block must have the factor's width");
        self.absorb_rows(block.nrows(), |mut target| target.copy_from(block));
    }

    /// The factor of the union of both row sets.
    pub fn merge(mut self, other: &TallSkinnyQr) -> TallSkinnyQr {
        let other_rows = other.rows;
        self.absorb(other.r.as_ref());
        self.rows = self.rows - other.r.nrows() as u64 + other_rows;
        self
    }

    /// Merges factors pairwise in a binary tree (the TSQR reduction): `⌈log₂ k⌉`
    /// levels, each merge of two `w × w` factors. `None` for an empty list.
    pub fn merge_tree(factors: Vec<TallSkinnyQr>) -> Option<TallSkinnyQr> {
        merge_pairwise(factors, |left, right| left.merge(&right))
    }
}

/// Reduces `items` in a binary tree — neighbours merged pairwise, level by
/// level, `⌈log₂ k⌉` levels — the reduction of TSQR (Demmel et al. 2012),
/// for any mergeable state. `None` for an empty list.
pub fn merge_pairwise<T>(mut items: Vec<T>, merge: impl Fn(T, T) -> T) -> Option<T> {
    while items.len() > 1 {
        let mut next = Vec::with_capacity(items.len().div_ceil(2));
        let mut pairs = items.into_iter();
        while let Some(left) = pairs.next() {
            next.push(match pairs.next() {
                Some(right) => merge(left, right),
                None => left,
            });
        }
        items = next;
    }
    items.pop()
}

/// Householder QR of `a` in place; returns its `R` (trapezoidal part).
fn factor_in_place(mut a: Mat<f64>) -> Mat<f64> {
    let (m, n) = a.shape();
    let size = m.min(n);
    let block = recommended_block_size::<f64>(m, n);
    let mut householder = Mat::<f64>::zeros(block, size);
    let mut scratch = MemBuffer::new(qr_in_place_scratch::<f64>(m, n, block, Par::Seq, Default::default()));
    qr_in_place(a.as_mut(), householder.as_mut(), Par::Seq, MemStack::new(&mut scratch), Default::default());
    Mat::from_fn(size, n, |i, j| if j >= i { a[(i, j)] } else { 0.0 })
}

/// Factors the `n × width` matrix whose entry `(i, j)` is `entry(i, j)`, in
/// blocks of [`BLOCK_ROWS`] rows on up to `threads` threads (contiguous row
/// ranges, one factor each, merged in a tree).
pub fn factor_rows(n: usize, width: usize, threads: usize, entry: impl Fn(usize, usize) -> f64 + Sync) -> TallSkinnyQr {
    factor_blocks(n, width, threads, |mut block, first| {
        for j in 0..width {
            for i in 0..block.nrows() {
                block[(i, j)] = entry(first + i, j);
            }
        }
    })
}

/// Factors the matrix whose columns are `columns` (all of one length), as
/// [`factor_rows`] does, copying each block's part of a column as one slice:
/// the same factor, bit for bit, without a call per entry.
pub fn factor_columns(columns: &[&[f64]], threads: usize) -> TallSkinnyQr {
    let n = columns.first().map_or(0, |c| c.len());
    assert!(columns.iter().all(|c| c.len() == n), "every column of a factor must have the same length");
    factor_blocks(n, columns.len(), threads, |mut block, first| {
        let count = block.nrows();
        for (j, column) in columns.iter().enumerate() {
            let part = &column[first..first + count];
            match block.as_mut().col_mut(j).try_as_col_major_mut() {
                Some(target) => target.as_slice_mut().copy_from_slice(part),
                None => part.iter().enumerate().for_each(|(i, &v)| block[(i, j)] = v),
            }
        }
    })
}

/// The blocked, threaded factorisation behind [`factor_rows`] and
/// [`factor_columns`]: `fill(block, first)` writes rows `first..` into each
/// block.
fn factor_blocks(n: usize, width: usize, threads: usize, fill: impl Fn(MatMut<'_, f64>, usize) + Sync) -> TallSkinnyQr {
    let threads = threads.clamp(1, n.div_ceil(BLOCK_ROWS).max(1));
    let chunk = n.div_ceil(threads);
    let factor_range = |start: usize, end: usize| {
        let mut factor = TallSkinnyQr::new(width);
        let mut row = start;
        while row < end {
            let count = BLOCK_ROWS.min(end - row);
            factor.absorb_rows(count, |block| fill(block, row));
            row += count;
        }
        factor
    };
    let factors: Vec<TallSkinnyQr> = if threads == 1 {
        vec![factor_range(0, n)]
    } else {
        std::thread::scope(|scope| {
            let handles: Vec<_> = (0..threads)
                .map(|t| {
                    let (start, end) = (t * chunk, ((t + 1) * chunk).min(n));
                    let work = &factor_range;
                    scope.spawn(move || work(start, end))
                })
                .collect();
            // A panic in a worker is a bug in this module; re-raise it here.
            handles.into_iter().map(|h| h.join().unwrap_or_else(|e| std::panic::resume_unwind(e))).collect()
        })
    };
    TallSkinnyQr::merge_tree(factors).unwrap_or_else(|| TallSkinnyQr::new(width))
}

/// Threads worth using for a factorisation on this machine.
pub use super::parallel::available_threads;

#[cfg(test)]
mod tests {
    use super::*;

    /// `RᵀR` equals `AᵀA` (the Gram matrix is invariant under any orthogonal Q).
    fn gram(m: MatRef<'_, f64>) -> Mat<f64> {
        m.transpose() * m
    }

    fn sample(n: usize, w: usize) -> Mat<f64> {
        Mat::from_fn(n, w, |i, j| ((i * 7 + j * 13) % 17) as f64 - 8.0 + (i as f64).sqrt() * (j as f64 + 1.0))
    }

    #[test]
    fn factoring_columns_gives_the_factor_of_rows_bit_for_bit() {
        let a = sample(5000, 6);
        let columns: Vec<Vec<f64>> = (0..6).map(|j| (0..5000).map(|i| a[(i, j)]).collect()).collect();
        let slices: Vec<&[f64]> = columns.iter().map(Vec::as_slice).collect();
        for threads in [1, 3] {
            assert_eq!(factor_columns(&slices, threads), factor_rows(5000, 6, threads, |i, j| a[(i, j)]));
        }
    }

    #[test]
    fn blocked_factor_has_the_gram_matrix_of_the_data() {
        let a = sample(5000, 6);
        let factor = factor_rows(5000, 6, 3, |i, j| a[(i, j)]);
        assert_eq!(factor.rows(), 5000);
        let (g, h) = (gram(a.as_ref()), gram(factor.r()));
        for i in 0..6 {
            for j in 0..6 {
                assert!((g[(i, j)] - h[(i, j)]).abs() <= 1e-12 * g[(i, i)].max(g[(j, j)]), "{i},{j}");
            }
        }
    }

    #[test]
    fn fewer_rows_than_columns_give_a_trapezoid_and_merge_counts_rows() {
        let a = sample(3, 5);
        let mut left = TallSkinnyQr::new(5);
        left.absorb(a.as_ref().subrows(0, 2));
        let mut right = TallSkinnyQr::new(5);
        right.absorb(a.as_ref().subrows(2, 1));
        assert_eq!(left.r().nrows(), 2);
        let merged = left.merge(&right);
        assert_eq!((merged.rows(), merged.r().nrows()), (3, 3));
        assert!(TallSkinnyQr::merge_tree(Vec::new()).is_none());
    }
}
