//! A set of models by group as people read it: the groups side by side (rows
//! used, R², typical miss), each coefficient across the groups with its
//! interval, the tests of whether the groups need models of their own, and
//! the groups that have no model with their reasons.

use super::bundle::{MimeBundle, Report};
use super::html::{card_end, card_start, escape, table, CAUTION, NOTE, SUBTLE};
use super::numbers::{format_count, format_p_value, format_significant};
use super::prose::{percent, VALUATION_CAUTION};
use crate::documents::{document_json, DocumentKind};
use crate::inference::FitSummary;
use crate::plot::{coefficient_by_group, PlotSize};
use crate::strata::{CoefficientEquality, StratifiedFit, StratifiedSummary};

/// The level at which a set is shown as a cell's value.
const SHOWN_LEVEL: f64 = 0.95;

/// `±s`, and for a log target the spread as percentages of the model value
/// (`±0.0871 (−8.3 % / +9.1 %)`).
fn typical_miss(fit: &FitSummary) -> String {
    let s = fit.residual_std_error;
    if fit.target_transform == "log" && s.is_finite() {
        format!(
            "±{} (−{} % / +{} %)",
            format_significant(s, 4),
            format_significant(100.0 * (1.0 - (-s).exp()), 3),
            format_significant(100.0 * (s.exp() - 1.0), 3)
        )
    } else {
        format!("±{}", format_significant(s, 5))
    }
}

/// One group's row of the side-by-side table: group, rows, used, R², adjusted R², typical miss.
fn group_row(group: &str, rows: usize, fit: &FitSummary) -> [String; 6] {
    [
        group.to_string(),
        format_count(rows),
        format_count(fit.n_obs),
        format_significant(fit.r_squared, 4),
        format_significant(fit.adj_r_squared, 4),
        typical_miss(fit),
    ]
}

/// The test's conclusion at the set's level.
fn conclusion(test: &CoefficientEquality, level: f64) -> String {
    let alpha = 1.0 - level;
    match test.p_value {
        Some(p) if p < alpha => "the groups differ: separate models fit better".into(),
        Some(_) => format!("no evidence against it at the {} % level", percent(alpha)),
        None => "undefined (the separate models fit exactly)".into(),
    }
}

/// `F(df₁, df₂) = f` and `p = 0.025` (or `p < 1e-16`).
fn test_figures(test: &CoefficientEquality) -> (String, String) {
    let f = test.f_statistic.map_or("—".into(), |f| format_significant(f, 4));
    let p = match format_p_value(test.p_value) {
        p if p.starts_with('<') => format!("p {p}"),
        p => format!("p = {p}"),
    };
    (format!("F({}, {}) = {f}", test.df_numerator, test.df_denominator), p)
}

const TEST_SOURCE: &str = "F test of equal coefficients: Chow (1960) for two groups, Fisher (1970) for several; \
     it assumes one error variance across the groups — compare their typical misses.";

/// The set as aligned text.
pub fn stratified_text(set: &StratifiedSummary) -> String {
    let pct = percent(set.level);
    let fitted = set.fitted().count();
    let mut out = format!(
        "Models by {} — {}\n  {} group(s), {} with a model; {} row(s) without a {} value\n  data: {}\n\n",
        set.grouped_by,
        set.model,
        set.strata.len(),
        fitted,
        format_count(set.rows_without_group),
        set.grouped_by,
        set.data.describe()
    );
    let width = set.strata.iter().map(|s| s.group.chars().count()).max().unwrap_or(5).clamp(6, 28);
    out.push_str(&format!(
        "  {:<width$} {:>8} {:>8} {:>8} {:>8}   typical miss\n",
        set.grouped_by, "rows", "used", "R²", "adj. R²"
    ));
    let line = |cells: [String; 6]| {
        format!(
            "  {:<width$} {:>8} {:>8} {:>8} {:>8}   {}\n",
            cells[0], cells[1], cells[2], cells[3], cells[4], cells[5]
        )
    };
    for s in &set.strata {
        match &s.fit {
            Some(fit) => out.push_str(&line(group_row(&s.group, s.rows, fit))),
            None => out.push_str(&format!("  {:<width$} {:>8}   no model\n", s.group, format_count(s.rows))),
        }
    }
    if let Some(pooled) = &set.pooled {
        out.push_str(&line(group_row("(pooled)", pooled.data.rows, pooled)));
    }

    out.push_str(&format!("\nCoefficients by {} (estimate and {pct} % interval)\n", set.grouped_by));
    for term in set.terms() {
        out.push_str(&format!("  {term}\n"));
        let entries = set
            .strata
            .iter()
            .map(|s| (s.group.as_str(), s.fit.as_ref()))
            .chain(set.pooled.as_ref().map(|p| ("(pooled)", Some(p))));
        for (group, fit) in entries {
            let Some(fit) = fit else { continue };
            match fit.coefficients.iter().find(|c| c.term == term) {
                Some(c) => out.push_str(&format!(
                    "    {:<width$} {:>12}   [{}, {}]\n",
                    group,
                    format_significant(c.estimate, 5),
                    format_significant(c.ci_low, 4),
                    format_significant(c.ci_high, 4)
                )),
                None => out.push_str(&format!("    {group:<width$} {:>12}\n", "not estimated")),
            }
        }
    }

    out.push_str(&format!("\nDo the {} values need models of their own?\n", set.grouped_by));
    for test in &set.tests {
        let (f, p) = test_figures(test);
        out.push_str(&format!(
            "  {:<42} {:<22} {:<12} {}\n",
            test.hypothesis.words(),
            f,
            p,
            conclusion(test, set.level)
        ));
    }
    if let Some(reason) = &set.tests_not_run {
        out.push_str(&format!("  not tested: {reason}\n"));
    }
    out.push_str(&format!("  {TEST_SOURCE}\n"));

    let not_fitted: Vec<_> = set.strata.iter().filter_map(|s| s.not_fitted.as_ref().map(|r| (&s.group, r))).collect();
    if !not_fitted.is_empty() || set.pooled_not_fitted.is_some() {
        out.push_str("\nWithout a model\n");
        for (group, reason) in not_fitted {
            out.push_str(&format!("  {group}: {reason}\n"));
        }
        if let Some(reason) = &set.pooled_not_fitted {
            out.push_str(&format!("  (pooled): {reason}\n"));
        }
    }
    out.push_str(&format!("\n{VALUATION_CAUTION}\n"));
    out
}

/// The set as an HTML card, with the chart of the first slope across groups.
pub fn stratified_html(set: &StratifiedSummary) -> String {
    let pct = percent(set.level);
    let mut out = String::new();
    card_start(&mut out, &format!("Models by {} — {}", set.grouped_by, set.target));
    out.push_str(&format!(
        "<div style=\"{SUBTLE}\">{} · {} group(s), {} with a model · {} row(s) without a {} value · data: {}</div>\n",
        escape(&set.model),
        set.strata.len(),
        set.fitted().count(),
        format_count(set.rows_without_group),
        escape(&set.grouped_by),
        escape(&set.data.describe())
    ));
    let mut rows: Vec<Vec<String>> = Vec::new();
    for s in &set.strata {
        match &s.fit {
            Some(fit) => rows.push(group_row(&s.group, s.rows, fit).iter().map(|c| escape(c)).collect()),
            None => rows.push(vec![
                escape(&s.group),
                format_count(s.rows),
                "—".into(),
                "—".into(),
                "—".into(),
                "<b style=\"color:#c24e2f\">no model</b>".into(),
            ]),
        }
    }
    if let Some(pooled) = &set.pooled {
        let mut row: Vec<String> = group_row("pooled", pooled.data.rows, pooled).iter().map(|c| escape(c)).collect();
        row[0] = "<i>pooled</i>".into();
        rows.push(row);
    }
    table(
        &mut out,
        &[&set.grouped_by, "rows", "used", "R²", "adj. R²", "typical miss"],
        &[false, true, true, true, true, false],
        &rows,
    );

    let mut groups: Vec<(&str, Option<&FitSummary>)> =
        set.strata.iter().filter(|s| s.fit.is_some()).map(|s| (s.group.as_str(), s.fit.as_ref())).collect();
    groups.extend(set.pooled.as_ref().map(|p| ("pooled", Some(p))));
    let mut header: Vec<String> = vec!["term".into()];
    header.extend(groups.iter().map(|(g, _)| g.to_string()));
    let header_refs: Vec<&str> = header.iter().map(String::as_str).collect();
    let numeric: Vec<bool> = std::iter::once(false).chain(groups.iter().map(|_| true)).collect();
    let coefficient_rows: Vec<Vec<String>> = set
        .terms()
        .iter()
        .map(|term| {
            std::iter::once(escape(term))
                .chain(groups.iter().map(|(_, fit)| {
                    match fit.and_then(|f| f.coefficients.iter().find(|c| &c.term == term)) {
                        Some(c) => format!(
                            "{}<br><span style=\"{SUBTLE}\">[{}, {}]</span>",
                            format_significant(c.estimate, 4),
                            format_significant(c.ci_low, 3),
                            format_significant(c.ci_high, 3)
                        ),
                        None => "—".into(),
                    }
                }))
                .collect()
        })
        .collect();
    out.push_str(&format!("<div style=\"margin-top:8px\"><b>Coefficients by {}</b> <span style=\"{SUBTLE}\">estimate and {pct} % interval</span></div>\n", escape(&set.grouped_by)));
    // As many columns as groups: the table scrolls sideways rather than overflow the card.
    out.push_str("<div style=\"overflow-x:auto\">\n");
    table(&mut out, &header_refs, &numeric, &coefficient_rows);
    out.push_str("</div>\n");

    if let Some(term) = set.terms().into_iter().find(|t| t != crate::model::design::INTERCEPT_NAME) {
        if let Ok(svg) = coefficient_by_group(set, &term, PlotSize::default()) {
            out.push_str(&format!("<div style=\"margin-top:8px\">{}</div>\n", svg.markup));
        }
    }

    out.push_str(&format!(
        "<div style=\"margin-top:8px\"><b>Do the {} values need models of their own?</b></div>\n",
        escape(&set.grouped_by)
    ));
    let test_rows: Vec<Vec<String>> = set
        .tests
        .iter()
        .map(|t| {
            let (f, p) = test_figures(t);
            vec![escape(t.hypothesis.words()), escape(&f), escape(&p), escape(&conclusion(t, set.level))]
        })
        .collect();
    if !test_rows.is_empty() {
        table(&mut out, &["restricted model", "F", "p-value", "reading"], &[false, true, true, false], &test_rows);
    }
    if let Some(reason) = &set.tests_not_run {
        out.push_str(&format!("<div style=\"{NOTE}\">Not tested: {}</div>\n", escape(reason)));
    }
    out.push_str(&format!("<div style=\"{SUBTLE}\">{}</div>\n", escape(TEST_SOURCE)));
    for s in &set.strata {
        if let Some(reason) = &s.not_fitted {
            out.push_str(&format!(
                "<div style=\"{NOTE}\"><b>{}</b> has no model: {}</div>\n",
                escape(&s.group),
                escape(reason)
            ));
        }
    }
    if let Some(reason) = &set.pooled_not_fitted {
        out.push_str(&format!("<div style=\"{NOTE}\">No pooled model: {}</div>\n", escape(reason)));
    }
    out.push_str(&format!("<div style=\"{CAUTION}\">{}</div>\n", escape(VALUATION_CAUTION)));
    card_end(&mut out);
    out
}

impl Report for StratifiedSummary {
    fn bundle(&self) -> MimeBundle {
        let bundle = MimeBundle::text_and_html(stratified_text(self), stratified_html(self));
        match document_json(self) {
            Ok(json) => bundle.with(<StratifiedSummary as DocumentKind>::MIME, json),
            Err(_) => bundle,
        }
    }
}

/// Shown at the 95 % level; call [`StratifiedFit::summary`] for another.
impl Report for StratifiedFit {
    fn bundle(&self) -> MimeBundle {
        match self.summary(SHOWN_LEVEL) {
            Ok(summary) => summary.bundle(),
            Err(error) => MimeBundle::default().with("text/plain", format!("cannot summarise the models: {error}")),
        }
    }
}
