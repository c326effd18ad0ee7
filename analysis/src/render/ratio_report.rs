//! Ratio studies as text and HTML, each statistic beside its range and the
//! standard named, with the valuation caution.

use super::bundle::{MimeBundle, Report};
use super::html::{card_end, card_start, escape, table, CAUTION, SUBTLE};
use super::numbers::format_significant;
use super::prose::{percent, wrap, VALUATION_CAUTION};
use crate::documents::{to_json, RatioStudyDocument};
use crate::value::{Judgement, RatioStatistics, RatioStudy};

fn verdict(j: &Judgement) -> &'static str {
    match j.inside {
        Some(true) => "inside",
        Some(false) => "OUTSIDE",
        None => "no range",
    }
}

fn range_text(j: &Judgement) -> String {
    j.range
        .map(|(lo, hi)| format!("{} – {}", format_significant(lo, 3), format_significant(hi, 3)))
        .unwrap_or_else(|| "—".into())
}

fn interval_text(s: &RatioStatistics, statistic: &str) -> String {
    let pair = match statistic {
        "median ratio" => s.median_interval,
        "PRB" => s.prb_interval,
        _ => None,
    };
    pair.map(|(a, b)| format!("{} to {}", format_significant(a, 4), format_significant(b, 4))).unwrap_or_default()
}

fn rows(s: &RatioStatistics) -> Vec<[String; 5]> {
    let mut out: Vec<[String; 5]> = s
        .judgements
        .iter()
        .map(|j| {
            [
                j.statistic.clone(),
                format_significant(j.value, 4),
                interval_text(s, &j.statistic),
                range_text(j),
                verdict(j).to_string(),
            ]
        })
        .collect();
    out.push(["mean ratio".into(), format_significant(s.mean, 4), String::new(), "—".into(), String::new()]);
    out.push([
        "weighted mean ratio".into(),
        format_significant(s.weighted_mean, 4),
        String::new(),
        "—".into(),
        String::new(),
    ]);
    out.push(["COV".into(), format_significant(s.cov, 4), String::new(), "—".into(), String::new()]);
    out
}

/// The study as aligned text.
pub fn ratio_text(study: &RatioStudy) -> String {
    let pct = percent(study.level);
    let mut out = format!(
        "Ratio study: {} sales with a value and a price, {} used after trimming\n  property class: {}\n",
        study.n_pairs,
        study.overall.count,
        study.class.label()
    );
    if let Some((lo, hi)) = study.fences {
        out.push_str(&format!(
            "  trimmed {} ratio(s) outside [{}, {}]{}\n",
            study.trimmed.len(),
            format_significant(lo, 4),
            format_significant(hi, 4),
            if study.trimmed.is_empty() {
                String::new()
            } else {
                format!(
                    ": rows {}",
                    study.trimmed.iter().take(12).map(|(r, _)| r.to_string()).collect::<Vec<_>>().join(", ")
                        + if study.trimmed.len() > 12 { ", …" } else { "" }
                )
            }
        ));
    }
    out.push_str(&format!(
        "\n  {:<20} {:>10} {:>22} {:>14}  {}\n",
        "statistic",
        "value",
        format!("{pct} % interval"),
        "range",
        "verdict"
    ));
    for r in rows(&study.overall) {
        out.push_str(&format!("  {:<20} {:>10} {:>22} {:>14}  {}\n", r[0], r[1], r[2], r[3], r[4]));
    }
    if !study.groups.is_empty() {
        out.push_str(&format!(
            "\n  {:<22} {:>6} {:>8} {:>8} {:>8} {:>8}\n",
            "group", "n", "median", "COD", "PRD", "PRB"
        ));
        for g in &study.groups {
            match &g.statistics {
                Some(s) => out.push_str(&format!(
                    "  {:<22} {:>6} {:>8} {:>8} {:>8} {:>8}\n",
                    g.group,
                    s.count,
                    format_significant(s.median, 4),
                    format_significant(s.cod, 3),
                    format_significant(s.prd, 4),
                    s.prb.map(|p| format_significant(p, 3)).unwrap_or_else(|| "—".into())
                )),
                None => out.push_str(&format!("  {:<22} {:>6}  (too few sales)\n", g.group, "<2")),
            }
        }
    }
    out.push_str(&format!("\n  ranges: {}\n", study.standard));
    out.push_str(&wrap(VALUATION_CAUTION, 96, "  ", "  "));
    out
}

/// The study as an HTML card.
pub fn ratio_html(study: &RatioStudy) -> String {
    let pct = percent(study.level);
    let mut out = String::new();
    card_start(&mut out, &format!("Ratio study — {} sales", study.overall.count));
    out.push_str(&format!(
        "<div style=\"{SUBTLE}\">{} pairs · {} trimmed as outliers · property class: {}</div>\n",
        study.n_pairs,
        study.trimmed.len(),
        escape(study.class.label())
    ));
    let body: Vec<Vec<String>> = rows(&study.overall)
        .into_iter()
        .map(|r| {
            let verdict = match r[4].as_str() {
                "OUTSIDE" => "<b style=\"color:#c24e2f\">outside</b>".to_string(),
                "inside" => "<span style=\"color:#2f6b4f\">inside</span>".to_string(),
                other => escape(other),
            };
            vec![escape(&r[0]), escape(&r[1]), escape(&r[2]), escape(&r[3]), verdict]
        })
        .collect();
    let interval = format!("{pct} % interval");
    table(&mut out, &["statistic", "value", &interval, "range", "verdict"], &[false, true, true, true, false], &body);
    if !study.groups.is_empty() {
        let groups: Vec<Vec<String>> = study
            .groups
            .iter()
            .map(|g| match &g.statistics {
                Some(s) => vec![
                    escape(&g.group),
                    s.count.to_string(),
                    format_significant(s.median, 4),
                    format_significant(s.cod, 3),
                    format_significant(s.prd, 4),
                    s.prb.map(|p| format_significant(p, 3)).unwrap_or_else(|| "—".into()),
                ],
                None => {
                    vec![escape(&g.group), "&lt;2".into(), String::new(), String::new(), String::new(), String::new()]
                }
            })
            .collect();
        table(
            &mut out,
            &["group", "n", "median", "COD", "PRD", "PRB"],
            &[false, true, true, true, true, true],
            &groups,
        );
    }
    out.push_str(&format!("<div style=\"{SUBTLE}\">Ranges: {}</div>\n", escape(&study.standard)));
    out.push_str(&format!("<div style=\"{CAUTION}\">{}</div>\n", escape(VALUATION_CAUTION)));
    card_end(&mut out);
    out
}

impl Report for RatioStudy {
    fn bundle(&self) -> MimeBundle {
        let bundle = MimeBundle::text_and_html(ratio_text(self), ratio_html(self));
        match to_json(&RatioStudyDocument::from(self.clone()), "ratio-study document") {
            Ok(json) => bundle.with(super::bundle::RATIO_JSON_MIME, json),
            Err(_) => bundle,
        }
    }
}
