//! The Plumbline chart theme: palette, type and tick labels.
//!
//! A deep slate for ink, a terracotta accent for fitted lines and highlights,
//! a muted teal for uncertainty bands, and a pale blue-grey grid: readable on
//! the white chart background in light and dark notebook themes alike.

use plotters::style::RGBColor;

/// Text and axis ink.
pub const INK: RGBColor = RGBColor(0x22, 0x2b, 0x3a);
/// Fitted lines, smoothers, highlights.
pub const ACCENT: RGBColor = RGBColor(0xc2, 0x4e, 0x2f);
/// Data points.
pub const POINT: RGBColor = RGBColor(0x3d, 0x5a, 0x80);
/// Confidence bands.
pub const BAND: RGBColor = RGBColor(0x5f, 0x9e, 0xa0);
/// Prediction bands and reference lines.
pub const SOFT: RGBColor = RGBColor(0x9a, 0xa8, 0xb8);
/// Grid lines.
pub const GRID: RGBColor = RGBColor(0xe4, 0xe8, 0xee);
/// Chart background.
pub const PAPER: RGBColor = RGBColor(0xff, 0xff, 0xff);
/// Font family for every label.
pub const FONT: &str = "sans-serif";

/// Tick label: thousands separators for large numbers, trimmed decimals for
/// small ones, scientific notation beyond what a tick can show.
pub fn format_tick(value: f64) -> String {
    if value == 0.0 || !value.is_finite() {
        return if value.is_finite() { "0".into() } else { String::new() };
    }
    let magnitude = value.abs();
    if !(1e-4..1e9).contains(&magnitude) {
        return format!("{value:.1e}");
    }
    if magnitude >= 1000.0 {
        let rounded = value.round() as i64;
        let grouped = crate::grouping::group_digits(rounded.unsigned_abs());
        return if rounded < 0 { format!("−{grouped}") } else { grouped };
    }
    let decimals = (3 - magnitude.log10().floor() as i32).clamp(0, 6) as usize;
    let text = format!("{value:.decimals$}");
    let text = if text.contains('.') { text.trim_end_matches('0').trim_end_matches('.').to_string() } else { text };
    text.replacen('-', "−", 1)
}

#[cfg(test)]
mod tests {
    use super::format_tick;

    #[test]
    fn ticks_read_well() {
        assert_eq!(format_tick(1234567.0), "1,234,567");
        assert_eq!(format_tick(-2500.0), "−2,500");
        assert_eq!(format_tick(0.25), "0.25");
        assert_eq!(format_tick(12.5), "12.5");
        assert_eq!(format_tick(0.0), "0");
    }
}
