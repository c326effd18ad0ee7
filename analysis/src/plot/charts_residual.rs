//! Residual diagnostics: residuals vs fitted, normal Q-Q, scale-location,
//! leverage with Cook's distance contours, and the four-panel sheet.

use super::canvas::{axes, padded_range, render, Area};
use super::smoother::lowess;
use super::theme::{ACCENT, POINT, SOFT};
use super::{plot_error, PlotSize, Svg};
use crate::error::Result;
use crate::fit::Fit;
use plotters::prelude::*;
use statrs::distribution::{ContinuousCDF, Normal};

/// Fitted values `ŷ = y − e` on the model scale.
fn fitted(fit: &Fit) -> Vec<f64> {
    fit.design().target.iter().zip(&fit.solution().residuals).map(|(y, e)| y - e).collect()
}

/// Standardized residuals, with undefined ones (leverage 1) left out as NaN.
fn standardized(fit: &Fit) -> (Vec<f64>, Vec<f64>) {
    let influence = fit.influence();
    let r = influence.rows.iter().map(|r| r.standardized.unwrap_or(f64::NAN)).collect();
    let h = influence.rows.iter().map(|r| r.leverage).collect();
    (r, h)
}

fn point_size(n: usize) -> u32 {
    match n {
        0..=300 => 3,
        301..=5000 => 2,
        _ => 1,
    }
}

fn points_with_smoother(area: &Area, caption: &str, x: &[f64], y: &[f64], x_title: &str, y_title: &str, zero_line: bool) -> Result<()> {
    let mut chart = axes(area, caption, padded_range(x.iter().copied()), padded_range(y.iter().copied()), x_title, y_title)?;
    if zero_line {
        let (lo, hi) = (chart.x_range().start, chart.x_range().end);
        chart.draw_series(LineSeries::new(vec![(lo, 0.0), (hi, 0.0)], SOFT.stroke_width(1))).map_err(plot_error)?;
    }
    let size = point_size(x.len());
    chart
        .draw_series(x.iter().zip(y).filter(|(a, b)| a.is_finite() && b.is_finite()).map(|(a, b)| Circle::new((*a, *b), size, POINT.mix(0.55).filled())))
        .map_err(plot_error)?;
    let smooth = lowess(x, y, 2.0 / 3.0, 3);
    chart.draw_series(LineSeries::new(smooth, ACCENT.stroke_width(2))).map_err(plot_error)?;
    Ok(())
}

fn draw_residuals_vs_fitted(area: &Area, fit: &Fit) -> Result<()> {
    let x = fitted(fit);
    let y = fit.solution().residuals.clone();
    points_with_smoother(area, "Residuals against fitted values", &x, &y, &format!("fitted {}", fit.spec().target_label()), "residual", true)
}

fn draw_normal_qq(area: &Area, fit: &Fit) -> Result<()> {
    let (r, _) = standardized(fit);
    let mut sample: Vec<f64> = r.into_iter().filter(|v| v.is_finite()).collect();
    sample.sort_by(f64::total_cmp);
    let n = sample.len();
    let normal = Normal::new(0.0, 1.0).map_err(plot_error)?;
    // Blom (1958) plotting positions (i − 3/8)/(n + 1/4).
    let theoretical: Vec<f64> = (1..=n).map(|i| normal.inverse_cdf((i as f64 - 0.375) / (n as f64 + 0.25))).collect();
    let range = padded_range(theoretical.iter().chain(&sample).copied());
    let mut chart = axes(area, "Normal Q-Q of standardized residuals", range.clone(), range.clone(), "normal quantile", "standardized residual")?;
    chart.draw_series(LineSeries::new(vec![(range.start, range.start), (range.end, range.end)], SOFT.stroke_width(1))).map_err(plot_error)?;
    let size = point_size(n);
    chart
        .draw_series(theoretical.iter().zip(&sample).map(|(a, b)| Circle::new((*a, *b), size, POINT.mix(0.6).filled())))
        .map_err(plot_error)?;
    Ok(())
}

fn draw_scale_location(area: &Area, fit: &Fit) -> Result<()> {
    let x = fitted(fit);
    let (r, _) = standardized(fit);
    let y: Vec<f64> = r.iter().map(|v| v.abs().sqrt()).collect();
    points_with_smoother(area, "Scale-location", &x, &y, &format!("fitted {}", fit.spec().target_label()), "√|standardized residual|", false)
}

fn draw_leverage(area: &Area, fit: &Fit) -> Result<()> {
    let (r, h) = standardized(fit);
    let k = fit.solution().kept.len() as f64;
    let x_range = 0.0..(h.iter().cloned().fold(0.0, f64::max) * 1.1).max(2.0 * k / h.len() as f64 * 1.2);
    let y_range = padded_range(r.iter().copied().chain([-3.0, 3.0]));
    let mut chart = axes(area, "Standardized residuals against leverage", x_range.clone(), y_range.clone(), "leverage", "standardized residual")?;
    // Cook's distance contours D = 0.5 and 1: r = ±√(D k (1 − h) / h).
    for (d, style) in [(0.5, SOFT.stroke_width(1)), (1.0, ACCENT.mix(0.7).stroke_width(1))] {
        for sign in [1.0, -1.0] {
            let curve: Vec<(f64, f64)> = (1..=120)
                .map(|i| x_range.end * i as f64 / 120.0)
                .map(|hv| (hv, sign * (d * k * (1.0 - hv) / hv).max(0.0).sqrt()))
                .filter(|(_, v)| *v >= y_range.start && *v <= y_range.end)
                .collect();
            chart.draw_series(LineSeries::new(curve, style)).map_err(plot_error)?;
        }
    }
    let size = point_size(h.len());
    chart
        .draw_series(h.iter().zip(&r).filter(|(_, b)| b.is_finite()).map(|(a, b)| Circle::new((*a, *b), size, POINT.mix(0.55).filled())))
        .map_err(plot_error)?;
    Ok(())
}

fn single(fit: &Fit, size: PlotSize, title: &str, description: String, draw: fn(&Area, &Fit) -> Result<()>) -> Result<Svg> {
    let markup = render(size, |area| draw(area, fit))?;
    Svg::finish(markup, title, &description)
}

/// Residuals against fitted values with a LOWESS smoother; curvature in the
/// smoother suggests a missing term or transform.
pub fn residuals_vs_fitted(fit: &Fit, size: PlotSize) -> Result<Svg> {
    let description = format!("Scatter of {} residuals against fitted values with a smoothed trend line.", fit.design().n_rows());
    single(fit, size, "Residuals against fitted values", description, draw_residuals_vs_fitted)
}

/// Normal Q-Q plot of standardized residuals (Blom plotting positions).
pub fn normal_qq(fit: &Fit, size: PlotSize) -> Result<Svg> {
    let description = "Standardized residuals against normal quantiles; points off the diagonal show skew or heavy tails.".to_string();
    single(fit, size, "Normal Q-Q of standardized residuals", description, draw_normal_qq)
}

/// √|standardized residual| against fitted values; a rising smoother suggests
/// error spread that grows with value.
pub fn scale_location(fit: &Fit, size: PlotSize) -> Result<Svg> {
    let description = "Square root of absolute standardized residuals against fitted values with a smoothed trend.".to_string();
    single(fit, size, "Scale-location", description, draw_scale_location)
}

/// Standardized residuals against leverage with Cook's distance contours at 0.5 and 1.
pub fn leverage_plot(fit: &Fit, size: PlotSize) -> Result<Svg> {
    let description = "Standardized residuals against leverage; curves mark Cook's distance 0.5 and 1.".to_string();
    single(fit, size, "Standardized residuals against leverage", description, draw_leverage)
}

/// The four residual panels on one sheet (default 960 × 720 when `size` is the default).
pub fn diagnostic_sheet(fit: &Fit, size: PlotSize) -> Result<Svg> {
    let size = if size == PlotSize::default() { PlotSize { width: 960, height: 720 } } else { size };
    let markup = render(size, |root| {
        let panels = root.split_evenly((2, 2));
        draw_residuals_vs_fitted(&panels[0], fit)?;
        draw_normal_qq(&panels[1], fit)?;
        draw_scale_location(&panels[2], fit)?;
        draw_leverage(&panels[3], fit)?;
        Ok(())
    })?;
    Svg::finish(
        markup,
        &format!("Diagnostic sheet: {}", fit.spec().target_label()),
        "Four panels: residuals against fitted values, normal Q-Q, scale-location, and leverage with Cook's distance contours.",
    )
}
