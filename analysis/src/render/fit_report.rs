//! A fitted model as a report: what was fit, the coefficient table with an
//! inline interval bar per row, fit quality, and warnings in plain words.

use super::bundle::{MimeBundle, Report, FIT_JSON_MIME};
use super::fit_figures::figure_groups;
use super::html::{card_end, card_start, escape, table, CAUTION, NOTE, SUBTLE};
use super::numbers::{format_count, format_p_value, format_significant};
use super::prose::{percent, wrap, VALUATION_CAUTION};
use super::text::fit_text;
use crate::diagnose::collinearity::{CONDITION_INDEX_WARNING, INTERVAL_WIDENING_WARNING};
use crate::diagnose::flags::{cooks_cutoff, COOKS_LARGE};
use crate::documents::{to_json, FitDocument};
use crate::fit::{CovarianceKind, Fit};
use crate::inference::Coefficient;
use crate::model::design::INTERCEPT_NAME;

/// A fit shown at a chosen confidence level.
#[derive(Debug, Clone, Copy)]
pub struct FitReport<'a> {
    /// The fit.
    pub fit: &'a Fit,
    /// Confidence level of the intervals.
    pub level: f64,
}

impl Fit {
    /// This fit as a report with intervals at `level` (the fit itself shows at 95 %).
    pub fn report(&self, level: f64) -> FitReport<'_> {
        FitReport { fit: self, level }
    }
}

/// Warnings about a fit, in plain words. Thresholds are common practice:
/// condition number among the terms (centred) above
/// [`CONDITION_INDEX_WARNING`], interval widening above
/// [`INTERVAL_WIDENING_WARNING`], Cook's distance above [`COOKS_LARGE`] (else
/// above 4/n), and the
/// studentized Breusch–Pagan test at the 5 % level.
pub fn fit_warnings(fit: &Fit) -> Vec<String> {
    let mut out = Vec::new();
    let aliased = fit.aliased_names();
    if !aliased.is_empty() {
        out.push(format!(
            "Left out as exact combinations of other columns (no estimate is possible): {}.",
            aliased.join(", ")
        ));
    }
    let collinearity = fit.collinearity();
    if collinearity.centered_condition_number > CONDITION_INDEX_WARNING {
        out.push(format!(
            "The condition number among the terms is {}: some terms nearly move together, so their separate effects are estimated imprecisely.",
            format_significant(collinearity.centered_condition_number, 3)
        ));
    }
    let collinear: Vec<String> = collinearity
        .terms
        .into_iter()
        .filter(|t| t.interval_widening > INTERVAL_WIDENING_WARNING)
        .map(|t| format!("{} ×{}", t.term, format_significant(t.interval_widening, 3)))
        .collect();
    if !collinear.is_empty() {
        out.push(format!(
            "Intervals widened by terms moving together (times wider than with uncorrelated terms): {}.",
            collinear.join(", ")
        ));
    }
    let influence = fit.influence();
    let cutoff = cooks_cutoff(influence.rows.len());
    let influential = influence.rows.iter().filter(|r| r.cooks_distance.is_some_and(|d| d > cutoff)).count();
    let big = influence.rows.iter().filter(|r| r.cooks_distance.is_some_and(|d| d > COOKS_LARGE)).count();
    if big > 0 {
        out.push(format!(
            "{big} sale(s) have Cook's distance above {COOKS_LARGE}: each alone moves the fit noticeably. Check them for keying errors or non-market sales."
        ));
    } else if influential > 0 {
        out.push(format!(
            "{influential} sale(s) have Cook's distance above 4/n; worth a look, not necessarily a problem."
        ));
    }
    if *fit.covariance_kind() == CovarianceKind::Classical {
        let bp = fit.breusch_pagan_studentized();
        if bp.p_value < 0.05 {
            out.push(format!(
                "The error spread changes with the terms (studentized Breusch–Pagan p {}); classical standard errors may mislead — consider HC3.",
                format_p_value(Some(bp.p_value))
            ));
        }
    }
    out
}

/// A small SVG of one interval against zero on a shared scale.
fn interval_bar(c: &Coefficient, lo: f64, hi: f64) -> String {
    let w = 140.0;
    let x = |v: f64| 4.0 + (v - lo) / (hi - lo) * (w - 8.0);
    let colour = if c.ci_low > 0.0 || c.ci_high < 0.0 { "#c24e2f" } else { "#3d5a80" };
    format!(
        "<svg width=\"140\" height=\"14\" viewBox=\"0 0 140 14\" role=\"img\" aria-label=\"interval {} to {}\">\
<line x1=\"{z:.1}\" y1=\"1\" x2=\"{z:.1}\" y2=\"13\" stroke=\"#9aa8b8\" stroke-width=\"1\"/>\
<line x1=\"{a:.1}\" y1=\"7\" x2=\"{b:.1}\" y2=\"7\" stroke=\"{colour}\" stroke-width=\"3\"/>\
<circle cx=\"{e:.1}\" cy=\"7\" r=\"3\" fill=\"{colour}\"/></svg>",
        format_significant(c.ci_low, 4),
        format_significant(c.ci_high, 4),
        z = x(0.0),
        a = x(c.ci_low),
        b = x(c.ci_high),
        e = x(c.estimate),
    )
}

/// The fit as an HTML card.
pub fn fit_html(fit: &Fit, level: f64) -> crate::Result<String> {
    let coefficients = fit.coefficients(level)?;
    let stats = fit.statistics();
    let spec = fit.spec();
    let prov = fit.provenance();
    let dropped = fit.design().dropped();
    let pct = percent(level);
    let mut out = String::new();
    card_start(&mut out, &format!("Least-squares fit of {}", spec.target_label()));
    out.push_str(&format!(
        "<div style=\"{SUBTLE}\">{} · sha256 <code>{}</code>… · {} records used · dropped for missing values: {}</div>\n",
        escape(&prov.describe()),
        escape(prov.short_hash()),
        format_count(stats.n_obs),
        escape(&dropped.describe())
    ));
    let terms: Vec<String> = fit.design().recipe().term_spans.iter().map(|s| s.label.clone()).collect();
    out.push_str(&format!(
        "<div style=\"margin:6px 0\">Terms: {}{}{}. Standard errors: {}.</div>\n",
        escape(&terms.join(", ")),
        if spec.has_intercept() { ", with intercept" } else { ", no intercept" },
        spec.weight_column().map(|w| format!(", weighted by {}", escape(w))).unwrap_or_default(),
        escape(&fit.covariance_description())
    ));
    let scaled: Vec<&Coefficient> = coefficients.iter().filter(|c| c.term != INTERCEPT_NAME).collect();
    let lo = scaled.iter().map(|c| c.ci_low).fold(0.0, f64::min);
    let hi = scaled.iter().map(|c| c.ci_high).fold(0.0, f64::max);
    let rows: Vec<Vec<String>> = coefficients
        .iter()
        .map(|c| {
            vec![
                escape(&c.term),
                format_significant(c.estimate, 6),
                format_significant(c.std_error, 4),
                c.t.map_or("—".into(), |t| format!("{t:.2}")),
                escape(&format_p_value(c.p_value)),
                format!("{} to {}", format_significant(c.ci_low, 5), format_significant(c.ci_high, 5)),
                if c.term != INTERCEPT_NAME && hi > lo { interval_bar(c, lo, hi) } else { String::new() },
            ]
        })
        .collect();
    let interval_header = format!("{pct} % interval");
    table(
        &mut out,
        &["term", "estimate", "std error", "t", "p-value", &interval_header, "against zero"],
        &[false, true, true, true, true, true, false],
        &rows,
    );
    let figures: Vec<Vec<String>> =
        figure_groups(fit).iter().map(|g| vec![format!("<b>{}</b>", escape(g.heading)), escape(&g.line())]).collect();
    table(&mut out, &["the model as a whole", ""], &[false, false], &figures);
    for warning in fit_warnings(fit) {
        out.push_str(&format!("<div style=\"{NOTE}\">{}</div>\n", escape(&warning)));
    }
    out.push_str(&format!("<div style=\"{CAUTION}\">{}</div>\n", escape(VALUATION_CAUTION)));
    card_end(&mut out);
    Ok(out)
}

impl Report for FitReport<'_> {
    fn bundle(&self) -> MimeBundle {
        let text = fit_text(self.fit, self.level).unwrap_or_else(|e| format!("(cannot show the fit: {e})\n"));
        let mut text = text;
        for warning in fit_warnings(self.fit) {
            text.push_str(&wrap(&format!("warning: {warning}"), 96, "  ", "    "));
        }
        let html = fit_html(self.fit, self.level).unwrap_or_else(|e| format!("<div>{}</div>", escape(&e.to_string())));
        let bundle = MimeBundle::text_and_html(text, html);
        // Without a summary (the text already says why) there is no document:
        // an empty one would only mislead a reader of the notebook's outputs.
        match self.fit.summary(self.level).and_then(|s| to_json(&FitDocument::from(s), "fit document")) {
            Ok(json) => bundle.with(FIT_JSON_MIME, json),
            Err(_) => bundle,
        }
    }
}

impl Report for Fit {
    fn bundle(&self) -> MimeBundle {
        self.report(0.95).bundle()
    }
}
