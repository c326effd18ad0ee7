//! Distributions: histogram with density, and the correlation heat map.

use super::canvas::{axes, padded_range, render};
use super::theme::{ACCENT, BAND, FONT, INK, PAPER, POINT};
use super::{plot_error, PlotSize, Svg};
use crate::data::Frame;
use crate::error::{Error, Result};
use plotters::prelude::*;

use crate::stats::quantile_of_sorted as quantile;

/// Histogram of `values` with a Gaussian kernel density curve scaled to counts.
///
/// Bin width by the Freedman–Diaconis rule `2·IQR·n^(−1/3)` (Freedman &
/// Diaconis 1981); kernel bandwidth by Silverman's rule
/// `0.9·min(sd, IQR/1.34)·n^(−1/5)` (Silverman 1986, §3.4.2).
pub fn histogram(values: &[f64], label: &str, size: PlotSize) -> Result<Svg> {
    let mut data: Vec<f64> = values.iter().copied().filter(|v| v.is_finite()).collect();
    if data.len() < 2 {
        return Err(Error::Specification(format!("a histogram of `{label}` needs at least two values")));
    }
    data.sort_by(f64::total_cmp);
    let n = data.len() as f64;
    let (lo, hi) = (data[0], data[data.len() - 1]);
    let iqr = quantile(&data, 0.75) - quantile(&data, 0.25);
    let mean = data.iter().sum::<f64>() / n;
    let sd = (data.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let mut width = 2.0 * iqr * n.powf(-1.0 / 3.0);
    if !(width > 0.0) {
        width = if hi > lo { (hi - lo) / 10.0 } else { 1.0 };
    }
    let bins = (((hi - lo) / width).ceil() as usize).clamp(1, 200);
    let width = if hi > lo { (hi - lo) / bins as f64 } else { 1.0 };
    let mut counts = vec![0usize; bins];
    for v in &data {
        let b = (((v - lo) / width) as usize).min(bins - 1);
        counts[b] += 1;
    }
    let spread = if iqr > 0.0 { sd.min(iqr / 1.34) } else { sd };
    let bandwidth = (0.9 * spread * n.powf(-0.2)).max(f64::MIN_POSITIVE);
    let density: Vec<(f64, f64)> = (0..=200)
        .map(|i| lo - 3.0 * bandwidth + (hi - lo + 6.0 * bandwidth) * i as f64 / 200.0)
        .map(|x| {
            let d: f64 = data.iter().map(|v| (-0.5 * ((x - v) / bandwidth).powi(2)).exp()).sum::<f64>()
                / (n * bandwidth * (2.0 * std::f64::consts::PI).sqrt());
            (x, d * n * width)
        })
        .collect();
    let top = counts.iter().copied().max().unwrap_or(1) as f64;
    let y_max = density.iter().map(|p| p.1).fold(top, f64::max) * 1.08;
    let title = format!("Distribution of {label}");
    let markup = render(size, |area| {
        let x_range = padded_range([lo - 3.0 * bandwidth, hi + 3.0 * bandwidth]);
        let mut chart = axes(area, &title, x_range, 0.0..y_max, label, "count")?;
        chart
            .draw_series(counts.iter().enumerate().map(|(b, &c)| {
                let x0 = lo + b as f64 * width;
                Rectangle::new([(x0, 0.0), (x0 + width, c as f64)], BAND.mix(0.55).filled())
            }))
            .map_err(plot_error)?;
        chart.draw_series(LineSeries::new(density.clone(), ACCENT.stroke_width(2))).map_err(plot_error)?;
        Ok(())
    })?;
    let description =
        format!("Histogram of {} values of {label} in {bins} bins with a smoothed density curve.", data.len());
    Svg::finish(markup, &title, &description)
}

/// Pearson correlations between numeric `columns` (pairwise complete rows) as
/// a heat map: terracotta for positive, teal for negative, white near zero.
pub fn correlation_heatmap(frame: &Frame, columns: &[&str], size: PlotSize) -> Result<Svg> {
    if columns.len() < 2 {
        return Err(Error::Specification("a correlation heat map needs at least two columns".into()));
    }
    let data: Vec<Vec<Option<f64>>> = columns.iter().map(|c| frame.numeric_column(c)).collect::<Result<_>>()?;
    let k = columns.len();
    let mut r = vec![vec![f64::NAN; k]; k];
    for a in 0..k {
        for b in 0..k {
            let pairs: Vec<(f64, f64)> =
                data[a].iter().zip(&data[b]).filter_map(|(x, y)| Some(((*x)?, (*y)?))).collect();
            let n = pairs.len() as f64;
            if n < 2.0 {
                continue;
            }
            let (mx, my) = (pairs.iter().map(|p| p.0).sum::<f64>() / n, pairs.iter().map(|p| p.1).sum::<f64>() / n);
            let sxy: f64 = pairs.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
            let sxx: f64 = pairs.iter().map(|p| (p.0 - mx).powi(2)).sum();
            let syy: f64 = pairs.iter().map(|p| (p.1 - my).powi(2)).sum();
            r[a][b] = sxy / (sxx * syy).sqrt();
        }
    }
    let side = size.width.min(size.height.max(120 + 48 * k as u32));
    let names: Vec<String> = columns.iter().map(|s| s.to_string()).collect();
    let markup = render(PlotSize { width: side.max(320), height: side.max(320) }, |area| {
        let longest = names.iter().map(|n| n.chars().count()).max().unwrap_or(4) as u32;
        let mut chart = ChartBuilder::on(area)
            .caption("Correlations", (FONT, 17).into_font().color(&INK))
            .margin(14)
            .x_label_area_size((longest * 6 + 14).min(160))
            .y_label_area_size((longest * 7 + 14).min(200))
            .build_cartesian_2d(-0.5..(k as f64 - 0.5), -0.5..(k as f64 - 0.5))
            .map_err(plot_error)?;
        let label = |v: &f64| {
            let i = v.round();
            if (v - i).abs() < 1e-6 && i >= 0.0 && (i as usize) < names.len() {
                names[i as usize].clone()
            } else {
                String::new()
            }
        };
        chart
            .configure_mesh()
            .disable_mesh()
            .x_labels(k)
            .y_labels(k)
            .x_label_formatter(&label)
            .y_label_formatter(&|v| label(&(k as f64 - 1.0 - v)))
            .label_style((FONT, 12).into_font().color(&INK))
            .draw()
            .map_err(plot_error)?;
        for a in 0..k {
            for b in 0..k {
                let value = r[a][b];
                let colour = blend(value);
                let (x, y) = (b as f64, (k - 1 - a) as f64);
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(x - 0.5, y - 0.5), (x + 0.5, y + 0.5)],
                        colour.filled(),
                    )))
                    .map_err(plot_error)?;
                let text = if value.is_finite() { format!("{value:.2}") } else { "—".into() };
                let ink = if value.abs() > 0.6 { PAPER } else { INK };
                chart
                    .draw_series(std::iter::once(Text::new(
                        text,
                        (x - 0.18, y + 0.08),
                        (FONT, 12).into_font().color(&ink),
                    )))
                    .map_err(plot_error)?;
            }
        }
        Ok(())
    })?;
    Svg::finish(
        markup,
        "Correlations",
        &format!("Heat map of Pearson correlations between {k} numeric columns: {}.", names.join(", ")),
    )
}

/// White at 0, terracotta at +1, teal-blue at −1.
fn blend(value: f64) -> RGBColor {
    if !value.is_finite() {
        return RGBColor(0xee, 0xee, 0xee);
    }
    let t = value.abs().min(1.0);
    let target = if value >= 0.0 { ACCENT } else { POINT };
    let mix = |w: u8, c: u8| (w as f64 + (c as f64 - w as f64) * t).round() as u8;
    RGBColor(mix(0xff, target.0), mix(0xff, target.1), mix(0xff, target.2))
}
