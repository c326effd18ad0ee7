//! One coefficient across the groups of a set of models by group, with the
//! pooled model's estimate as a reference line.

use super::canvas::{estimate_rows, padded_range, render};
use super::theme::{format_tick, ACCENT, BAND, POINT, SOFT};
use super::{plot_error, PlotSize, Svg};
use crate::error::{Error, Result};
use crate::strata::StratifiedSummary;
use plotters::prelude::*;

/// An estimate with its interval: `(estimate, low, high)`.
type Interval = (f64, f64, f64);

/// The estimate of `term` in each fitted group with its interval (at the
/// set's level), one row per group in label order, and the pooled model's
/// estimate and interval as a shaded band behind them. Groups whose model
/// lacks the term (aliased, or not fitted) are named and left empty, so a
/// missing group is seen, not silently skipped.
pub fn coefficient_by_group(set: &StratifiedSummary, term: &str, size: PlotSize) -> Result<Svg> {
    let rows: Vec<(String, Option<Interval>)> = set
        .strata
        .iter()
        .map(|s| {
            let estimate = s
                .fit
                .as_ref()
                .and_then(|f| f.coefficients.iter().find(|c| c.term == term))
                .map(|c| (c.estimate, c.ci_low, c.ci_high));
            (s.group.clone(), estimate)
        })
        .collect();
    let pooled = set
        .pooled
        .as_ref()
        .and_then(|f| f.coefficients.iter().find(|c| c.term == term))
        .map(|c| (c.estimate, c.ci_low, c.ci_high));
    if rows.iter().all(|(_, e)| e.is_none()) {
        return Err(Error::Specification(format!(
            "no group's model has a coefficient `{term}`; the terms are: {}",
            set.terms().join(", ")
        )));
    }
    // One row per group, top to bottom in label order, then the pooled model's row at the bottom.
    let groups = rows.len();
    let k = groups + usize::from(pooled.is_some());
    let x_range = padded_range(rows.iter().filter_map(|(_, e)| *e).chain(pooled).flat_map(|(_, lo, hi)| [lo, hi]));
    let height = size.height.max(130 + 28 * k as u32);
    let pct = format_tick(set.level * 100.0);
    let title = format!("{term} by {} with {pct} % intervals", set.grouped_by);
    let mut names: Vec<String> =
        rows.iter().map(|(g, e)| if e.is_some() { g.clone() } else { format!("{g} (no estimate)") }).collect();
    if pooled.is_some() {
        names.push("pooled model".into());
    }
    let y_of = |i: usize| (k - 1 - i) as f64;
    let markup = render(PlotSize { width: size.width, height }, |area| {
        // Top to bottom in label order: the first name on the highest row.
        let bottom_up: Vec<String> = names.iter().rev().cloned().collect();
        let mut chart = estimate_rows(area, &title, x_range.clone(), &bottom_up)?;
        if let Some((estimate, lo, hi)) = pooled {
            chart
                .draw_series(std::iter::once(Rectangle::new(
                    [(lo, -0.5), (hi, k as f64 - 0.5)],
                    BAND.mix(0.18).filled(),
                )))
                .map_err(plot_error)?;
            chart
                .draw_series(LineSeries::new(vec![(estimate, -0.5), (estimate, k as f64 - 0.5)], SOFT.stroke_width(2)))
                .map_err(plot_error)?;
            let y = y_of(groups);
            chart.draw_series(LineSeries::new(vec![(lo, y), (hi, y)], BAND.stroke_width(3))).map_err(plot_error)?;
            chart.draw_series(std::iter::once(Circle::new((estimate, y), 5, BAND.filled()))).map_err(plot_error)?;
        }
        for (i, (_, estimate)) in rows.iter().enumerate() {
            let Some((e, lo, hi)) = *estimate else { continue };
            let y = y_of(i);
            // Accent where the group's interval misses the pooled estimate.
            let apart = pooled.is_some_and(|(p, _, _)| p < lo || p > hi);
            let colour = if apart { ACCENT } else { POINT };
            chart.draw_series(LineSeries::new(vec![(lo, y), (hi, y)], colour.stroke_width(3))).map_err(plot_error)?;
            chart.draw_series(std::iter::once(Circle::new((e, y), 4, colour.filled()))).map_err(plot_error)?;
        }
        Ok(())
    })?;
    let description = format!(
        "The coefficient of {term} in each of {k} groups of {} as a point with its {pct} % interval bar; \
         the bottom row and the shaded band are the pooled model's estimate and interval; bars that miss the \
         pooled estimate are highlighted.",
        set.grouped_by
    );
    Svg::finish(markup, &title, &description)
}
