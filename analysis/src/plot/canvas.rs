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
    axes_with(area, caption, (x, y), (x_title, y_title), &AxisTicks::default())
}

/// How an axis pair labels its ticks: how many, and in what words. The
/// default is 7 × 6 ticks through [`format_tick`].
pub(crate) struct AxisTicks<'f> {
    /// Most ticks on the x axis.
    pub x_count: usize,
    /// Most ticks on the y axis.
    pub y_count: usize,
    /// Tick label on the x axis.
    pub x_label: &'f dyn Fn(&f64) -> String,
    /// Tick label on the y axis.
    pub y_label: &'f dyn Fn(&f64) -> String,
    /// Width reserved for y tick labels, in pixels.
    pub y_label_width: u32,
    /// Whether grid lines run across at the y ticks.
    pub y_grid: bool,
}

impl Default for AxisTicks<'_> {
    fn default() -> Self {
        AxisTicks {
            x_count: 7,
            y_count: 6,
            x_label: &|v| format_tick(*v),
            y_label: &|v| format_tick(*v),
            y_label_width: 64,
            y_grid: true,
        }
    }
}

/// Themed axes as [`axes`], with tick counts and labels of the caller's choosing.
pub(crate) fn axes_with<'a, 'b>(
    area: &'a Area<'b>,
    caption: &str,
    (x, y): (Range<f64>, Range<f64>),
    (x_title, y_title): (&str, &str),
    ticks: &AxisTicks,
) -> Result<Chart<'a, 'b>> {
    let mut chart = ChartBuilder::on(area)
        .caption(caption, (FONT, 16).into_font().color(&INK))
        .margin(12)
        .x_label_area_size(44)
        .y_label_area_size(ticks.y_label_width)
        .build_cartesian_2d(x, y)
        .map_err(plot_error)?;
    let mut mesh = chart.configure_mesh();
    mesh.x_desc(x_title)
        .y_desc(y_title)
        .x_labels(ticks.x_count)
        .y_labels(ticks.y_count)
        .x_label_formatter(ticks.x_label)
        .y_label_formatter(ticks.y_label)
        .label_style((FONT, 12).into_font().color(&INK))
        .axis_desc_style((FONT, 13).into_font().color(&INK))
        .axis_style(INK.mix(0.6))
        .bold_line_style(GRID)
        .light_line_style(GRID.mix(0.0));
    if !ticks.y_grid {
        mesh.disable_y_mesh();
    }
    mesh.draw().map_err(plot_error)?;
    Ok(chart)
}

/// Themed axes for one estimate per named row: `x` the estimates' range,
/// one row per entry of `names`, the first at the bottom (`y = 0`), the row
/// names as y tick labels. Shared by the interval charts.
pub(crate) fn estimate_rows<'a, 'b>(
    area: &'a Area<'b>,
    caption: &str,
    x: Range<f64>,
    names: &[String],
) -> Result<Chart<'a, 'b>> {
    let k = names.len();
    let longest = names.iter().map(|n| n.chars().count()).max().unwrap_or(4) as u32;
    let mut chart = ChartBuilder::on(area)
        .caption(caption, (FONT, 17).into_font().color(&INK))
        .margin(14)
        .x_label_area_size(44)
        .y_label_area_size((longest * 7 + 16).min(260))
        .build_cartesian_2d(x, -0.5..(k as f64 - 0.5))
        .map_err(plot_error)?;
    chart
        .configure_mesh()
        .x_desc("estimate")
        .x_labels(7)
        .y_labels(k)
        .x_label_formatter(&|v| format_tick(*v))
        .y_label_formatter(&|v| {
            let i = v.round();
            if (v - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < k {
                names[i as usize].clone()
            } else {
                String::new()
            }
        })
        .label_style((FONT, 12).into_font().color(&INK))
        .axis_desc_style((FONT, 13).into_font().color(&INK))
        .bold_line_style(GRID)
        .light_line_style(GRID.mix(0.0))
        .draw()
        .map_err(plot_error)?;
    Ok(chart)
}

/// Round amounts for an axis drawn in `log₂(amount)` (a doubling scale):
/// the positions (in log₂ units) of the amounts `m·10ᵏ` inside `range`, for
/// the coarsest ladder of multipliers `m` that gives at least four of them —
/// `{1, 2, 5}`, then `{1, 1.5, 2, 3, 5, 7}`, then `{1, 1.5, 2, 2.5, 3, 4, 5, 6, 8}`
/// — so that a doubling scale is labelled 200,000, 300,000, 500,000 … rather
/// than at powers of two.
pub(crate) fn round_amounts_in_log2(range: &Range<f64>) -> Vec<f64> {
    const LADDERS: [&[f64]; 3] =
        [&[1.0, 2.0, 5.0], &[1.0, 1.5, 2.0, 3.0, 5.0, 7.0], &[1.0, 1.5, 2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0]];
    let (lo, hi) = (range.start.exp2(), range.end.exp2());
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && hi > lo) {
        return Vec::new();
    }
    let first = lo.log10().floor() as i32;
    let last = hi.log10().ceil() as i32;
    let mut chosen = Vec::new();
    for ladder in LADDERS {
        chosen = (first..=last)
            .flat_map(|k| ladder.iter().map(move |m| m * 10f64.powi(k)))
            .filter(|v| *v >= lo && *v <= hi)
            .map(f64::log2)
            .collect();
        if chosen.len() >= 4 {
            break;
        }
    }
    chosen
}

/// Labels the x axis of `chart` (drawn on `area`) at `positions` (chart
/// units) with `label(position)`, with light grid lines up the plot: for
/// axes whose tick places plotters cannot choose (round amounts on a
/// doubling scale). A label that would run past the area's edge is left out.
pub(crate) fn draw_x_ticks(
    area: &Area,
    chart: &mut Chart,
    y: &Range<f64>,
    positions: &[f64],
    label: &dyn Fn(f64) -> String,
) -> Result<()> {
    use plotters::style::text_anchor::{HPos, Pos, VPos};
    let style = (FONT, 12).into_font().color(&INK).pos(Pos::new(HPos::Center, VPos::Top));
    let (base_x, base_y) = area.get_base_pixel();
    let width = area.dim_in_pixel().0 as i32;
    for &x in positions {
        chart.draw_series(LineSeries::new(vec![(x, y.start), (x, y.end)], GRID)).map_err(plot_error)?;
        let (px, py) = chart.backend_coord(&(x, y.start));
        let text = label(x);
        let half = 4 * text.chars().count() as i32;
        let (px, py) = (px - base_x, py - base_y);
        if px - half < 0 || px + half > width {
            continue;
        }
        area.draw(&Text::new(text, (px, py + 6), style.clone())).map_err(plot_error)?;
        area.draw(&PathElement::new(vec![(px, py), (px, py + 4)], INK.mix(0.6))).map_err(plot_error)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::round_amounts_in_log2;

    #[test]
    fn a_doubling_scale_is_labelled_at_round_amounts() {
        let amounts = |lo: f64, hi: f64| -> Vec<f64> {
            round_amounts_in_log2(&(lo.log2()..hi.log2())).into_iter().map(|v| v.exp2().round()).collect()
        };
        assert_eq!(amounts(120_000.0, 960_000.0), vec![150_000.0, 200_000.0, 300_000.0, 500_000.0, 700_000.0]);
        assert_eq!(amounts(90_000.0, 2_100_000.0), vec![100_000.0, 200_000.0, 500_000.0, 1_000_000.0, 2_000_000.0]);
    }
}
