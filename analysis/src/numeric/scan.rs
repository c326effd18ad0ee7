//! Whole-slice tests and extremes of `f64` values that run at memory speed.
//!
//! `slice.iter().any(..)` stops at the first hit, and that early exit keeps
//! the compiler from vectorising the loop: on the clean columns of a large
//! fit (the common case: no hit at all) it runs one value per step. These
//! tests look at fixed chunks without an exit inside a chunk, which the
//! compiler turns into SIMD compares, and stop between chunks. Likewise a
//! running `f64::min` is one chain of dependent steps; [`min_max`] keeps
//! independent lanes that the compiler vectorises.

/// Values per chunk: long enough to vectorise, short enough to stop soon
/// after a hit.
const CHUNK: usize = 256;

fn any_in_chunks(values: &[f64], hit: impl Fn(f64) -> bool + Copy) -> bool {
    values.chunks(CHUNK).any(|chunk| chunk.iter().fold(false, |found, &v| found | hit(v)))
}

/// Whether any value is NaN or infinite.
pub fn any_non_finite(values: &[f64]) -> bool {
    any_in_chunks(values, |v| !v.is_finite())
}

/// Whether any value is NaN (the mark of a missing number in our columns).
pub fn any_nan(values: &[f64]) -> bool {
    any_in_chunks(values, f64::is_nan)
}

/// Lanes of [`min_max`]: independent running extremes, one SIMD register's
/// worth or two.
const LANES: usize = 8;

/// The least and greatest of `values`, ignoring NaN (as a chain of
/// `f64::min` / `f64::max` does); `(+inf, -inf)` when there is none.
pub fn min_max(values: &[f64]) -> (f64, f64) {
    let mut low = [f64::INFINITY; LANES];
    let mut high = [f64::NEG_INFINITY; LANES];
    let chunks = values.chunks_exact(LANES);
    let tail = chunks.remainder();
    for chunk in chunks {
        for lane in 0..LANES {
            // Comparisons with NaN are false: a NaN never replaces a value.
            let v = chunk[lane];
            low[lane] = if v < low[lane] { v } else { low[lane] };
            high[lane] = if v > high[lane] { v } else { high[lane] };
        }
    }
    let fold = |acc: (f64, f64), &v: &f64| (acc.0.min(v), acc.1.max(v));
    let lanes = low
        .iter()
        .zip(&high)
        .fold((f64::INFINITY, f64::NEG_INFINITY), |acc, (&lo, &hi)| (acc.0.min(lo), acc.1.max(hi)));
    tail.iter().fold(lanes, fold)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extremes_equal_a_chain_of_min_and_max() {
        for length in [0_usize, 1, 7, 8, 9, 100, 1001] {
            let mut values: Vec<f64> = (0..length).map(|i| ((i * 7919) % 1013) as f64 - 500.25).collect();
            if length > 3 {
                values[length / 3] = f64::NAN;
            }
            let chain = values.iter().fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &v| (lo.min(v), hi.max(v)));
            assert_eq!(min_max(&values), chain, "{length} values");
        }
    }

    #[test]
    fn finds_a_hit_anywhere_and_none_in_clean_values() {
        for length in [0_usize, 1, 255, 256, 257, 1000] {
            let clean: Vec<f64> = (0..length).map(|i| i as f64 - 3.5).collect();
            assert!(!any_non_finite(&clean) && !any_nan(&clean));
            for at in [0, length / 2, length.saturating_sub(1)].into_iter().filter(|&at| at < length) {
                for bad in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
                    let mut values = clean.clone();
                    values[at] = bad;
                    assert!(any_non_finite(&values));
                    assert_eq!(any_nan(&values), bad.is_nan());
                }
            }
        }
    }
}
