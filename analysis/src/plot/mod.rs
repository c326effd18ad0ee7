//! Charts as SVG, drawn with plotters' SVG backend in one theme of our own.
//!
//! Every chart returns an [`Svg`]: the markup, with `<title>` and `<desc>` for
//! screen readers, deterministic to the byte for the same inputs (no random
//! ids; coordinates are whole pixels).
//!
//! | function | chart |
//! |---|---|
//! | [`fit_line`] | target against one term, fitted line, confidence and prediction bands |
//! | [`residuals_by_value`] | studentized residual by model value, ±3 lines, tier medians |
//! | [`normal_quantiles`] | studentized residuals against the normal, 95 % pointwise band |
//! | [`residual_spread`] | \|studentized residual\| by model value, tier medians |
//! | [`residuals_over_time`] | the miss by sale date, quarterly medians |
//! | [`residuals_by_group`] | the miss by location group, boxes and medians |
//! | [`influence_by_value`] | Cook's distance by model value, 4/n line, influential sales named |
//! | [`coefficient_intervals`] | estimates with intervals, sorted, zero line |
//! | [`coefficient_by_group`] | one coefficient in each group's model with its interval, the pooled model's as a band |
//! | [`histogram`] | histogram with a kernel density curve |
//! | [`correlation_heatmap`] | correlation matrix of numeric columns |
//! | [`local_coefficient_map`] | every sale of a local fit coloured by its local coefficient against the global one |
//! | [`residual_map`] | every fitted sale at its place, coloured by its miss, location groups labelled |
//! | [`ratio_by_price`] | ratios against the price proxy, median, PRB line and tier medians |
//! | [`diagnostic_sheet`] | the review sheet: five of the panels above, laid out for a valuation review |
//!
//! Charts that need the data beside the fit (time, location, names) take the
//! fitting frame and [`ReviewOptions`].

mod canvas;
mod charts_distribution;
mod charts_fit;
mod charts_groups;
mod charts_place;
mod charts_residual;
mod review;
mod sheet;
mod smoother;
mod theme;

pub use charts_distribution::{correlation_heatmap, histogram};
pub use charts_fit::{coefficient_intervals, fit_line};
pub use charts_groups::coefficient_by_group;
pub use charts_place::{local_coefficient_map, ratio_by_price, residual_map};
pub use charts_residual::MAX_GROUPS_SHOWN;
pub use review::{ReviewOptions, DEFAULT_LABELLED};
pub use sheet::{
    diagnostic_sheet, influence_by_value, normal_quantiles, residual_spread, residuals_by_group, residuals_by_value,
    residuals_over_time, SHEET_SIZE,
};
pub use smoother::{group_medians, tier_count, tier_medians};
pub use theme::format_tick;

use crate::error::{Error, Result};

/// Size of a chart in pixels. The default (720 × 440) fits a notebook column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct PlotSize {
    /// Width in pixels.
    pub width: u32,
    /// Height in pixels.
    pub height: u32,
}

impl Default for PlotSize {
    fn default() -> Self {
        Self { width: 720, height: 440 }
    }
}

/// An SVG chart.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Svg {
    /// The complete `<svg>` document.
    pub markup: String,
    /// Its accessible title.
    pub title: String,
}

impl Svg {
    /// Wraps plotters' output, adding `<title>` and `<desc>` after the opening
    /// tag, and making the chart fit the space it is shown in: the root's
    /// fixed `width="W" height="H"` become `width="100%"` with
    /// `max-width: Wpx` (its `viewBox` keeps the proportions). Drawn inline
    /// (the HTML reports, print) it shrinks to a narrow page and never grows
    /// past its drawn size; shown as an image (a notebook front end renders
    /// `image/svg+xml` in an `<img>`) it takes the output area's width, so a
    /// wide review sheet is never cut at the notebook's edge.
    pub(crate) fn finish(markup: String, title: &str, description: &str) -> Result<Svg> {
        let open = markup.find("<svg").and_then(|start| markup[start..].find('>').map(|end| (start, start + end + 1)));
        let Some((start, at)) = open else {
            return Err(Error::Plot("the SVG backend produced no <svg> element".into()));
        };
        let tag = fluid_root(&markup[start..at]);
        let mut out = String::with_capacity(markup.len() + title.len() + description.len() + 80);
        out.push_str(&markup[..start]);
        out.push_str(&tag);
        out.push_str(&format!("\n<title>{}</title>\n<desc>{}</desc>", escape(title), escape(description)));
        out.push_str(&markup[at..]);
        Ok(Svg { markup: out, title: title.to_string() })
    }
}

/// The root tag `<svg width="W" height="H" …>` with `width="100%"` and
/// `style="max-width:Wpx;height:auto"` in place of the fixed size (a tag
/// without a numeric width is returned as it is).
fn fluid_root(tag: &str) -> String {
    let attribute = |name: &str| -> Option<(usize, usize, String)> {
        let key = format!(" {name}=\"");
        let from = tag.find(&key)?;
        let value_start = from + key.len();
        let value_end = value_start + tag[value_start..].find('"')?;
        Some((from, value_end + 1, tag[value_start..value_end].to_string()))
    };
    let (Some(width), Some(height)) = (attribute("width"), attribute("height")) else { return tag.to_string() };
    if width.2.parse::<f64>().is_err() {
        return tag.to_string();
    }
    let mut spans = [
        (width.0, width.1, format!(" width=\"100%\" style=\"max-width:{}px;height:auto\"", width.2)),
        (height.0, height.1, String::new()),
    ];
    spans.sort_by_key(|s| s.0);
    let mut out = String::with_capacity(tag.len() + 40);
    let mut at = 0;
    for (from, to, replacement) in spans {
        out.push_str(&tag[at..from]);
        out.push_str(&replacement);
        at = to;
    }
    out.push_str(&tag[at..]);
    out
}

/// Escapes text for XML content.
pub(crate) fn escape(text: &str) -> String {
    text.replace('&', "&amp;").replace('<', "&lt;").replace('>', "&gt;").replace('"', "&quot;")
}

/// Turns any plotters drawing error into ours.
pub(crate) fn plot_error<E: std::fmt::Debug>(e: E) -> Error {
    Error::Plot(format!("{e:?}"))
}

#[cfg(test)]
mod fitting_tests {
    use super::fluid_root;

    #[test]
    fn the_root_takes_the_space_it_is_shown_in_up_to_its_drawn_width() {
        assert_eq!(
            fluid_root(r#"<svg width="720" height="440" viewBox="0 0 720 440" xmlns="http://www.w3.org/2000/svg">"#),
            r#"<svg width="100%" style="max-width:720px;height:auto" viewBox="0 0 720 440" xmlns="http://www.w3.org/2000/svg">"#
        );
        let without_size = r#"<svg viewBox="0 0 10 10">"#;
        assert_eq!(fluid_root(without_size), without_size);
    }
}
