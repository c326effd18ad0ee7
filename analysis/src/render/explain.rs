//! The `explain` view: one plain-words sentence per statistic, written for
//! this fit, for colleagues learning to read a regression.

use super::bundle::{MimeBundle, Report};
use super::fit_report::fit_html;
use super::html::{escape, CARD, HEADING};
use super::numbers::{format_p_value, format_significant};
use super::prose::{percent, wrap, VALUATION_CAUTION};
use crate::diagnose::collinearity::CONDITION_INDEX_WARNING;
use crate::fit::Fit;
use crate::model::design::INTERCEPT_NAME;
use crate::model::{DatePart, TargetTransform, Term, Transform};

/// A fit with a sentence for every statistic.
#[derive(Debug, Clone, Copy)]
pub struct Explained<'a> {
    /// The fit.
    pub fit: &'a Fit,
    /// Confidence level of the intervals.
    pub level: f64,
}

impl Fit {
    /// The explaining view of this fit at `level`.
    pub fn explain(&self, level: f64) -> Explained<'_> {
        Explained { fit: self, level }
    }
}

fn pct(v: f64) -> String {
    format!("{} %", format_significant(v * 100.0, 3))
}

/// Which design columns come from a logged numeric term.
fn logged_columns(fit: &Fit) -> Vec<String> {
    fit.spec()
        .terms()
        .iter()
        .filter_map(|t| match t {
            Term::Numeric { column, transform: Transform::Log } => Some(format!("log({column})")),
            _ => None,
        })
        .collect()
}

/// How a one-unit step of a design column reads: a sale a month (or a day)
/// later for a sale-date trend, one more unit of the column otherwise.
fn one_step(fit: &Fit, design_column: &str) -> String {
    let trend = fit.spec().terms().iter().find_map(|t| match t {
        Term::Date { column, part, .. } if part.derived_name(column) == design_column => Some((column, part)),
        _ => None,
    });
    match trend {
        Some((column, DatePart::MonthsSince(_))) => format!("A sale one month later (by {column})"),
        Some((column, DatePart::DaysSince(_))) => format!("A sale one day later (by {column})"),
        _ => format!("One more unit of {design_column}"),
    }
}

/// The sentences, in reading order.
pub fn explanations(fit: &Fit, level: f64) -> crate::Result<Vec<(String, String)>> {
    let stats = fit.statistics();
    let target = fit.spec().target_label();
    let log_target = fit.spec().target_transform() == TargetTransform::Log;
    let raw_target = fit.spec().target().to_string();
    let n = stats.n_obs;
    let mut out = Vec::new();
    out.push((
        "R²".to_string(),
        format!(
            "R² = {}: the terms account for {} of the variation in {target} around its mean across these {n} sales.",
            format_significant(stats.r_squared, 4),
            pct(stats.r_squared)
        ),
    ));
    out.push((
        "adjusted R²".to_string(),
        format!(
            "Adjusted R² = {} is R² with a charge for each of the {} slope coefficients; it rises only when a term helps more than chance would.",
            format_significant(stats.adj_r_squared, 4),
            stats.model_df
        ),
    ));
    let s = stats.residual_std_error;
    out.push((
        "typical miss".to_string(),
        if log_target {
            format!(
                "A typical sale's {target} sits about {} from its fitted value — roughly ±{} in {raw_target}.",
                format_significant(s, 3),
                pct(s.exp() - 1.0)
            )
        } else {
            format!("A typical sale's {target} sits about {} from its fitted value.", format_significant(s, 4))
        },
    ));
    if let (Some(f), Some(p)) = (stats.f_statistic, stats.f_p_value) {
        out.push((
            "F".to_string(),
            format!(
                "The F test asks whether all the slope terms together explain nothing. F = {} (p {}) {}.",
                format_significant(f, 4),
                format_p_value(Some(p)),
                if p < 0.05 {
                    "says they clearly explain something"
                } else {
                    "cannot rule out that they explain nothing"
                }
            ),
        ));
    }
    out.push((
        "AIC and BIC".to_string(),
        format!(
            "AIC {} and BIC {} only mean something beside another model of the same {target} on the same rows: lower is better, and BIC punishes extra terms harder.",
            format_significant(stats.aic, 6),
            format_significant(stats.bic, 6)
        ),
    ));
    out.push((
        "condition number".to_string(),
        format!(
            "The condition number {} measures how close the terms come to moving together; below {} is comfortable (common practice).",
            format_significant(stats.condition_number, 3),
            CONDITION_INDEX_WARNING
        ),
    ));
    let logged = logged_columns(fit);
    let level_pct = percent(level);
    for c in fit.coefficients(level)? {
        if c.term == INTERCEPT_NAME {
            out.push((
                c.term.clone(),
                format!(
                    "The intercept {} is the fitted {target} when every term is zero (or at its reference level); it anchors the line and rarely means much alone.",
                    format_significant(c.estimate, 5)
                ),
            ));
            continue;
        }
        let interval = format!(
            "{level_pct} % interval {} to {}",
            format_significant(c.ci_low, 3),
            format_significant(c.ci_high, 3)
        );
        let significance = match c.p_value {
            Some(p) if p < 0.05 => format!("p {} — unlikely to be chance", format_p_value(Some(p))),
            Some(p) => format!("p {} — could well be chance", format_p_value(Some(p))),
            None => "no p-value (the fit is exact)".to_string(),
        };
        let sentence = if let Some((column, level_name)) = c.term.split_once('=').filter(|_| !c.term.contains('*')) {
            if log_target {
                format!(
                    "Sales with {column} = {level_name} are about {} {} than the reference level, other terms equal ({interval}; {significance}).",
                    pct((c.estimate.exp() - 1.0).abs()),
                    if c.estimate >= 0.0 { "higher" } else { "lower" }
                )
            } else {
                format!(
                    "Sales with {column} = {level_name} differ by {} in {target} from the reference level, other terms equal ({interval}; {significance}).",
                    format_significant(c.estimate, 4)
                )
            }
        } else if log_target && logged.contains(&c.term) {
            format!(
                "A 1 % larger {} goes with about {} % higher {raw_target}, other terms equal ({interval}; {significance}).",
                c.term.trim_start_matches("log(").trim_end_matches(')'),
                format_significant(c.estimate, 3)
            )
        } else if log_target {
            format!(
                "{} goes with about {} {} in {raw_target}, other terms equal ({interval}; {significance}).",
                one_step(fit, &c.term),
                pct((c.estimate.exp() - 1.0).abs()),
                if c.estimate >= 0.0 { "more" } else { "less" }
            )
        } else {
            format!(
                "{} goes with a change of {} in {target}, other terms equal ({interval}; {significance}).",
                one_step(fit, &c.term),
                format_significant(c.estimate, 4)
            )
        };
        out.push((c.term.clone(), sentence));
    }
    Ok(out)
}

impl Report for Explained<'_> {
    fn bundle(&self) -> MimeBundle {
        let sentences = explanations(self.fit, self.level).unwrap_or_default();
        let mut text = super::text::fit_text(self.fit, self.level).unwrap_or_default();
        text.push_str("\nIn plain words\n");
        for (what, sentence) in &sentences {
            text.push_str(&wrap(&format!("{what}: {sentence}"), 96, "  ", "    "));
        }
        text.push_str(&wrap(VALUATION_CAUTION, 96, "  ", "  "));
        let mut html = fit_html(self.fit, self.level).unwrap_or_default();
        html.push_str(&format!(
            "<div style=\"{CARD}\">\n<div style=\"{HEADING}\">In plain words</div>\n<dl style=\"margin:0\">\n"
        ));
        for (what, sentence) in &sentences {
            html.push_str(&format!(
                "<dt style=\"font-weight:600;margin-top:6px\">{}</dt><dd style=\"margin:0 0 0 14px\">{}</dd>\n",
                escape(what),
                escape(sentence)
            ));
        }
        html.push_str("</dl>\n</div>\n");
        MimeBundle::text_and_html(text, html)
    }
}
