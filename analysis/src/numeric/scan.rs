//! Whole-slice tests of `f64` values that run at memory speed.
//!
//! `slice.iter().any(..)` stops at the first hit, and that early exit keeps
//! the compiler from vectorising the loop: on the clean columns of a large
//! fit (the common case: no hit at all) it runs one value per step. These
//! tests look at fixed chunks without an exit inside a chunk, which the
//! compiler turns into SIMD compares, and stop between chunks.

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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_a_hit_anywhere_and_none_in_clean_values() {
        for length in [0, 1, 255, 256, 257, 1000] {
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
