//! Charts of the fitted model: one term's fitted curve with bands, and the
//! coefficient intervals.

use super::canvas::{axes, estimate_rows, padded_range, render};
use super::theme::{format_tick, ACCENT, BAND, FONT, GRID, INK, POINT, SOFT};
use super::{plot_error, PlotSize, Svg};
use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::{quadratic_form, Fit};
use crate::model::design::INTERCEPT_NAME;
use crate::model::encode::{RowValues, TermEncoding};
use crate::stats::t_critical;
use plotters::prelude::*;
use std::collections::BTreeMap;

/// The target against the numeric column `column`, with the fitted curve and
/// its confidence and prediction bands at `level`.
///
/// The curve varies `column` over its observed range through every plain
/// numeric term built from it (so `log(area)` or a polynomial in `age` bend the
/// curve as they should) and holds every other design column at its mean over
/// the fitting rows; interactions involving `column` are held at their mean too.
/// The y axis is the model scale (the log of the target for a logged target).
pub fn fit_line(fit: &Fit, frame: &Frame, column: &str, level: f64, size: PlotSize) -> Result<Svg> {
    crate::stats::check_level(level)?;
    let design = fit.design();
    let spans: Vec<(std::ops::Range<usize>, &TermEncoding)> = design
        .recipe()
        .term_spans
        .iter()
        .zip(&design.recipe().encodings)
        .filter(|(_, e)| matches!(e, TermEncoding::Numeric { column: c, .. } if c == column))
        .map(|(s, e)| (s.columns.clone(), e))
        .collect();
    if spans.is_empty() {
        return Err(Error::Specification(format!(
            "`{column}` is not a numeric term of this model, so there is no fitted curve to draw"
        )));
    }
    let raw = frame.numeric_column(column)?;
    let x: Vec<f64> = design.rows_used().iter().map(|&r| raw[r].unwrap_or(f64::NAN)).collect();
    let y = design.target();
    let x_range = padded_range(x.iter().copied());
    let (lo, hi) =
        (x.iter().cloned().fold(f64::INFINITY, f64::min), x.iter().cloned().fold(f64::NEG_INFINITY, f64::max));
    let grid: Vec<f64> = (0..=120).map(|i| lo + (hi - lo) * i as f64 / 120.0).collect();

    // Design rows for the grid: column means, then the varied terms.
    let kept = fit.solution().kept();
    let means: Vec<f64> = design.columns().iter().map(|c| c.hi.iter().sum::<f64>() / c.hi.len() as f64).collect();
    let mut rows: Vec<Vec<f64>> = vec![means; grid.len()];
    let numbers: BTreeMap<String, Vec<f64>> = [(column.to_string(), grid.clone())].into_iter().collect();
    let labels = BTreeMap::new();
    let indices: Vec<usize> = (0..grid.len()).collect();
    let no_line = |_: usize| None;
    let values = RowValues { numbers: &numbers, labels: &labels, rows: &indices, line_of: &no_line };
    for (range, encoding) in &spans {
        let generated = encoding.columns(&values)?;
        for (offset, g) in generated.iter().enumerate() {
            for (row, v) in rows.iter_mut().zip(&g.hi) {
                row[range.start + offset] = *v;
            }
        }
    }
    let crit = t_critical(level, fit.df_t());
    let s2 = fit.residual_std_error().powi(2);
    let mut line = Vec::with_capacity(grid.len());
    let mut ci = Vec::with_capacity(grid.len());
    let mut pi = Vec::with_capacity(grid.len());
    for (g, row) in grid.iter().zip(&rows) {
        let x0: Vec<f64> = kept.iter().map(|&j| row[j]).collect();
        let estimate: f64 = x0.iter().zip(fit.solution().coefficients()).map(|(a, b)| a * b).sum();
        let se = quadratic_form(fit.covariance(), &x0).max(0.0).sqrt();
        line.push((*g, estimate));
        ci.push((*g, estimate - crit * se, estimate + crit * se));
        pi.push((*g, estimate - crit * (s2 + se * se).sqrt(), estimate + crit * (s2 + se * se).sqrt()));
    }
    let y_range = padded_range(y.iter().copied().chain(pi.iter().flat_map(|p| [p.1, p.2])));
    let pct = format_tick(level * 100.0);
    let title = format!("{} against {column}", fit.spec().target_label());
    let markup = render(size, |area| {
        let mut chart = axes(area, &title, x_range, y_range, column, &fit.spec().target_label())?;
        let band = |b: &[(f64, f64, f64)]| -> Vec<(f64, f64)> {
            b.iter().map(|p| (p.0, p.2)).chain(b.iter().rev().map(|p| (p.0, p.1))).collect()
        };
        chart
            .draw_series(std::iter::once(Polygon::new(band(&pi), SOFT.mix(0.22))))
            .map_err(plot_error)?
            .label(format!("{pct} % prediction band"))
            .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], SOFT.mix(0.4).filled()));
        chart
            .draw_series(std::iter::once(Polygon::new(band(&ci), BAND.mix(0.35))))
            .map_err(plot_error)?
            .label(format!("{pct} % confidence band"))
            .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 14, y + 5)], BAND.mix(0.5).filled()));
        let size = if x.len() > 5000 { 1 } else { 2 };
        chart
            .draw_series(
                x.iter()
                    .zip(y)
                    .filter(|(a, _)| a.is_finite())
                    .map(|(a, b)| Circle::new((*a, *b), size, POINT.mix(0.45).filled())),
            )
            .map_err(plot_error)?;
        chart
            .draw_series(LineSeries::new(line.clone(), ACCENT.stroke_width(2)))
            .map_err(plot_error)?
            .label("fitted")
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 14, y)], ACCENT.stroke_width(2)));
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.85))
            .border_style(GRID)
            .label_font((FONT, 12).into_font().color(&INK))
            .draw()
            .map_err(plot_error)?;
        Ok(())
    })?;
    let description = format!(
        "{} sales plotted as points with the fitted curve of {}, its {pct} % confidence band and {pct} % prediction band; other terms held at their means.",
        x.len(),
        fit.spec().target_label()
    );
    Svg::finish(markup, &title, &description)
}

/// Estimates with confidence intervals at `level`, sorted by estimate, with a
/// zero line; the intercept is left out (its scale differs).
pub fn coefficient_intervals(fit: &Fit, level: f64, size: PlotSize) -> Result<Svg> {
    let mut rows: Vec<_> = fit.coefficients(level)?.into_iter().filter(|c| c.term != INTERCEPT_NAME).collect();
    if rows.is_empty() {
        return Err(Error::Specification("the model has no coefficient besides the intercept to draw".into()));
    }
    rows.sort_by(|a, b| a.estimate.total_cmp(&b.estimate).then_with(|| a.term.cmp(&b.term)));
    let k = rows.len();
    let x_range = padded_range(rows.iter().flat_map(|c| [c.ci_low, c.ci_high]).chain([0.0]));
    let height = size.height.max(120 + 26 * k as u32);
    let names: Vec<String> = rows.iter().map(|c| c.term.clone()).collect();
    let pct = format_tick(level * 100.0);
    let markup = render(PlotSize { width: size.width, height }, |area| {
        let mut chart = estimate_rows(area, &format!("Coefficients with {pct} % intervals"), x_range.clone(), &names)?;
        chart
            .draw_series(LineSeries::new(vec![(0.0, -0.5), (0.0, k as f64 - 0.5)], SOFT.stroke_width(1)))
            .map_err(plot_error)?;
        for (i, c) in rows.iter().enumerate() {
            let y = i as f64;
            let colour = if c.ci_low > 0.0 || c.ci_high < 0.0 { ACCENT } else { POINT };
            chart
                .draw_series(LineSeries::new(vec![(c.ci_low, y), (c.ci_high, y)], colour.stroke_width(3)))
                .map_err(plot_error)?;
            chart.draw_series(std::iter::once(Circle::new((c.estimate, y), 4, colour.filled()))).map_err(plot_error)?;
        }
        Ok(())
    })?;
    let description = format!(
        "{k} coefficients of {} as points with {pct} % interval bars, sorted by estimate; bars that miss zero are highlighted.",
        fit.spec().target_label()
    );
    Svg::finish(markup, &format!("Coefficients with {pct} % intervals"), &description)
}
