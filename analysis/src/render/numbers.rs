//! Number formatting shared by every report.

/// `value` with `digits` significant digits, in positional notation for
/// magnitudes in [1e-4, 1e9) and scientific notation otherwise.
pub fn format_significant(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return if value.is_nan() { "—".into() } else if value > 0.0 { "∞".into() } else { "−∞".into() };
    }
    if value == 0.0 {
        return "0".into();
    }
    let magnitude = value.abs().log10().floor() as i32;
    if (-4..9).contains(&magnitude) {
        let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
        format!("{value:.decimals$}")
    } else {
        format!("{value:.prec$e}", prec = digits.saturating_sub(1))
    }
}

/// A p-value for reading: four significant digits, or `< 1e-16` below what
/// double precision distinguishes from zero in a two-sided test.
pub fn format_p_value(p: Option<f64>) -> String {
    match p {
        None => "—".into(),
        Some(p) if p < 1e-16 => "< 1e-16".into(),
        Some(p) => format_significant(p, 4),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits() {
        assert_eq!(format_significant(1234.5678, 6), "1234.57");
        assert_eq!(format_significant(0.000123456, 3), "0.000123");
        assert_eq!(format_significant(1.5e12, 3), "1.50e12");
        assert_eq!(format_p_value(Some(1e-300)), "< 1e-16");
    }
}
