//! Exact column equilibration.
//!
//! Scaling every design column to unit Euclidean length before factoring makes
//! the numerical-rank decision independent of the units a column is measured
//! in (square feet or square metres) and improves the conditioning that the
//! factorization sees (van der Sluis 1969, "Condition numbers and
//! equilibration of matrices", *Numer. Math.* 14, 14–23). We round each scale
//! to a power of two, so multiplying by it is exact: equilibration changes no
//! digit of the data, only its exponent.

/// The power of two closest to `1 / norm`, or `1.0` when the norm is zero or
/// not finite (such a column is then caught by the rank test).
pub fn power_of_two_scale(norm: f64) -> f64 {
    if !(norm.is_finite() && norm > 0.0) {
        return 1.0;
    }
    let exponent = -norm.log2().round();
    2f64.powi(exponent.clamp(-1000.0, 1000.0) as i32)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_is_exact_power_of_two() {
        let s = power_of_two_scale(1234.5);
        assert_eq!(s.log2().fract(), 0.0);
        assert!((1234.5 * s - 1.0).abs() < 0.5);
        assert_eq!(power_of_two_scale(0.0), 1.0);
    }
}
