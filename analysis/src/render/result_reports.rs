//! Bundles for the other results: charts, comparisons, cross-validation,
//! diagnostics and predictions. Text comes from the text renderers; HTML
//! uses the same card and table style as fits and frames.

use super::bundle::{MimeBundle, Report, COMPARISON_JSON_MIME};
use super::diagnostics_text::{
    collinearity_text, comparison_text, cross_validation_text, flags_text, nested_text, tests_text,
};
use super::html::{card_end, card_start, escape, table, CAUTION};
use super::numbers::{format_p_value, format_significant};
use super::prose::{percent, VALUATION_CAUTION};
use super::text::predictions_text;
use crate::compare::{Comparison, CrossValidationResult, NestedTest};
use crate::diagnose::collinearity::CONDITION_INDEX_WARNING;
use crate::diagnose::{Collinearity, RowFlags, TestResult};
use crate::documents::{to_json, ComparisonDocument};
use crate::plot::Svg;
use crate::predict::Predictions;

impl Report for Svg {
    fn bundle(&self) -> MimeBundle {
        MimeBundle::default()
            .with("text/plain", format!("[chart: {}]", self.title))
            .with("image/svg+xml", self.markup.clone())
    }
}

/// A nested-model test: does the larger model improve on the smaller one?
impl Report for NestedTest {
    fn bundle(&self) -> MimeBundle {
        let text = nested_text("smaller model", "larger model", self);
        let mut html = String::new();
        card_start(&mut html, &format!("Nested test — {} added coefficient(s)", self.q));
        let rows = vec![
            vec!["coefficients".into(), self.k_restricted.to_string(), self.k_full.to_string()],
            vec![
                "residual sum of squares".into(),
                format_significant(self.rss_restricted, 6),
                format_significant(self.rss_full, 6),
            ],
        ];
        table(&mut html, &["", "smaller model", "larger model"], &[false, true, true], &rows);
        let tests = vec![
            vec![
                "F".into(),
                format_significant(self.f_statistic, 5),
                format!("({}, {})", self.q, self.residual_df_full),
                format_p_value(Some(self.f_p_value)),
            ],
            vec![
                "likelihood ratio".into(),
                format_significant(self.lr_statistic, 5),
                self.q.to_string(),
                format_p_value(Some(self.lr_p_value)),
            ],
        ];
        table(&mut html, &["test", "statistic", "df", "p-value"], &[false, true, true, true], &tests);
        card_end(&mut html);
        MimeBundle::text_and_html(text, html)
    }
}

impl Report for Comparison {
    fn bundle(&self) -> MimeBundle {
        let text = comparison_text(self);
        let mut html = String::new();
        card_start(&mut html, &format!("{} models side by side", self.models.len()));
        let mut header = vec!["term".to_string()];
        header.extend(self.models.iter().map(|m| m.name.clone()));
        let header_refs: Vec<&str> = header.iter().map(String::as_str).collect();
        let mut numeric = vec![false];
        numeric.extend(self.models.iter().map(|_| true));
        let mut rows: Vec<Vec<String>> = self
            .rows
            .iter()
            .map(|r| {
                std::iter::once(escape(&r.term))
                    .chain(r.cells.iter().map(|c| match c {
                        Some((e, s)) => format!(
                            "{} <span style=\"color:#5b6777\">({})</span>",
                            format_significant(*e, 4),
                            format_significant(*s, 2)
                        ),
                        None => "·".into(),
                    }))
                    .collect()
            })
            .collect();
        type Figure = fn(&crate::compare::table::ModelFigures) -> String;
        let figures: [(&str, Figure); 6] = [
            ("n", |m| m.n_obs.to_string()),
            ("R²", |m| format_significant(m.r_squared, 5)),
            ("adjusted R²", |m| format_significant(m.adj_r_squared, 5)),
            ("typical miss", |m| format_significant(m.residual_std_error, 5)),
            ("AIC", |m| format_significant(m.aic, 6)),
            ("BIC", |m| format_significant(m.bic, 6)),
        ];
        for (label, f) in figures {
            rows.push(std::iter::once(format!("<b>{label}</b>")).chain(self.models.iter().map(f)).collect());
        }
        table(&mut html, &header_refs, &numeric, &rows);
        card_end(&mut html);
        let bundle = MimeBundle::text_and_html(text, html);
        match to_json(&ComparisonDocument::of_table(self), "comparison document") {
            Ok(json) => bundle.with(COMPARISON_JSON_MIME, json),
            Err(_) => bundle,
        }
    }
}

impl Report for CrossValidationResult {
    fn bundle(&self) -> MimeBundle {
        let text = cross_validation_text("cross-validation", self);
        let mut html = String::new();
        card_start(&mut html, &format!("{}-fold cross-validation (seed {})", self.folds, self.seed));
        let mut rows: Vec<Vec<String>> = self
            .scores
            .iter()
            .map(|s| {
                vec![
                    s.fold.to_string(),
                    s.n_train.to_string(),
                    s.n_test.to_string(),
                    format_significant(s.rmse, 5),
                    format_significant(s.mae, 5),
                    format_significant(s.mape, 4),
                ]
            })
            .collect();
        rows.push(vec![
            "<b>mean ± sd</b>".into(),
            String::new(),
            String::new(),
            format!("{} ± {}", format_significant(self.mean.0, 5), format_significant(self.sd.0, 3)),
            format!("{} ± {}", format_significant(self.mean.1, 5), format_significant(self.sd.1, 3)),
            format!("{} ± {}", format_significant(self.mean.2, 4), format_significant(self.sd.2, 3)),
        ]);
        table(&mut html, &["fold", "fitted on", "predicted", "RMSE", "MAE", "MAPE %"], &[true; 6], &rows);
        card_end(&mut html);
        MimeBundle::text_and_html(text, html)
    }
}

/// The assumption tests of a fit, as one displayable result.
#[derive(Debug, Clone, PartialEq)]
pub struct AssumptionTests(pub Vec<TestResult>);

impl Report for AssumptionTests {
    fn bundle(&self) -> MimeBundle {
        let text = tests_text(&self.0);
        let mut html = String::new();
        card_start(&mut html, "Assumption tests");
        let rows: Vec<Vec<String>> = self
            .0
            .iter()
            .map(|t| {
                vec![
                    escape(&t.name),
                    format_significant(t.statistic, 5),
                    t.df.iter().map(|d| format_significant(*d, 4)).collect::<Vec<_>>().join(", "),
                    escape(&format_p_value(Some(t.p_value))),
                    escape(&t.alternative)
                        + &t.note
                            .as_ref()
                            .map(|n| format!("<br><span style=\"color:#5b6777\">{}</span>", escape(n)))
                            .unwrap_or_default(),
                ]
            })
            .collect();
        table(
            &mut html,
            &["test", "statistic", "df", "p-value", "a small p-value suggests"],
            &[false, true, true, true, false],
            &rows,
        );
        card_end(&mut html);
        MimeBundle::text_and_html(text, html)
    }
}

impl Report for Collinearity {
    fn bundle(&self) -> MimeBundle {
        let text = collinearity_text(self);
        let mut html = String::new();
        card_start(&mut html, "Collinearity");
        let rows: Vec<Vec<String>> = self
            .terms
            .iter()
            .map(|t| {
                vec![
                    escape(&t.term),
                    t.df.to_string(),
                    format_significant(t.gvif, 4),
                    format_significant(t.interval_widening, 4),
                ]
            })
            .collect();
        table(&mut html, &["term", "df", "GVIF", "interval widening ×"], &[false, true, true, true], &rows);
        html.push_str(&format!(
            "<div style=\"color:#5b6777;font-size:12px\">Interval widening: how many times wider a term's interval is than it would be \
were the term uncorrelated with the others (√GVIF for a one-column term). Condition number {} (among the terms, centred: {}); \
largest condition index {}. Above {} is a common-practice warning sign.</div>\n",
            format_significant(self.condition_number, 4),
            format_significant(self.centered_condition_number, 4),
            format_significant(self.condition_indices.last().copied().unwrap_or(f64::NAN), 4),
            CONDITION_INDEX_WARNING
        ));
        card_end(&mut html);
        MimeBundle::text_and_html(text, html)
    }
}

impl Report for RowFlags {
    fn bundle(&self) -> MimeBundle {
        let text = flags_text(self, 50);
        let mut html = String::new();
        card_start(&mut html, &format!("{} rows to check", self.rows.len()));
        let rows: Vec<Vec<String>> = self
            .rows
            .iter()
            .take(200)
            .map(|r| {
                vec![
                    r.row.to_string(),
                    r.line.map(|l| l.to_string()).unwrap_or_default(),
                    escape(r.id.as_deref().unwrap_or("")),
                    escape(&r.reasons.join("; ")),
                ]
            })
            .collect();
        table(&mut html, &["row", "file line", "id", "why"], &[true, true, false, false], &rows);
        card_end(&mut html);
        MimeBundle::text_and_html(text, html)
    }
}

impl Report for Predictions {
    fn bundle(&self) -> MimeBundle {
        let mut text = predictions_text(self);
        text.push_str(&format!("  {VALUATION_CAUTION}\n"));
        let mut html = String::new();
        card_start(&mut html, &format!("Predictions with {} % intervals", percent(self.level)));
        let log_scale = self.rows.iter().any(|p| p.median_original.is_some());
        let rows: Vec<Vec<String>> = self
            .rows
            .iter()
            .map(|p| {
                let mut r = vec![
                    p.row.to_string(),
                    format_significant(p.estimate, 6),
                    format_significant(p.se_fit, 4),
                    format!("{} to {}", format_significant(p.ci_low, 5), format_significant(p.ci_high, 5)),
                    format!("{} to {}", format_significant(p.pi_low, 5), format_significant(p.pi_high, 5)),
                ];
                if log_scale {
                    r.push(p.median_original.map(|v| format_significant(v, 6)).unwrap_or_default());
                    r.push(p.mean_original.map(|v| format_significant(v, 6)).unwrap_or_default());
                }
                r.push(if p.outside_range.is_empty() {
                    String::new()
                } else {
                    format!(
                        "<span style=\"color:#c24e2f\">outside fitted range: {}</span>",
                        escape(&p.outside_range.join(", "))
                    )
                });
                r
            })
            .collect();
        let mut header = vec!["row", "estimate", "se (mean)", "mean interval", "prediction interval"];
        if log_scale {
            header.extend(["median (original scale)", "mean (original scale)"]);
        }
        header.push("check");
        let mut numeric = vec![true; header.len()];
        if let Some(last) = numeric.last_mut() {
            *last = false;
        }
        table(&mut html, &header, &numeric, &rows);
        html.push_str(&format!("<div style=\"{CAUTION}\">{}</div>\n", escape(VALUATION_CAUTION)));
        card_end(&mut html);
        MimeBundle::text_and_html(text, html)
    }
}
