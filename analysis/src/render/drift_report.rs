//! The drift report between two runs as text and HTML: data changes first,
//! then the coefficients that left their old interval, the fit statistics,
//! and the ratio-study statistics beside their ranges with the crossings
//! marked.

use super::bundle::{MimeBundle, Report, DRIFT_JSON_MIME};
use super::html::{card_end, card_start, escape, table, CAUTION, NOTE, SUBTLE};
use super::numbers::{format_count, format_trimmed};
use super::prose::VALUATION_CAUTION;
use crate::documents::to_json;
use crate::drift::{CoefficientDrift, DataStamp, DriftReport, FitDrift, GroupChange, StratifiedDrift, ThresholdDrift};

fn number(v: Option<f64>) -> String {
    v.map(|x| format_trimmed(x, 5)).unwrap_or_else(|| "—".into())
}

/// A fit statistic's JSON key in the words a reader knows it by.
fn statistic_words(key: &str) -> &str {
    match key {
        "n_obs" => "sales used",
        "r_squared" => "R²",
        "adj_r_squared" => "adjusted R²",
        "residual_std_error" => "typical miss (residual std error)",
        "aic" => "AIC",
        "bic" => "BIC",
        other => other,
    }
}

fn data_line(f: &FitDrift) -> String {
    let short = |d: &DataStamp| d.1.get(..12).unwrap_or("").to_string();
    let count = |d: &DataStamp| format_count(usize::try_from(d.2).unwrap_or(usize::MAX));
    format!(
        "{} records → {} records; {}",
        count(&f.data_old),
        count(&f.data_new),
        if f.data_changed {
            format!("contents changed (sha256 {}… → {}…)", short(&f.data_old), short(&f.data_new))
        } else {
            "same bytes".into()
        }
    )
}

fn moved_line(c: &CoefficientDrift) -> (String, String, String) {
    let (o, n) = (c.old.unwrap_or_default(), c.new.unwrap_or_default());
    (c.term.clone(), format!("{} [{}, {}]", number(Some(o.0)), number(Some(o.1)), number(Some(o.2))), number(Some(n.0)))
}

fn membership(term: &CoefficientDrift) -> Option<&'static str> {
    match (term.old, term.new) {
        (None, Some(_)) => Some("new term"),
        (Some(_), None) => Some("dropped"),
        _ => None,
    }
}

fn verdict(inside: Option<bool>) -> &'static str {
    match inside {
        Some(true) => "inside",
        Some(false) => "outside",
        None => "no range",
    }
}

fn range_text(t: &ThresholdDrift) -> String {
    t.range
        .map(|(lo, hi)| format!("{} – {}", format_trimmed(lo, 3), format_trimmed(hi, 3)))
        .unwrap_or_else(|| "—".into())
}

fn threshold_label(t: &ThresholdDrift) -> String {
    if t.scope == "overall" {
        t.statistic.clone()
    } else {
        format!("{} ({})", t.statistic, t.scope)
    }
}

/// The statistic `name` of a fit drift, old → new.
fn statistic_pair(f: &FitDrift, name: &str) -> (Option<f64>, Option<f64>) {
    f.statistics.iter().find(|s| s.statistic == name).map_or((None, None), |s| (s.old, s.new))
}

/// What happened to one group, in words (the compared case: its figures).
fn group_change_words(change: &GroupChange) -> String {
    let reason = |r: &Option<String>| r.as_ref().map(|r| format!(" ({r})")).unwrap_or_default();
    match change {
        GroupChange::Compared { drift } => {
            let (n_old, n_new) = statistic_pair(drift, "n_obs");
            let (r_old, r_new) = statistic_pair(drift, "r_squared");
            let moved = drift.coefficients.iter().filter(|c| c.moved).count();
            format!(
                "sales used {} → {}; R² {} → {}; {moved} coefficient(s) outside their old interval",
                number(n_old),
                number(n_new),
                number(r_old),
                number(r_new)
            )
        }
        GroupChange::ModelGained { before } => format!("model gained; before: no model{}", reason(before)),
        GroupChange::ModelLost { now } => format!("MODEL LOST; now: no model{}", reason(now)),
        GroupChange::NeverFitted { now } => format!("no model in either run{}", reason(now)),
    }
}

/// One set of models by group across the runs, as text.
fn group_drift_text(index: usize, set: &StratifiedDrift) -> String {
    let mut out = format!("\nModels by {} {} — {}\n", set.grouped_by, index + 1, set.target);
    let width = set.groups.iter().map(|g| g.group.chars().count()).max().unwrap_or(6).clamp(8, 28);
    for g in &set.groups {
        out.push_str(&format!("  {:<width$} {}\n", g.group, group_change_words(&g.change)));
        if let GroupChange::Compared { drift } = &g.change {
            for c in drift.coefficients.iter().filter(|c| c.moved) {
                let (term, old, new) = moved_line(c);
                out.push_str(&format!("  {:<width$}   {term}: {old} → {new}\n", ""));
            }
        }
    }
    if let Some(pooled) = &set.pooled {
        out.push_str(&format!(
            "  {:<width$} {}\n",
            "(pooled)",
            group_change_words(&GroupChange::Compared { drift: pooled.clone() })
        ));
    }
    for t in &set.tests {
        out.push_str(&format!("  test, {}: p {} → {}\n", t.statistic, number(t.old), number(t.new)));
    }
    out
}

/// One set of models by group across the runs, as HTML.
fn group_drift_html(index: usize, set: &StratifiedDrift) -> String {
    let mut out = format!(
        "<div style=\"margin-top:8px\"><b>Models by {} {} — {}</b></div>\n",
        escape(&set.grouped_by),
        index + 1,
        escape(&set.target)
    );
    let mut rows: Vec<Vec<String>> = Vec::new();
    for g in &set.groups {
        let words = escape(&group_change_words(&g.change));
        let words = match g.change {
            GroupChange::ModelLost { .. } => format!("<b style=\"color:#c24e2f\">{words}</b>"),
            _ => words,
        };
        rows.push(vec![escape(&g.group), words]);
        if let GroupChange::Compared { drift } = &g.change {
            for c in drift.coefficients.iter().filter(|c| c.moved) {
                let (term, old, new) = moved_line(c);
                rows.push(vec![
                    String::new(),
                    format!("<b style=\"color:#c24e2f\">{}</b> {} → {}", escape(&term), escape(&old), escape(&new)),
                ]);
            }
        }
    }
    table(&mut out, &[&set.grouped_by, "what moved"], &[false, false], &rows);
    for t in &set.tests {
        out.push_str(&format!(
            "<div style=\"{SUBTLE}\">test, {}: p {} → {}</div>\n",
            escape(&t.statistic),
            number(t.old),
            number(t.new)
        ));
    }
    out
}

/// The report as aligned text.
pub fn drift_text(report: &DriftReport) -> String {
    let mut out = format!("Drift from {}\n        to {}\n", report.old, report.new);
    let moved_total = report.moved_coefficients().count() + report.moved_group_coefficients().count();
    let crossed_total = report.crossed_thresholds().count();
    out.push_str(&format!(
        "  {} coefficient(s) outside their old interval; {} ratio-study statistic(s) crossed their range\n",
        moved_total, crossed_total
    ));
    for (i, f) in report.fits.iter().enumerate() {
        out.push_str(&format!("\nFit {} — {}\n", i + 1, f.target));
        out.push_str(&format!("  data: {}\n", data_line(f)));
        for s in &f.statistics {
            out.push_str(&format!(
                "  {:<34} {:>12} → {:>12}\n",
                statistic_words(&s.statistic),
                number(s.old),
                number(s.new)
            ));
        }
        let moved: Vec<&CoefficientDrift> = f.coefficients.iter().filter(|c| c.moved).collect();
        out.push_str(&format!("  coefficients outside their old interval: {}\n", moved.len()));
        let width = f.coefficients.iter().map(|c| c.term.chars().count()).max().unwrap_or(0).max(28);
        for c in moved {
            let (term, old, new) = moved_line(c);
            out.push_str(&format!("    {term:<width$} {old} → {new}\n"));
        }
        for c in &f.coefficients {
            if let Some(what) = membership(c) {
                out.push_str(&format!("    {:<width$} {what}\n", c.term));
            }
        }
    }
    for (i, r) in report.ratio_studies.iter().enumerate() {
        out.push_str(&format!(
            "\nRatio study {} — sales used {} → {}\n",
            i + 1,
            number(r.count_old.map(|c| c as f64)),
            number(r.count_new.map(|c| c as f64))
        ));
        out.push_str(&format!("  {:<28} {:>10} → {:>10}  {:>12}  {}\n", "statistic", "old", "new", "range", "verdict"));
        for t in &r.statistics {
            let verdicts = format!(
                "{} → {}{}",
                verdict(t.old_inside),
                verdict(t.new_inside),
                if t.crossed { "  CROSSED" } else { "" }
            );
            out.push_str(&format!(
                "  {:<28} {:>10} → {:>10}  {:>12}  {verdicts}\n",
                threshold_label(t),
                number(t.old),
                number(t.new),
                range_text(t)
            ));
        }
        if !r.standard.is_empty() {
            out.push_str(&format!("  ranges: {}\n", r.standard));
        }
    }
    for (i, set) in report.by_group.iter().enumerate() {
        out.push_str(&group_drift_text(i, set));
    }
    if report.unpaired_by_group > 0 {
        out.push_str(&format!(
            "\n{} set(s) of models by group appear in only one of the runs and were not compared.\n",
            report.unpaired_by_group
        ));
    }
    if report.unpaired_fits > 0 {
        out.push_str(&format!(
            "\n{} fit(s) appear in only one of the runs and were not compared.\n",
            report.unpaired_fits
        ));
    }
    if report.unpaired_ratio_studies > 0 {
        out.push_str(&format!(
            "\n{} ratio stud(ies) appear in only one of the runs and were not compared.\n",
            report.unpaired_ratio_studies
        ));
    }
    if let Some(check) = &report.sales_chasing {
        out.push('\n');
        out.push_str(check.bundle().get("text/plain").unwrap_or_default());
    }
    if let Some(reason) = &report.sales_chasing_not_run {
        out.push_str(&format!("\nSales-chasing check not run: {reason}\n"));
    }
    out
}

/// The report as an HTML card.
pub fn drift_html(report: &DriftReport) -> String {
    let mut out = String::new();
    card_start(&mut out, "What moved between the runs");
    out.push_str(&format!(
        "<div style=\"{SUBTLE}\">from {}<br>to {}</div>\n",
        escape(&report.old),
        escape(&report.new)
    ));
    let moved_total = report.moved_coefficients().count() + report.moved_group_coefficients().count();
    let crossed_total = report.crossed_thresholds().count();
    if moved_total + crossed_total > 0 {
        out.push_str(&format!(
            "<div style=\"{NOTE}\">{moved_total} coefficient(s) outside their old interval; {crossed_total} ratio-study statistic(s) crossed their range.</div>\n"
        ));
    }
    for (i, f) in report.fits.iter().enumerate() {
        out.push_str(&format!(
            "<div style=\"margin-top:8px\"><b>Fit {} — {}</b> <span style=\"{SUBTLE}\">data: {}</span></div>\n",
            i + 1,
            escape(&f.target),
            escape(&data_line(f))
        ));
        let stats: Vec<Vec<String>> = f
            .statistics
            .iter()
            .map(|s| vec![escape(statistic_words(&s.statistic)), number(s.old), number(s.new)])
            .collect();
        table(&mut out, &["statistic", "old", "new"], &[false, true, true], &stats);
        let mut terms: Vec<Vec<String>> = f
            .coefficients
            .iter()
            .filter(|c| c.moved)
            .map(|c| {
                let (term, old, new) = moved_line(c);
                vec![
                    escape(&term),
                    escape(&old),
                    escape(&new),
                    "<b style=\"color:#c24e2f\">left its interval</b>".into(),
                ]
            })
            .collect();
        for c in &f.coefficients {
            if let Some(what) = membership(c) {
                terms.push(vec![escape(&c.term), number(c.old.map(|o| o.0)), number(c.new.map(|n| n.0)), escape(what)]);
            }
        }
        if terms.is_empty() {
            out.push_str(&format!("<div style=\"{SUBTLE}\">Every coefficient stayed inside its old interval.</div>\n"));
        } else {
            table(
                &mut out,
                &["term", "old estimate [interval]", "new estimate", ""],
                &[false, true, true, false],
                &terms,
            );
        }
    }
    for (i, r) in report.ratio_studies.iter().enumerate() {
        out.push_str(&format!(
            "<div style=\"margin-top:8px\"><b>Ratio study {}</b> <span style=\"{SUBTLE}\">sales used {} → {}</span></div>\n",
            i + 1,
            number(r.count_old.map(|c| c as f64)),
            number(r.count_new.map(|c| c as f64))
        ));
        let rows: Vec<Vec<String>> = r
            .statistics
            .iter()
            .map(|t| {
                let mark = if t.crossed {
                    format!("<b style=\"color:#c24e2f\">{} → {}</b>", verdict(t.old_inside), verdict(t.new_inside))
                } else {
                    escape(verdict(t.new_inside))
                };
                vec![escape(&threshold_label(t)), number(t.old), number(t.new), escape(&range_text(t)), mark]
            })
            .collect();
        table(&mut out, &["statistic", "old", "new", "range", "verdict"], &[false, true, true, true, false], &rows);
        if !r.standard.is_empty() {
            out.push_str(&format!("<div style=\"{SUBTLE}\">Ranges: {}</div>\n", escape(&r.standard)));
        }
    }
    for (i, set) in report.by_group.iter().enumerate() {
        out.push_str(&group_drift_html(i, set));
    }
    out.push_str(&format!("<div style=\"{CAUTION}\">{}</div>\n", escape(VALUATION_CAUTION)));
    if let Some(reason) = &report.sales_chasing_not_run {
        out.push_str(&format!("<div style=\"{SUBTLE}\">Sales-chasing check not run: {}</div>\n", escape(reason)));
    }
    card_end(&mut out);
    if let Some(check) = &report.sales_chasing {
        out.push_str(check.bundle().get("text/html").unwrap_or_default());
    }
    out
}

impl Report for DriftReport {
    fn bundle(&self) -> MimeBundle {
        let bundle = MimeBundle::text_and_html(drift_text(self), drift_html(self));
        match to_json(self, "drift report") {
            Ok(json) => bundle.with(DRIFT_JSON_MIME, json),
            Err(_) => bundle,
        }
    }
}
