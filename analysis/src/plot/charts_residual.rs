//! The residual panels of a valuation review, each drawn from [`ReviewData`]:
//!
//! | panel | reads | line through the cloud |
//! |---|---|---|
//! | studentized residual by model value | ±3 lines of the flag rule | median of each value tier |
//! | studentized residuals against normal quantiles | a 95 % pointwise band | — |
//! | residual spread by model value | `|t|` with its normal-errors median `Φ⁻¹(0.75) ≈ 0.674` | median of each value tier |
//! | miss by sale date | zero line | median of each calendar quarter (tiers for a numeric time) |
//! | miss by location group | zero line | box of the middle half, bar at the median |
//! | Cook's distance by model value | the `4/n` line | the most influential sales labelled |
//!
//! The tier and quarter medians are [`super::smoother`]'s. Functions here draw
//! on a given area; the public single charts and the sheet are in
//! [`super::sheet`].

use super::canvas::{axes, axes_with, padded_range, Area, AxisTicks};
use super::plot_error;
use super::review::{month_tick, ReviewData};
use super::smoother::{group_medians, tier_medians};
use super::theme::{format_tick, ACCENT, BAND, FONT, INK, POINT, SOFT};
use crate::diagnose::flags::STUDENTIZED_CUTOFF;
use crate::error::Result;
use crate::stats::{median_of_sorted, quantile_of_sorted};
use plotters::prelude::*;
use statrs::distribution::{Beta, ContinuousCDF, Normal};

/// Point radius in pixels for `n` points: smaller as the cloud grows.
fn point_size(n: usize) -> u32 {
    match n {
        0..=300 => 3,
        301..=5000 => 2,
        _ => 1,
    }
}

/// The median line: a polyline with a small square at each median.
fn draw_medians(chart: &mut super::canvas::Chart, medians: &[(f64, f64)]) -> Result<()> {
    chart.draw_series(LineSeries::new(medians.iter().copied(), ACCENT.stroke_width(2))).map_err(plot_error)?;
    chart
        .draw_series(
            medians
                .iter()
                .map(|&(x, y)| EmptyElement::at((x, y)) + Rectangle::new([(-3, -3), (3, 3)], ACCENT.filled())),
        )
        .map_err(plot_error)?;
    Ok(())
}

/// A horizontal reference line across the chart at `y`.
fn level_line(chart: &mut super::canvas::Chart, y: f64, style: ShapeStyle) -> Result<()> {
    let (lo, hi) = (chart.x_range().start, chart.x_range().end);
    chart.draw_series(LineSeries::new(vec![(lo, y), (hi, y)], style)).map_err(plot_error)?;
    Ok(())
}

/// The points `(x, y)` where both are finite, highlighted when `mark` says so.
fn draw_cloud(chart: &mut super::canvas::Chart, x: &[f64], y: &[f64], mark: impl Fn(usize) -> bool) -> Result<()> {
    let size = point_size(x.len());
    let finite = |i: &usize| x[*i].is_finite() && y[*i].is_finite();
    chart
        .draw_series(
            (0..x.len())
                .filter(finite)
                .filter(|i| !mark(*i))
                .map(|i| Circle::new((x[i], y[i]), size, POINT.mix(0.5).filled())),
        )
        .map_err(plot_error)?;
    chart
        .draw_series(
            (0..x.len())
                .filter(finite)
                .filter(|i| mark(*i))
                .map(|i| Circle::new((x[i], y[i]), size + 1, ACCENT.mix(0.85).filled())),
        )
        .map_err(plot_error)?;
    Ok(())
}

/// Studentized residual against model value, the ±3 flag lines, and the
/// median of each value tier; sales beyond ±3 in the accent colour.
pub(crate) fn draw_studentized_by_value(area: &Area, data: &ReviewData) -> Result<()> {
    let t = &data.studentized;
    let y_range = padded_range(t.iter().copied().chain([-STUDENTIZED_CUTOFF, STUDENTIZED_CUTOFF]));
    let mut chart = axes(
        area,
        "Each sale's miss in standard units, by model value",
        padded_range(data.model_value.iter().copied()),
        y_range,
        &data.value_title,
        "studentized residual",
    )?;
    level_line(&mut chart, 0.0, SOFT.stroke_width(1))?;
    for cut in [-STUDENTIZED_CUTOFF, STUDENTIZED_CUTOFF] {
        level_line(&mut chart, cut, ACCENT.mix(0.45).stroke_width(1))?;
    }
    draw_cloud(&mut chart, &data.model_value, t, |i| t[i].abs() > STUDENTIZED_CUTOFF)?;
    draw_medians(&mut chart, &tier_medians(&data.model_value, t))
}

/// `|t|` against model value with the median of each tier; under normal,
/// equal-spread errors the tier medians sit near `Φ⁻¹(0.75) ≈ 0.674` (the
/// dashed line), and a rising line says the miss grows with value.
pub(crate) fn draw_spread_by_value(area: &Area, data: &ReviewData) -> Result<()> {
    let spread: Vec<f64> = data.studentized.iter().map(|t| t.abs()).collect();
    let mut chart = axes(
        area,
        "Residual spread against model value",
        padded_range(data.model_value.iter().copied()),
        0.0..padded_range(spread.iter().copied()).end,
        &data.value_title,
        "|studentized residual|",
    )?;
    let normal_median = Normal::new(0.0, 1.0).map_err(plot_error)?.inverse_cdf(0.75);
    level_line(&mut chart, normal_median, SOFT.stroke_width(1))?;
    draw_cloud(&mut chart, &data.model_value, &spread, |_| false)?;
    draw_medians(&mut chart, &tier_medians(&data.model_value, &spread))
}

/// Sorted studentized residuals against normal quantiles at Blom's (1958)
/// plotting positions `(i − 3/8)/(n + 1/4)`, inside the 95 % pointwise band
/// of the `i`-th of `n` normal order statistics: `Φ⁻¹` of the 2.5 % and
/// 97.5 % points of `Beta(i, n − i + 1)`, the distribution of the `i`-th
/// uniform order statistic (David & Nagaraja, *Order Statistics*, 3rd ed.,
/// §2.2). The band is computed at up to 200 positions.
pub(crate) fn draw_normal_quantiles(area: &Area, data: &ReviewData) -> Result<()> {
    let mut sample: Vec<f64> = data.studentized.iter().copied().filter(|v| v.is_finite()).collect();
    sample.sort_by(f64::total_cmp);
    let n = sample.len();
    let normal = Normal::new(0.0, 1.0).map_err(plot_error)?;
    let position = |i: usize| normal.inverse_cdf((i as f64 - 0.375) / (n as f64 + 0.25));
    let theoretical: Vec<f64> = (1..=n).map(position).collect();
    let step = n.div_ceil(200).max(1);
    let band: Vec<(f64, f64, f64)> = (1..=n)
        .step_by(step)
        .chain((n > 0 && !(n - 1).is_multiple_of(step)).then_some(n))
        .filter_map(|i| {
            let order = Beta::new(i as f64, (n - i + 1) as f64).ok()?;
            Some((
                position(i),
                normal.inverse_cdf(order.inverse_cdf(0.025)),
                normal.inverse_cdf(order.inverse_cdf(0.975)),
            ))
        })
        .collect();
    let range = padded_range(theoretical.iter().chain(&sample).copied());
    let mut chart = axes(
        area,
        "Studentized residuals against the normal",
        range.clone(),
        range.clone(),
        "normal quantile",
        "studentized residual",
    )?;
    let clamp = |v: f64| v.clamp(range.start, range.end);
    let mut outline: Vec<(f64, f64)> = band.iter().map(|&(x, lo, _)| (x, clamp(lo))).collect();
    outline.extend(band.iter().rev().map(|&(x, _, hi)| (x, clamp(hi))));
    chart.draw_series(std::iter::once(Polygon::new(outline, BAND.mix(0.25)))).map_err(plot_error)?;
    chart
        .draw_series(LineSeries::new(vec![(range.start, range.start), (range.end, range.end)], SOFT.stroke_width(1)))
        .map_err(plot_error)?;
    let outside = |i: usize| {
        band.iter()
            .min_by(|a, b| (a.0 - theoretical[i]).abs().total_cmp(&(b.0 - theoretical[i]).abs()))
            .is_some_and(|b| sample[i] < b.1 || sample[i] > b.2)
    };
    draw_cloud(&mut chart, &theoretical, &sample, outside)
}

/// The miss against the time axis with the median of each calendar quarter
/// (of each tier, for a numeric time column). Draws nothing when the data has
/// no time axis; callers check first.
pub(crate) fn draw_miss_over_time(area: &Area, data: &ReviewData) -> Result<()> {
    let Some(time) = &data.time else { return Ok(()) };
    let x: Vec<f64> = time.values.iter().map(|v| v.unwrap_or(f64::NAN)).collect();
    let (caption, medians) = if time.is_date {
        let quarters: Vec<Option<(i32, u32)>> = (0..x.len()).map(|i| time.quarter(i)).collect();
        let medians = group_medians(&quarters, &x, &data.miss, 1).into_iter().map(|(_, a, b)| (a, b)).collect();
        (format!("Miss by {}: median of each quarter", time.column), medians)
    } else {
        (format!("Miss by {}: median of each tier", time.column), tier_medians(&x, &data.miss))
    };
    let x_label: &dyn Fn(&f64) -> String = if time.is_date { &|v| month_tick(*v) } else { &|v| format_tick(*v) };
    let ticks = AxisTicks { x_count: 6, x_label, ..AxisTicks::default() };
    let x_title = if time.is_date { format!("{} (year-month)", time.column) } else { time.column.clone() };
    let mut chart = axes_with(
        area,
        &caption,
        (padded_range(x.iter().copied()), padded_range(data.miss.iter().copied())),
        (&x_title, &data.miss_title),
        &ticks,
    )?;
    level_line(&mut chart, 0.0, SOFT.stroke_width(1))?;
    draw_cloud(&mut chart, &x, &data.miss, |_| false)?;
    draw_medians(&mut chart, &medians)
}

/// Most groups the location panel shows; beyond this the largest are kept.
pub const MAX_GROUPS_SHOWN: usize = 24;

/// The miss per location group: a strip of sales (spread vertically by a
/// fixed golden-ratio jitter, so the drawing is the same every run), a box
/// over the middle half (quartiles by linear interpolation) and a bar at the
/// median; groups ordered by median miss, lowest at the bottom. Draws nothing
/// when the data has no groups.
pub(crate) fn draw_miss_by_group(area: &Area, data: &ReviewData) -> Result<()> {
    let Some(groups) = &data.groups else { return Ok(()) };
    let mut members: std::collections::BTreeMap<&str, Vec<usize>> = std::collections::BTreeMap::new();
    for (i, label) in groups.labels.iter().enumerate() {
        if let (Some(label), true) = (label, data.miss[i].is_finite()) {
            members.entry(label.as_str()).or_default().push(i);
        }
    }
    let total = members.len();
    let mut shown: Vec<(&str, Vec<usize>)> = members.into_iter().collect();
    shown.sort_by(|a, b| b.1.len().cmp(&a.1.len()).then(a.0.cmp(b.0)));
    shown.truncate(MAX_GROUPS_SHOWN);
    let mut boxes: Vec<GroupBox> = shown.into_iter().map(|(name, rows)| GroupBox::of(name, rows, &data.miss)).collect();
    boxes.sort_by(|a, b| a.median.total_cmp(&b.median).then(a.name.cmp(&b.name)));
    let names: Vec<String> = boxes.iter().map(|b| b.name.clone()).collect();
    let label = |v: &f64| {
        let i = v.round();
        if (v - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < names.len() {
            names[i as usize].clone()
        } else {
            String::new()
        }
    };
    let longest = names.iter().map(|n| n.chars().count()).max().unwrap_or(4) as u32;
    let ticks = AxisTicks {
        y_count: names.len().max(1),
        y_label: &label,
        y_label_width: (longest * 7 + 12).clamp(60, 190),
        y_grid: false,
        ..AxisTicks::default()
    };
    let caption = if total > boxes.len() {
        format!("Miss by {} ({} largest of {total})", groups.column, boxes.len())
    } else {
        format!("Miss by {}", groups.column)
    };
    let x_values = boxes.iter().flat_map(|b| b.rows.iter().map(|&i| data.miss[i]));
    let mut chart = axes_with(
        area,
        &caption,
        (padded_range(x_values), -0.6..(boxes.len() as f64 - 0.4)),
        (&data.miss_title, ""),
        &ticks,
    )?;
    chart
        .draw_series(LineSeries::new(vec![(0.0, -0.6), (0.0, boxes.len() as f64 - 0.4)], SOFT.stroke_width(1)))
        .map_err(plot_error)?;
    let size = point_size(data.miss.len());
    for (g, group) in boxes.iter().enumerate() {
        let y = g as f64;
        let jitter = |k: usize| ((k as f64 * 0.618_033_988_749_895).fract() - 0.5) * 0.5;
        chart
            .draw_series(
                group
                    .rows
                    .iter()
                    .enumerate()
                    .map(|(k, &i)| Circle::new((data.miss[i], y + jitter(k)), size, POINT.mix(0.4).filled())),
            )
            .map_err(plot_error)?;
        chart
            .draw_series(std::iter::once(Rectangle::new(
                [(group.q1, y - 0.32), (group.q3, y + 0.32)],
                INK.stroke_width(1),
            )))
            .map_err(plot_error)?;
        chart
            .draw_series(LineSeries::new(
                vec![(group.median, y - 0.38), (group.median, y + 0.38)],
                ACCENT.stroke_width(3),
            ))
            .map_err(plot_error)?;
    }
    Ok(())
}

/// One location group's sales and the quartiles of their misses.
struct GroupBox {
    /// `name (count)`.
    name: String,
    /// Design-row indices of its sales.
    rows: Vec<usize>,
    q1: f64,
    median: f64,
    q3: f64,
}

impl GroupBox {
    fn of(name: &str, rows: Vec<usize>, miss: &[f64]) -> GroupBox {
        let mut v: Vec<f64> = rows.iter().map(|&i| miss[i]).collect();
        v.sort_by(f64::total_cmp);
        GroupBox {
            name: format!("{name} ({})", rows.len()),
            q1: quantile_of_sorted(&v, 0.25),
            median: median_of_sorted(&v).unwrap_or(f64::NAN),
            q3: quantile_of_sorted(&v, 0.75),
            rows,
        }
    }
}

/// Cook's distance against model value with the `4/n` line; the labelled
/// sales (most influential first) in the accent colour with their names.
pub(crate) fn draw_influence_by_value(area: &Area, data: &ReviewData) -> Result<()> {
    let top = data.cooks.iter().copied().filter(|d| d.is_finite()).fold(data.cooks_cutoff, f64::max);
    let mut chart = axes(
        area,
        "Pull on the model: Cook's distance (line at 4/n)",
        padded_range(data.model_value.iter().copied()),
        0.0..top * 1.15,
        &data.value_title,
        "Cook's distance",
    )?;
    level_line(&mut chart, data.cooks_cutoff, ACCENT.mix(0.45).stroke_width(1))?;
    draw_cloud(&mut chart, &data.model_value, &data.cooks, |i| data.labelled.contains(&i))?;
    let font = (FONT, 12).into_font().color(&INK);
    let plot_box = chart.plotting_area().get_pixel_range();
    let mut placed: Vec<LabelBox> = Vec::new();
    for &i in data.labelled.iter().filter(|&&i| data.cooks[i].is_finite()) {
        let point = (data.model_value[i], data.cooks[i]);
        let anchor = chart.backend_coord(&point);
        let name = data.names[i].clone();
        let offset = place_label(anchor, name.chars().count(), &placed, (plot_box.0.start, plot_box.0.end));
        placed.push(LabelBox::at(anchor, offset, name.chars().count()));
        let leader =
            PathElement::new(vec![(0, 0), (offset.0.clamp(-4, 4), offset.1 + 7)], INK.mix(0.5).stroke_width(1));
        chart
            .draw_series(std::iter::once(EmptyElement::at(point) + leader + Text::new(name, offset, font.clone())))
            .map_err(plot_error)?;
    }
    Ok(())
}

/// Approximate pixel box of a 12 px label: 7 px per character, 14 px high.
#[derive(Debug, Clone, Copy)]
struct LabelBox {
    left: i32,
    top: i32,
    right: i32,
    bottom: i32,
}

impl LabelBox {
    fn at(anchor: (i32, i32), offset: (i32, i32), chars: usize) -> LabelBox {
        let (left, top) = (anchor.0 + offset.0, anchor.1 + offset.1);
        LabelBox { left, top, right: left + 7 * chars as i32, bottom: top + 14 }
    }

    fn overlaps(&self, other: &LabelBox) -> bool {
        self.left < other.right && other.left < self.right && self.top < other.bottom && other.top < self.bottom
    }
}

/// The first offset (pixels from the point to the label's top-left corner)
/// among candidates ordered by distance — beside the point on the right, then
/// the left, stepping 16 px up and down the ladder — whose box stays inside
/// the plot's horizontal extent and overlaps no label already placed.
/// Greedy, in the order the labels are drawn (most influential first), so
/// the most influential sale gets the nearest spot.
fn place_label(anchor: (i32, i32), chars: usize, placed: &[LabelBox], x_extent: (i32, i32)) -> (i32, i32) {
    let width = 7 * chars as i32;
    let rungs = [-16, 4, -32, 20, -48, 36, -64, 52, -80, 68];
    let candidates = rungs.iter().flat_map(|&dy| [(8, dy), (-width - 8, dy)]);
    let fits = |offset: &(i32, i32)| {
        let b = LabelBox::at(anchor, *offset, chars);
        b.left >= x_extent.0 && b.right <= x_extent.1 && !placed.iter().any(|p| p.overlaps(&b))
    };
    candidates.clone().find(fits).unwrap_or((8, -16))
}
