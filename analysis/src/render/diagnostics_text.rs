//! Plain-text reports of diagnostics and comparisons.

use super::numbers::{format_p_value, format_significant};
use crate::compare::{Comparison, CrossValidationResult, NestedTest};
use crate::diagnose::collinearity::CONDITION_INDEX_WARNING;
use crate::diagnose::{Collinearity, RowFlags, TestResult};

/// Assumption tests as an aligned table.
pub fn tests_text(tests: &[TestResult]) -> String {
    let mut out = String::from("Assumption tests\n");
    out.push_str(&format!("  {:<28} {:>11} {:>12} {:>9}   small p suggests\n", "test", "statistic", "df", "p-value"));
    for t in tests {
        let df = match t.df.as_slice() {
            [] => "—".to_string(),
            [a] => format_significant(*a, 4),
            [a, b] => format!("{}, {}", format_significant(*a, 3), format_significant(*b, 5)),
            more => format!("{more:?}"),
        };
        out.push_str(&format!(
            "  {:<28} {:>11} {:>12} {:>9}   {}\n",
            t.name,
            format_significant(t.statistic, 5),
            df,
            format_p_value(Some(t.p_value)),
            t.alternative
        ));
        if let Some(note) = &t.note {
            out.push_str(&format!("  {:<28} ({note})\n", ""));
        }
    }
    out
}

/// VIF table and condition indices.
pub fn collinearity_text(c: &Collinearity) -> String {
    let mut out = String::from(
        "Collinearity (GVIF per term; interval widening: how many times wider the term's interval is than with uncorrelated terms)\n",
    );
    let width = c.terms.iter().map(|t| t.term.chars().count()).max().unwrap_or(4).max(4);
    out.push_str(&format!("  {:<width$} {:>4} {:>10} {:>20}\n", "term", "df", "GVIF", "interval widening ×"));
    for t in &c.terms {
        out.push_str(&format!(
            "  {:<width$} {:>4} {:>10} {:>20}\n",
            t.term,
            t.df,
            format_significant(t.gvif, 4),
            format_significant(t.interval_widening, 4)
        ));
    }
    let largest = c.condition_indices.last().copied().unwrap_or(f64::NAN);
    out.push_str(&format!(
        "  condition number {} (among the terms, centred: {}); largest condition index {}\n  (above {} is a common-practice warning sign)\n",
        format_significant(c.condition_number, 4),
        format_significant(c.centered_condition_number, 4),
        format_significant(largest, 4),
        CONDITION_INDEX_WARNING
    ));
    out
}

/// Flagged rows, at most `limit` of them.
pub fn flags_text(flags: &RowFlags, limit: usize) -> String {
    let mut out = format!(
        "Rows to check (common-practice cut-offs: |studentized| > {}, leverage > {}, Cook's D > {}): {}\n",
        flags.studentized_cutoff,
        format_significant(flags.leverage_cutoff, 3),
        format_significant(flags.cooks_cutoff, 3),
        flags.rows.len()
    );
    for r in flags.rows.iter().take(limit) {
        let place = match (&r.id, r.line) {
            (Some(id), Some(line)) => format!("{id} (row {}, line {line})", r.row),
            (Some(id), None) => format!("{id} (row {})", r.row),
            (None, Some(line)) => format!("row {} (line {line})", r.row),
            (None, None) => format!("row {}", r.row),
        };
        out.push_str(&format!("  {place:<34} {}\n", r.reasons.join("; ")));
    }
    if flags.rows.len() > limit {
        out.push_str(&format!("  … and {} more (use JSON output for the full list)\n", flags.rows.len() - limit));
    }
    out
}

/// Side-by-side coefficients with standard errors in parentheses.
pub fn comparison_text(c: &Comparison) -> String {
    let name_width = c.rows.iter().map(|r| r.term.chars().count()).max().unwrap_or(4).clamp("typical miss".len(), 30);
    let cell = 22;
    let mut out = format!("  {:<name_width$}", "term");
    for m in &c.models {
        out.push_str(&format!(" {:>cell$}", m.name));
    }
    out.push('\n');
    for row in &c.rows {
        out.push_str(&format!("  {:<name_width$}", row.term));
        for v in &row.cells {
            let text = match v {
                Some((e, s)) => format!("{} ({})", format_significant(*e, 4), format_significant(*s, 2)),
                None => "·".to_string(),
            };
            out.push_str(&format!(" {text:>cell$}"));
        }
        out.push('\n');
    }
    let line = |label: &str, f: &dyn Fn(&crate::compare::table::ModelFigures) -> String| {
        let mut s = format!("  {label:<name_width$}");
        for m in &c.models {
            s.push_str(&format!(" {:>cell$}", f(m)));
        }
        s.push('\n');
        s
    };
    out.push_str(&line("n", &|m| m.n_obs.to_string()));
    out.push_str(&line("R²", &|m| format_significant(m.r_squared, 5)));
    out.push_str(&line("adjusted R²", &|m| format_significant(m.adj_r_squared, 5)));
    out.push_str(&line("typical miss", &|m| format_significant(m.residual_std_error, 5)));
    out.push_str(&line("AIC", &|m| format_significant(m.aic, 6)));
    out.push_str(&line("BIC", &|m| format_significant(m.bic, 6)));
    out
}

/// A nested-model test in one paragraph.
pub fn nested_text(first: &str, second: &str, t: &NestedTest) -> String {
    format!(
        "{second} vs {first}: {} added coefficient(s); F = {} on ({}, {}) df, p {}; likelihood ratio {} on {} df, p {}\n",
        t.q,
        format_significant(t.f_statistic, 5),
        t.q,
        t.residual_df_full,
        format_p_value(Some(t.f_p_value)),
        format_significant(t.lr_statistic, 5),
        t.q,
        format_p_value(Some(t.lr_p_value)),
    )
}

/// Cross-validation summary.
pub fn cross_validation_text(name: &str, cv: &CrossValidationResult) -> String {
    format!(
        "{name}: {}-fold (seed {}) RMSE {} ± {}, MAE {} ± {}, MAPE {} % ± {}\n",
        cv.folds,
        cv.seed,
        format_significant(cv.mean.0, 5),
        format_significant(cv.sd.0, 3),
        format_significant(cv.mean.1, 5),
        format_significant(cv.sd.1, 3),
        format_significant(cv.mean.2, 4),
        format_significant(cv.sd.2, 3),
    )
}
