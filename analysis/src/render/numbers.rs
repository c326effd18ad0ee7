//! Number formatting shared by every report.

/// `value` with `digits` significant digits, in positional notation for
/// magnitudes in [1e-4, 1e9) and scientific notation otherwise.
pub fn format_significant(value: f64, digits: usize) -> String {
    if !value.is_finite() {
        return if value.is_nan() {
            "—".into()
        } else if value > 0.0 {
            "∞".into()
        } else {
            "−∞".into()
        };
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

/// A count with digit groups of three: `3,000`, `1,250,000`.
pub fn format_count(n: usize) -> String {
    crate::grouping::group_digits(n as u64)
}

/// An amount of money in whole units with digit groups (`412,300`,
/// `−8,100`, a true minus sign); beyond 10¹⁵ in significant digits, and `—`
/// when not finite. Shared by the valuation checks and the appeal pages.
pub(crate) fn format_money(amount: f64) -> String {
    if !amount.is_finite() {
        return "—".into();
    }
    let rounded = amount.round();
    if rounded.abs() >= 1e15 {
        return format_significant(amount, 4);
    }
    let sign = if rounded < 0.0 { "−" } else { "" };
    format!("{sign}{}", crate::grouping::group_digits(rounded.abs() as u64))
}

/// Like [`format_significant`], without trailing zeros after the decimal
/// point (`1870`, `83.5`), for tables where values of one column differ in scale.
pub fn format_trimmed(value: f64, digits: usize) -> String {
    let text = format_significant(value, digits);
    if text.contains('.') && !text.contains('e') {
        text.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        text
    }
}

/// Formats a column of numbers with one shared number of decimals: the fewest
/// that show every value to `digits` significant digits (at most 6 decimals).
pub fn format_column(values: &[f64], digits: usize) -> Vec<String> {
    let decimals = values
        .iter()
        .filter(|v| v.is_finite() && **v != 0.0)
        .map(|v| {
            let text = format_trimmed(*v, digits);
            if text.contains('e') {
                0
            } else {
                text.split_once('.').map_or(0, |(_, d)| d.len())
            }
        })
        .max()
        .unwrap_or(0)
        .min(6);
    values
        .iter()
        .map(|v| {
            let magnitude = if *v == 0.0 { 0.0 } else { v.abs().log10() };
            if !v.is_finite() || magnitude >= 12.0 || (magnitude < -4.0 && *v != 0.0) {
                format_significant(*v, digits)
            } else {
                format!("{v:.decimals$}")
            }
        })
        .collect()
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
        assert_eq!(format_count(0), "0");
        assert_eq!(format_count(999), "999");
        assert_eq!(format_count(3000), "3,000");
        assert_eq!(format_count(1_250_000), "1,250,000");
    }
}
