//! The review sheet and the residual charts one at a time.
//!
//! The sheet is laid out for a valuation review, read top to bottom:
//!
//! ```text
//! ┌──────────────────────────────────────┬──────────────────┐
//! │ each sale's miss in standard units,  │ studentized      │
//! │ by model value (±3, tier medians)    │ residuals vs the │
//! │                                      │ normal (band)    │
//! ├────────────────┬─────────────────────┴──┬───────────────┤
//! │ miss by sale   │ miss by location group │ pull on the   │
//! │ date (quarter  │ (box, median bar)      │ model: Cook's │
//! │ medians)       │                        │ D, 4/n, names │
//! └────────────────┴────────────────────────┴───────────────┘
//! ```
//!
//! The top row asks whether the model fits across the price range; the
//! bottom row whether it missed a market trend, misprices a location, or
//! leans on a few sales. A bottom panel without data (no date column, no
//! category term) is left out and the others share its width.

use super::canvas::{render, Area};
use super::charts_residual::{
    draw_influence_by_value, draw_miss_by_group, draw_miss_over_time, draw_normal_quantiles, draw_spread_by_value,
    draw_studentized_by_value,
};
use super::review::{ReviewData, ReviewOptions};
use super::{PlotSize, Svg};
use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::Fit;

/// Size of the sheet when the caller leaves the library default.
pub const SHEET_SIZE: PlotSize = PlotSize { width: 1200, height: 860 };

type Panel = fn(&Area, &ReviewData) -> Result<()>;

fn single(data: &ReviewData, size: PlotSize, title: &str, description: String, draw: Panel) -> Result<Svg> {
    let markup = render(size, |area| draw(area, data))?;
    Svg::finish(markup, title, &description)
}

/// Each sale's externally studentized residual against its model value,
/// with the ±3 lines of the flag rule and the median of each value tier.
pub fn residuals_by_value(fit: &Fit, size: PlotSize) -> Result<Svg> {
    let data = ReviewData::of_fit(fit);
    let description = format!(
        "Studentized residuals of {} sales against model value, with lines at ±3 and the median of each value tier.",
        data.names.len()
    );
    single(&data, size, "Each sale's miss in standard units, by model value", description, draw_studentized_by_value)
}

/// Sorted studentized residuals against normal quantiles inside a 95 %
/// pointwise band.
pub fn normal_quantiles(fit: &Fit, size: PlotSize) -> Result<Svg> {
    let description = "Sorted studentized residuals against normal quantiles; the shaded band holds 95 % of each order statistic under normal errors, so points outside it show skew or heavy tails.".to_string();
    single(
        &ReviewData::of_fit(fit),
        size,
        "Studentized residuals against the normal",
        description,
        draw_normal_quantiles,
    )
}

/// Residual spread (|studentized residual|) against model value with the
/// median of each tier; a rising line says the miss grows with value.
pub fn residual_spread(fit: &Fit, size: PlotSize) -> Result<Svg> {
    let description = "Absolute studentized residuals against model value with the median of each value tier and the level expected under equal spread (0.674).".to_string();
    single(&ReviewData::of_fit(fit), size, "Residual spread against model value", description, draw_spread_by_value)
}

/// The miss against sale date (or the chosen time column) with the median of
/// each calendar quarter; refuses when there is no time column to draw.
pub fn residuals_over_time(fit: &Fit, frame: &Frame, options: &ReviewOptions) -> Result<Svg> {
    let data = ReviewData::gather(fit, frame, options)?;
    let Some(time) = &data.time else {
        return Err(Error::Plot(
            "the model has no date term and the frame no date column; name the time column with `ReviewOptions::default().time(\"sale_date\")`".into(),
        ));
    };
    let description = format!("Each sale's miss against {}, with the median of each quarter.", time.column);
    single(&data, options.size, &format!("Miss by {}", time.column), description, draw_miss_over_time)
}

/// The miss per location group (the model's first category term, or the
/// chosen column); refuses when there is no group column.
pub fn residuals_by_group(fit: &Fit, frame: &Frame, options: &ReviewOptions) -> Result<Svg> {
    let data = ReviewData::gather(fit, frame, options)?;
    let Some(groups) = &data.groups else {
        return Err(Error::Plot(
            "the model has no category term; name the location column with `ReviewOptions::default().groups(\"district\")`".into(),
        ));
    };
    let description =
        format!("Each sale's miss by {}, with a box over the middle half and a bar at the median.", groups.column);
    single(&data, options.size, &format!("Miss by {}", groups.column), description, draw_miss_by_group)
}

/// Cook's distance against model value with the 4/n line and the most
/// influential sales named (those [`Fit::flagged_rows`] lists above 4/n).
pub fn influence_by_value(fit: &Fit, frame: &Frame, options: &ReviewOptions) -> Result<Svg> {
    let data = ReviewData::gather(fit, frame, options)?;
    let description = format!("Cook's distance of each sale against model value; {}", labelled_sentence(&data));
    single(&data, options.size, "Pull on the model: Cook's distance", description, draw_influence_by_value)
}

fn labelled_sentence(data: &ReviewData) -> String {
    if data.labelled.is_empty() {
        "no sale has Cook's distance above 4/n.".to_string()
    } else {
        let names: Vec<&str> = data.labelled.iter().map(|&i| data.names[i].as_str()).collect();
        format!("labelled (Cook's distance above 4/n, most influential first): {}.", names.join(", "))
    }
}

/// The review sheet: five panels (see the module documentation), 1200 × 860
/// unless `options.size` says otherwise. `frame` must be the frame the fit
/// read; its id, date and location columns come from `options` or the model.
pub fn diagnostic_sheet(fit: &Fit, frame: &Frame, options: &ReviewOptions) -> Result<Svg> {
    let data = ReviewData::gather(fit, frame, options)?;
    let size = if options.size == PlotSize::default() { SHEET_SIZE } else { options.size };
    // Bottom-row panels with their relative widths.
    let mut bottom: Vec<(Panel, u32)> = Vec::new();
    if data.time.is_some() {
        bottom.push((draw_miss_over_time, 36));
    }
    if data.groups.is_some() {
        bottom.push((draw_miss_by_group, 36));
    }
    bottom.push((draw_influence_by_value, 28));
    let markup = render(size, |root| {
        let (top, lower) = root.split_vertically(size.height * 46 / 100);
        let (wide, side) = top.split_horizontally(size.width * 64 / 100);
        draw_studentized_by_value(&wide, &data)?;
        draw_normal_quantiles(&side, &data)?;
        let total: u32 = bottom.iter().map(|p| p.1).sum();
        let breaks: Vec<u32> = bottom
            .iter()
            .scan(0, |acc, p| {
                *acc += p.1;
                Some(size.width * *acc / total)
            })
            .take(bottom.len() - 1)
            .collect();
        let areas = lower.split_by_breakpoints(breaks, Vec::<u32>::new());
        for ((draw, _), area) in bottom.iter().zip(&areas) {
            draw(area, &data)?;
        }
        Ok(())
    })?;
    let mut panels = vec![
        "each sale's studentized residual by model value with ±3 lines and tier medians".to_string(),
        "studentized residuals against the normal with a 95 % pointwise band".to_string(),
    ];
    if let Some(time) = &data.time {
        panels.push(format!("the miss by {} with quarterly medians", time.column));
    }
    if let Some(groups) = &data.groups {
        panels.push(format!("the miss by {} with boxes and medians", groups.column));
    }
    panels.push("Cook's distance by model value with the 4/n line".to_string());
    Svg::finish(
        markup,
        &format!("Review sheet: {}", fit.spec().target_label()),
        &format!("Panels: {}. Influence panel {}", panels.join("; "), labelled_sentence(&data)),
    )
}
