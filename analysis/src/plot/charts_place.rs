//! Charts of place and price for a model review:
//!
//! | function | chart |
//! |---|---|
//! | [`residual_map`] | every fitted sale at its coordinates, coloured by its miss on a diverging scale, location groups labelled at their middle |
//! | [`ratio_by_price`] | each sale's ratio against its price proxy on a doubling scale, the median level, the PRB line and the tier medians |
//!
//! **The miss scale** (ours): sales the model valued *low* (price above
//! value, residual > 0) shade towards terracotta, sales valued *high* towards
//! slate blue, and sales it priced about right are a pale sand that recedes
//! into the paper. The scale is clipped at ±2.5 residual standard deviations
//! so that a few wild sales do not wash out the pattern.

use super::canvas::{axes_with, draw_x_ticks, render, round_amounts_in_log2, Area, AxisTicks, Chart};
use super::plot_error;
use super::theme::{format_tick, ACCENT, FONT, INK, POINT, SOFT};
use super::{PlotSize, Svg};
use crate::data::Frame;
use crate::diagnose::SpatialOptions;
use crate::error::Result;
use crate::fit::Fit;
use crate::local::LocalSummary;
use crate::spatial::geodesy::MEAN_EARTH_RADIUS_KM;
use crate::spatial::{group_labels, Coordinates, PlaceLabel};
use crate::value::{ratio_study, ratio_tiers, RatioOptions, TierBasis};
use plotters::prelude::*;

/// The colour of a miss `t` in residual standard deviations (clipped at ±2.5).
fn miss_colour(t: f64) -> RGBColor {
    const SAND: (f64, f64, f64) = (0xef as f64, 0xe6 as f64, 0xd8 as f64);
    let end = if t >= 0.0 { ACCENT } else { POINT };
    let s = (t.abs() / 2.5).min(1.0);
    let mix = |a: f64, b: u8| (a + (b as f64 - a) * s).round() as u8;
    RGBColor(mix(SAND.0, end.0), mix(SAND.1, end.1), mix(SAND.2, end.2))
}

/// Every sale the fit used at its `(x, y)` coordinates, coloured by its
/// residual on the miss scale (module documentation); the groups of
/// `options.group_column`, if any, labelled at their median coordinates.
/// The axes share one scale, so distances on the map are true.
///
/// Geographic places (longitude, latitude) are drawn on a local
/// equirectangular projection about the sales' middle latitude `φ₀`
/// (`x = R·cos φ₀·Δλ`, `y = R·Δφ`, km, `R` the mean Earth radius): true
/// along the middle parallel and every meridian; the chart states the
/// largest east–west scale error over the sales' latitudes,
/// `|cos φ / cos φ₀ − 1|`.
pub fn residual_map(fit: &Fit, frame: &Frame, options: &SpatialOptions, size: PlotSize) -> Result<Svg> {
    let mut places = fit.places(frame, options)?;
    let (axis_names, projection) =
        map_axes(&mut places.xs, &mut places.ys, options.coordinates, &options.x_column, &options.y_column);
    // Labels from the projected places: the median commutes with the projection.
    let labels = match &places.groups {
        Some(groups) => {
            let groups: Vec<Option<String>> = groups.iter().cloned().map(Some).collect();
            group_labels(&groups, &places.xs, &places.ys)
        }
        None => Vec::new(),
    };
    let projection_note = projection.map_or_else(String::new, |projection| {
        format!(
            " Longitude and latitude drawn on an equirectangular projection about latitude {:.4}°; east–west \
             scale error at most {:.2} % over these sales.",
            projection.lat0,
            100.0 * projection.worst_scale_error
        )
    });
    let residuals = fit.solution().residuals();
    let n = residuals.len() as f64;
    let sd = (residuals.iter().map(|r| r * r).sum::<f64>() / n).sqrt().max(f64::MIN_POSITIVE);
    let (x_range, y_range) = equal_scale(&places.xs, &places.ys, size);
    let markup =
        render(size, |area| {
            let ticks = AxisTicks { y_grid: false, ..AxisTicks::default() };
            let mut chart = axes_with(
                area,
                "Where the model misses: each sale at its place",
                (x_range.clone(), y_range.clone()),
                (&axis_names.0, &axis_names.1),
                &ticks,
            )?;
            let radius = if places.xs.len() > 5000 { 1 } else { 2 };
            // Draw the quiet middle first so strong misses sit on top.
            let mut order: Vec<usize> = (0..places.xs.len()).collect();
            order.sort_by(|&a, &b| residuals[a].abs().total_cmp(&residuals[b].abs()));
            chart
                .draw_series(order.iter().map(|&i| {
                    Circle::new((places.xs[i], places.ys[i]), radius, miss_colour(residuals[i] / sd).filled())
                }))
                .map_err(plot_error)?;
            draw_labels(&mut chart, &labels)?;
            // The key, bottom right below the plot: five swatches from
            // valued high to valued low.
            draw_key(area, 200, 26, [-2.5, -1.25, 0.0, 1.25, 2.5], miss_colour, ("valued high", 48), "valued low")?;
            Ok(())
        })?;
    let description = format!(
        "{} sales plotted at ({}, {}), coloured by residual: terracotta where the price exceeded the model's value, \
         slate blue where it fell short, sand where the model was close; clipped at ±2.5 residual standard deviations.{}",
        places.xs.len(),
        options.x_column,
        options.y_column,
        projection_note
    );
    Svg::finish(markup, "Where the model misses", &description)
}

/// Axis titles for places drawn on a map: the columns' names for planar
/// places; for geographic ones, the places projected in place onto a local
/// equirectangular projection (returned) and titles in km from its centre.
fn map_axes(
    xs: &mut [f64],
    ys: &mut [f64],
    coordinates: Coordinates,
    x_column: &str,
    y_column: &str,
) -> ((String, String), Option<LocalProjection>) {
    if coordinates == Coordinates::Planar {
        return ((x_column.to_string(), y_column.to_string()), None);
    }
    let projection = LocalProjection::about(xs, ys);
    for (x, y) in xs.iter_mut().zip(ys.iter_mut()) {
        (*x, *y) = projection.project(*x, *y);
    }
    let titles = (
        format!("km east of {:.4}° (from {x_column})", projection.lon0),
        format!("km north of {:.4}° (from {y_column})", projection.lat0),
    );
    (titles, Some(projection))
}

/// Writes each label's name centred on its place (already in the chart's
/// coordinates), in bold so that it reads over the points.
fn draw_labels(chart: &mut Chart<'_, '_>, labels: &[PlaceLabel]) -> Result<()> {
    use plotters::style::text_anchor::{HPos, Pos, VPos};
    let style = (FONT, 13, FontStyle::Bold).into_font().color(&INK).pos(Pos::new(HPos::Center, VPos::Center));
    chart
        .draw_series(labels.iter().map(|label| Text::new(label.name.clone(), (label.x, label.y), style.clone())))
        .map_err(plot_error)?;
    Ok(())
}

/// A map's colour key, bottom right below the plot: five swatches coloured
/// by `colour` at `stops`, `left` (its text, and how far left of the key's
/// start it begins) before them and `right` after. `from_right` is where the
/// key starts, in pixels from the right edge; `swatches_at` where the
/// swatches start after that.
fn draw_key(
    area: &Area,
    from_right: i32,
    swatches_at: i32,
    stops: [f64; 5],
    colour: fn(f64) -> RGBColor,
    (left, left_by): (&str, i32),
    right: &str,
) -> Result<()> {
    let key_style = (FONT, 11).into_font().color(&INK);
    let (width, height) = area.dim_in_pixel();
    let (x0, y0) = (width as i32 - from_right, height as i32 - 16);
    for (k, t) in stops.iter().enumerate() {
        let start = x0 + swatches_at + k as i32 * 22;
        area.draw(&Rectangle::new([(start, y0), (start + 20, y0 + 10)], colour(*t).filled())).map_err(plot_error)?;
    }
    area.draw(&Text::new(left, (x0 - left_by, y0), key_style.clone())).map_err(plot_error)?;
    area.draw(&Text::new(right, (x0 + swatches_at + 5 * 22 + 4, y0), key_style)).map_err(plot_error)?;
    Ok(())
}

/// A local equirectangular projection about the middle of some places.
struct LocalProjection {
    lon0: f64,
    lat0: f64,
    worst_scale_error: f64,
}

impl LocalProjection {
    /// About the middle of the longitudes' and latitudes' ranges.
    fn about(lon: &[f64], lat: &[f64]) -> Self {
        let middle = |v: &[f64]| {
            let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            ((lo + hi) / 2.0, lo, hi)
        };
        let ((lon0, _, _), (lat0, south, north)) = (middle(lon), middle(lat));
        let scale = |phi: f64| (phi.to_radians().cos() / lat0.to_radians().cos() - 1.0).abs();
        Self { lon0, lat0, worst_scale_error: scale(south).max(scale(north)) }
    }

    /// (longitude, latitude) in degrees to km east and north of the centre.
    fn project(&self, lon: f64, lat: f64) -> (f64, f64) {
        let r = MEAN_EARTH_RADIUS_KM;
        (r * self.lat0.to_radians().cos() * (lon - self.lon0).to_radians(), r * (lat - self.lat0).to_radians())
    }
}

/// Ranges for `xs`, `ys` padded so one unit is the same length on both axes
/// of a plot area of `size` (less the axis margins).
fn equal_scale(xs: &[f64], ys: &[f64], size: PlotSize) -> (std::ops::Range<f64>, std::ops::Range<f64>) {
    let span = |v: &[f64]| {
        let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if lo.is_finite() {
            (lo, hi.max(lo + 1e-9))
        } else {
            (0.0, 1.0)
        }
    };
    let ((x0, x1), (y0, y1)) = (span(xs), span(ys));
    let (w, h) = (size.width.saturating_sub(100).max(50) as f64, size.height.saturating_sub(90).max(50) as f64);
    let per_pixel = ((x1 - x0) / w).max((y1 - y0) / h) * 1.06;
    let (cx, cy) = ((x0 + x1) / 2.0, (y0 + y1) / 2.0);
    ((cx - per_pixel * w / 2.0)..(cx + per_pixel * w / 2.0), (cy - per_pixel * h / 2.0)..(cy + per_pixel * h / 2.0))
}

/// Each sale's ratio `A/S` against `V = ½S + ½A/median` on a doubling
/// scale, with the median ratio, the PRB line `r = median · (1 + a + PRB·log₂V)`
/// (the least-squares line of the PRB, drawn back on the ratio scale) and
/// the median ratio of each of `tiers` price tiers by `V`. Trimming follows
/// `options`; trimmed sales are left off.
pub fn ratio_by_price(
    values: &[Option<f64>],
    prices: &[Option<f64>],
    tiers: usize,
    options: &RatioOptions,
    size: PlotSize,
) -> Result<Svg> {
    let study = ratio_study(values, prices, None, options)?;
    let tier_study = ratio_tiers(values, prices, tiers, TierBasis::Blend, options)?;
    let median = study.overall.median;
    let trimmed: std::collections::BTreeSet<usize> = study.trimmed.iter().map(|(row, _)| row - 1).collect();
    let points: Vec<(f64, f64)> = values
        .iter()
        .zip(prices)
        .enumerate()
        .filter(|(i, _)| !trimmed.contains(i))
        .filter_map(|(_, (a, s))| {
            let (a, s) = ((*a)?, (*s)?);
            Some(((0.5 * s + 0.5 * a / median).log2(), a / s))
        })
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .collect();
    let (mx, my) = (
        points.iter().map(|p| p.0).sum::<f64>() / points.len() as f64,
        points.iter().map(|p| (p.1 - median) / median).sum::<f64>() / points.len() as f64,
    );
    let x_range = super::canvas::padded_range(points.iter().map(|p| p.0));
    let y_range = super::canvas::padded_range(points.iter().map(|p| p.1));
    let markup = render(size, |area| {
        // The x axis is labelled by hand at round amounts (plotters would put
        // its ticks at powers of two on this doubling scale).
        let ticks = AxisTicks { x_count: 0, ..AxisTicks::default() };
        let mut chart = axes_with(
            area,
            "Ratio against price: does the level drift with price?",
            (x_range.clone(), y_range.clone()),
            ("½ price + ½ value ÷ median ratio (doubling scale)", "value ÷ price"),
            &ticks,
        )?;
        let round = round_amounts_in_log2(&x_range);
        draw_x_ticks(area, &mut chart, &y_range, &round, &|x| format_tick(x.exp2().round()))?;
        let radius = if points.len() > 3000 { 1 } else { 2 };
        chart
            .draw_series(points.iter().map(|&(x, y)| Circle::new((x, y), radius, POINT.mix(0.35).filled())))
            .map_err(plot_error)?;
        chart
            .draw_series(LineSeries::new(vec![(x_range.start, median), (x_range.end, median)], SOFT.stroke_width(2)))
            .map_err(plot_error)?;
        if let Some(prb) = study.overall.prb {
            let a = my - prb * mx;
            let line = |x: f64| median * (1.0 + a + prb * x);
            chart
                .draw_series(LineSeries::new(
                    vec![(x_range.start, line(x_range.start)), (x_range.end, line(x_range.end))],
                    ACCENT.stroke_width(2),
                ))
                .map_err(plot_error)?;
        }
        let tier_points: Vec<(f64, f64)> = tier_study
            .tiers
            .iter()
            .filter_map(|t| Some((((t.lower + t.upper) / 2.0).log2(), t.statistics.as_ref()?.median)))
            .collect();
        chart
            .draw_series(
                tier_points
                    .iter()
                    .map(|&(x, y)| EmptyElement::at((x, y)) + Rectangle::new([(-4, -4), (4, 4)], INK.filled())),
            )
            .map_err(plot_error)?;
        Ok(())
    })?;
    let prb = study.overall.prb.map_or_else(|| "not defined".to_string(), |p| format!("{p:.4}"));
    let description = format!(
        "Ratios of {} sales against their price proxy on a doubling scale; grey line at the median ratio {median:.4}, \
         terracotta line the PRB fit (PRB {prb}), dark squares the median ratio of each of {tiers} price tiers.",
        points.len()
    );
    Svg::finish(markup, "Ratio against price", &description)
}

/// The local-coefficient scale: a cool blue-green below the global
/// estimate, a warm ochre above, pale stone at it; `t` in spreads of the
/// local estimates, saturating at ±2.
fn coefficient_colour(t: f64) -> RGBColor {
    const STONE: (f64, f64, f64) = (0xee as f64, 0xec as f64, 0xe6 as f64);
    const BELOW: (f64, f64, f64) = (0x2f as f64, 0x7f as f64, 0x86 as f64);
    const ABOVE: (f64, f64, f64) = (0xc9 as f64, 0x8a as f64, 0x1e as f64);
    let end = if t >= 0.0 { ABOVE } else { BELOW };
    let s = (t.abs() / 2.0).min(1.0);
    let mix = |a: f64, b: f64| (a + (b - a) * s).round() as u8;
    RGBColor(mix(STONE.0, end.0), mix(STONE.1, end.1), mix(STONE.2, end.2))
}

/// Every sale of a local fit at its place, coloured by its local estimate of
/// `term` against the global model's: ochre where the local coefficient is
/// above the global one, blue-green where below, by up to two standard
/// deviations of the local estimates; the fit's location groups
/// ([`crate::local::LocalOptions::labelled_by`]) written at their middle. Geographic places are projected as on
/// [`residual_map`], and the chart says so.
pub fn local_coefficient_map(fit: &LocalSummary, term: &str, size: PlotSize) -> Result<Svg> {
    let Some(p) = fit.terms.iter().position(|t| t == term) else {
        return Err(crate::error::Error::Specification(format!(
            "the local fit has no coefficient `{term}`; its terms are: {}",
            fit.terms.join(", ")
        )));
    };
    let mut xs: Vec<f64> = fit.rows.iter().map(|r| r.place.0).collect();
    let mut ys: Vec<f64> = fit.rows.iter().map(|r| r.place.1).collect();
    let values: Vec<f64> = fit.rows.iter().map(|r| r.coefficients[p]).collect();
    let global = fit.spread[p].global;
    let n = values.len().max(1) as f64;
    let mean = values.iter().sum::<f64>() / n;
    let sd = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n).sqrt().max(f64::MIN_POSITIVE);
    let options = &fit.options;
    let (axis_names, projection) =
        map_axes(&mut xs, &mut ys, options.coordinates, &options.x_column, &options.y_column);
    let projection_note = projection.as_ref().map_or_else(String::new, |projection| {
        format!(
            " Longitude and latitude drawn on an equirectangular projection about latitude {:.4}°.",
            projection.lat0
        )
    });
    let labels: Vec<PlaceLabel> = fit
        .labels
        .iter()
        .map(|label| {
            let (x, y) = projection.as_ref().map_or((label.x, label.y), |p| p.project(label.x, label.y));
            PlaceLabel { name: label.name.clone(), x, y }
        })
        .collect();
    let (x_range, y_range) = equal_scale(&xs, &ys, size);
    let title = format!("Local {term} across the map");
    let markup =
        render(size, |area| {
            let ticks = AxisTicks { y_grid: false, ..AxisTicks::default() };
            let mut chart =
                axes_with(area, &title, (x_range.clone(), y_range.clone()), (&axis_names.0, &axis_names.1), &ticks)?;
            let radius = if xs.len() > 5000 { 1 } else { 3 };
            chart
                .draw_series((0..xs.len()).map(|i| {
                    Circle::new((xs[i], ys[i]), radius, coefficient_colour((values[i] - global) / sd).filled())
                }))
                .map_err(plot_error)?;
            draw_labels(&mut chart, &labels)?;
            draw_key(area, 230, 60, [-2.0, -1.0, 0.0, 1.0, 2.0], coefficient_colour, ("below global", 12), "above")?;
            Ok(())
        })?;
    let description = format!(
        "{} sales at their places coloured by the local estimate of {term}: ochre above the global estimate {}, \
         blue-green below, saturating at two standard deviations ({}) of the local estimates.{}",
        xs.len(),
        format_tick(global),
        format_tick(sd),
        projection_note
    );
    Svg::finish(markup, &title, &description)
}
