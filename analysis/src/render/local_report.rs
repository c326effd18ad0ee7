//! A local (geographically weighted) fit as people read it: the bandwidth
//! and how it was chosen, the local and global models side by side (AICc,
//! residual sum of squares, Moran's I of the residuals, and, when scored,
//! the ratio figures on held-out sales), and each
//! coefficient's spread over the sales against its global estimate.

use super::bundle::{MimeBundle, Report};
use super::html::{card_end, card_start, escape, table, CAUTION, SUBTLE};
use super::numbers::{format_count, format_p_value, format_significant};
use super::prose::VALUATION_CAUTION;
use crate::documents::{document_json, DocumentKind};
use crate::local::{BandwidthChoice, LocalFit, LocalSummary};
use crate::plot::{local_coefficient_map, PlotSize};

const SOURCE: &str = "Geographically weighted regression: Fotheringham, Brunsdon & Charlton (2002), ch. 2; \
     AICc eq. 2.33; standard errors from C·Cᵀ·σ̂² with σ̂² = RSS/(n − 2 tr S + tr SᵀS); variation over space by \
     shuffling the places (§4.5).";

fn bandwidth_line(fit: &LocalSummary) -> String {
    let how = match fit.options.bandwidth {
        BandwidthChoice::Given(_) => "as given".to_string(),
        BandwidthChoice::LeastAicc => format!("least AICc of {} tried", fit.search.len()),
    };
    format!("{} kernel over {} ({how})", fit.options.kernel.describe(), fit.bandwidth.describe())
}

fn comparison_rows(fit: &LocalSummary) -> Vec<[String; 3]> {
    let mut rows = vec![
        ["AICc".into(), format_significant(fit.aicc, 7), format_significant(fit.global.aicc, 7)],
        ["residual sum of squares".into(), format_significant(fit.rss, 6), format_significant(fit.global.rss, 6)],
        ["effective parameters".into(), format_significant(fit.effective_parameters, 5), format_count(fit.terms.len())],
        [
            "Moran's I of residuals (p)".into(),
            format!("{} ({})", format_significant(fit.moran.statistic, 4), format_p_value(Some(fit.moran.p_value))),
            format!(
                "{} ({})",
                format_significant(fit.global.moran.statistic, 4),
                format_p_value(Some(fit.global.moran.p_value))
            ),
        ],
    ];
    if let Some(held) = &fit.holdout {
        let (l, g) = (&held.local, &held.global);
        rows.extend([
            [
                format!("held-out sales valued (of {})", format_count(held.sales)),
                format_count(l.valued),
                format_count(g.valued),
            ],
            ["held-out median ratio".into(), format!("{:.3}", l.median_ratio), format!("{:.3}", g.median_ratio)],
            ["held-out COD".into(), format!("{:.1}", l.cod), format!("{:.1}", g.cod)],
            ["held-out PRD".into(), format!("{:.3}", l.prd), format!("{:.3}", g.prd)],
            ["held out within ±10 % of price".into(), share(l.within_10), share(g.within_10)],
        ]);
    }
    rows
}

fn share(fraction: f64) -> String {
    format!("{:.1} %", 100.0 * fraction)
}

/// Where the held-out sales came from, when the fit was scored on some.
fn holdout_line(fit: &LocalSummary) -> Option<String> {
    fit.holdout.as_ref().map(|h| format!("held out (fitted by neither model): {}", h.holdout_source))
}

/// The local fit as aligned text.
pub fn local_text(fit: &LocalSummary) -> String {
    let mut out = format!(
        "Local fit — {}\n  {} sales; {}\n  data: {}\n\n",
        fit.model,
        format_count(fit.n),
        bandwidth_line(fit),
        fit.data.describe()
    );
    if let Some(line) = holdout_line(fit) {
        out.push_str(&format!("  {line}\n\n"));
    }
    out.push_str(&format!("  {:<34} {:>16} {:>16}\n", "", "local", "global"));
    for [name, local, global] in comparison_rows(fit) {
        out.push_str(&format!("  {name:<34} {local:>16} {global:>16}\n"));
    }
    out.push_str(&format!(
        "  residual df {} · σ̂ {}\n\nHow each coefficient varies over the sales\n",
        format_significant(fit.residual_df, 6),
        format_significant(fit.sigma, 5)
    ));
    let width = fit.terms.iter().map(|t| t.chars().count()).max().unwrap_or(4).max(8);
    out.push_str(&format!(
        "  {:<width$} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11}  beyond 2 se\n",
        "term", "global", "min", "lower q.", "median", "upper q.", "max"
    ));
    for s in &fit.spread {
        let q = s.quantiles.map(|v| format_significant(v, 4));
        out.push_str(&format!(
            "  {:<width$} {:>11} {:>11} {:>11} {:>11} {:>11} {:>11}  {:>5.1} %\n",
            s.term,
            format_significant(s.global, 4),
            q[0],
            q[1],
            q[2],
            q[3],
            q[4],
            100.0 * s.share_distinct_from_zero
        ));
    }
    if !fit.variation.is_empty() {
        out.push_str(&format!(
            "\nDoes each coefficient vary over space? (places shuffled {} times)\n",
            fit.variation[0].permutations
        ));
        let width = fit.variation.iter().map(|t| variation_label(&t.term).chars().count()).max().unwrap_or(8);
        for t in &fit.variation {
            out.push_str(&format!(
                "  {:<width$} variance of local estimates {:>11}   p = {}\n",
                variation_label(&t.term),
                format_significant(t.variance, 4),
                format_p_value(Some(t.p_value))
            ));
        }
    }
    out.push_str(&format!("\n  {SOURCE}\n\n{VALUATION_CAUTION}\n"));
    out
}

/// A term's name in the variation test's table: the intercept is tested as
/// the local level of the average sale (see `LocalFit::variation_test`).
fn variation_label(term: &str) -> String {
    if term == crate::model::design::INTERCEPT_NAME {
        format!("{term} (level of the average sale)")
    } else {
        term.to_string()
    }
}

/// The local fit as an HTML card with the map of the first slope.
pub fn local_html(fit: &LocalSummary) -> String {
    let mut out = String::new();
    card_start(&mut out, &format!("Local fit — {} sales", format_count(fit.n)));
    out.push_str(&format!(
        "<div style=\"{SUBTLE}\">{} · {} · data: {}</div>\n",
        escape(&fit.model),
        escape(&bandwidth_line(fit)),
        escape(&fit.data.describe())
    ));
    if let Some(line) = holdout_line(fit) {
        out.push_str(&format!("<div style=\"{SUBTLE}\">{}</div>\n", escape(&line)));
    }
    let rows: Vec<Vec<String>> =
        comparison_rows(fit).into_iter().map(|r| r.iter().map(|c| escape(c)).collect()).collect();
    table(&mut out, &["", "local", "global"], &[false, true, true], &rows);
    let spread: Vec<Vec<String>> = fit
        .spread
        .iter()
        .map(|s| {
            let mut row = vec![escape(&s.term), format_significant(s.global, 4)];
            row.extend(s.quantiles.iter().map(|v| format_significant(*v, 4)));
            row.push(format!("{:.1} %", 100.0 * s.share_distinct_from_zero));
            row
        })
        .collect();
    table(
        &mut out,
        &["term", "global", "min", "lower quartile", "median", "upper quartile", "max", "beyond 2 se"],
        &[false, true, true, true, true, true, true, true],
        &spread,
    );
    if !fit.variation.is_empty() {
        let rows: Vec<Vec<String>> = fit
            .variation
            .iter()
            .map(|t| {
                vec![
                    escape(&variation_label(&t.term)),
                    format_significant(t.variance, 4),
                    format_p_value(Some(t.p_value)),
                ]
            })
            .collect();
        out.push_str(&format!(
            "<div style=\"margin-top:8px\"><b>Does each coefficient vary over space?</b> <span style=\"{SUBTLE}\">places shuffled {} times</span></div>\n",
            fit.variation[0].permutations
        ));
        table(&mut out, &["term", "variance of local estimates", "p-value"], &[false, true, true], &rows);
    }
    if let Some(term) = fit.terms.iter().find(|t| t.as_str() != crate::model::design::INTERCEPT_NAME) {
        if let Ok(svg) = local_coefficient_map(fit, term, PlotSize::default()) {
            out.push_str(&format!("<div style=\"margin-top:8px\">{}</div>\n", svg.markup));
        }
    }
    out.push_str(&format!("<div style=\"{SUBTLE}\">{}</div>\n", escape(SOURCE)));
    out.push_str(&format!("<div style=\"{CAUTION}\">{}</div>\n", escape(VALUATION_CAUTION)));
    card_end(&mut out);
    out
}

/// In a notebook the document leaves out the sales' rows (`rows` empty): a
/// town's local coefficients would weigh megabytes in every saved notebook.
/// The command line's JSON and [`LocalFit::summary`] keep them.
impl Report for LocalSummary {
    fn bundle(&self) -> MimeBundle {
        let bundle = MimeBundle::text_and_html(local_text(self), local_html(self));
        let without_rows = LocalSummary { rows: Vec::new(), ..self.clone() };
        match document_json(&without_rows) {
            Ok(json) => bundle.with(<LocalSummary as DocumentKind>::MIME, json),
            Err(_) => bundle,
        }
    }
}

impl Report for LocalFit {
    fn bundle(&self) -> MimeBundle {
        self.summary().bundle()
    }
}
