//! Shared drawing scaffolding: an SVG string target and a themed pair of axes.

use super::theme::{format_tick, FONT, GRID, INK, PAPER};
use super::{plot_error, PlotSize};
use crate::error::Result;
use plotters::coord::types::RangedCoordf64;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::ops::Range;

/// A drawing area on the SVG backend.
pub(crate) type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;
/// A chart with two numeric axes.
pub(crate) type Chart<'a, 'b> = ChartContext<'a, SVGBackend<'b>, Cartesian2d<RangedCoordf64, RangedCoordf64>>;

/// Runs `draw` on a fresh white canvas and returns the SVG text.
pub(crate) fn render(size: PlotSize, draw: impl FnOnce(&Area) -> Result<()>) -> Result<String> {
    let mut markup = String::new();
    {
        let root = SVGBackend::with_string(&mut markup, (size.width, size.height)).into_drawing_area();
        root.fill(&PAPER).map_err(plot_error)?;
        draw(&root)?;
        root.present().map_err(plot_error)?;
    }
    Ok(markup)
}

/// `[min, max]` of finite values widened by 5 % on each side (or by 1 when flat).
pub(crate) fn padded_range(values: impl IntoIterator<Item = f64>) -> Range<f64> {
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in values.into_iter().filter(|v| v.is_finite()) {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    if !lo.is_finite() {
        return 0.0..1.0;
    }
    let pad = if hi > lo { 0.05 * (hi - lo) } else { 1.0 };
    (lo - pad)..(hi + pad)
}

/// Themed axes with a caption, axis titles and grouped tick labels.
pub(crate) fn axes<'a, 'b>(
    area: &'a Area<'b>,
    caption: &str,
    x: Range<f64>,
    y: Range<f64>,
    x_title: &str,
    y_title: &str,
) -> Result<Chart<'a, 'b>> {
    let mut chart = ChartBuilder::on(area)
        .caption(caption, (FONT, 17).into_font().color(&INK))
        .margin(14)
        .x_label_area_size(44)
        .y_label_area_size(64)
        .build_cartesian_2d(x, y)
        .map_err(plot_error)?;
    chart
        .configure_mesh()
        .x_desc(x_title)
        .y_desc(y_title)
        .x_labels(7)
        .y_labels(6)
        .x_label_formatter(&|v| format_tick(*v))
        .y_label_formatter(&|v| format_tick(*v))
        .label_style((FONT, 12).into_font().color(&INK))
        .axis_desc_style((FONT, 13).into_font().color(&INK))
        .axis_style(INK.mix(0.6))
        .bold_line_style(GRID)
        .light_line_style(GRID.mix(0.0))
        .draw()
        .map_err(plot_error)?;
    Ok(chart)
}
