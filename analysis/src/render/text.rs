//! Plain-text report of a fit: under 100 columns, aligned, for terminals.

use super::fit_figures::figure_groups;
use super::numbers::{format_count, format_p_value, format_significant};
use super::prose::percent;
use crate::error::Result;
use crate::fit::{AssembledFit, Fit};
use crate::predict::Predictions;

/// The aligned coefficient table (estimate, standard error, t, p-value,
/// interval at `level`), one line per term.
fn coefficient_lines(coefficients: &[crate::inference::Coefficient], level: f64) -> String {
    let mut out = String::new();
    let pct = percent(level);
    // Names are never cut: two levels of one category can share a long prefix.
    let name_width = coefficients.iter().map(|c| c.term.chars().count()).max().unwrap_or(4).max(4);
    out.push_str(&format!(
        "  {:<name_width$} {:>12} {:>11} {:>8} {:>9}   {pct} % interval\n",
        "term", "estimate", "std error", "t", "p-value"
    ));
    for c in coefficients {
        let term = &c.term;
        out.push_str(&format!(
            "  {:<name_width$} {:>12} {:>11} {:>8} {:>9}   [{}, {}]\n",
            term,
            format_significant(c.estimate, 6),
            format_significant(c.std_error, 4),
            c.t.map_or("—".into(), |t| format!("{t:.2}")),
            format_p_value(c.p_value),
            format_significant(c.ci_low, 5),
            format_significant(c.ci_high, 5),
        ));
    }
    out
}

/// A fit assembled from batches or partitions ([`AssembledFit`]) as an
/// aligned plain-text report: the same coefficient table as [`fit_text`], and
/// the whole-fit figures its sums give (no row-level results exist).
pub fn assembled_fit_text(fit: &AssembledFit, level: f64) -> Result<String> {
    let coefficients = fit.coefficients(level)?;
    let stats = fit.statistics();
    let prov = &fit.provenance;
    let mut out = format!(
        "Least-squares fit of {}, read in {} batches\n",
        fit.recipe.spec.target_label(),
        format_count(fit.pieces)
    );
    out.push_str(&format!("  source    {}\n", prov.describe()));
    out.push_str(&format!("  data      {} records, sha256 {}…\n", format_count(prov.rows), prov.short_hash()));
    out.push_str(&format!(
        "  rows      {} used, dropped for missing values: {}\n",
        format_count(stats.n_obs),
        fit.dropped.describe()
    ));
    out.push_str(&format!("  errors    {}\n\n", fit.covariance_kind.label()));
    out.push_str(&coefficient_lines(&coefficients, level));
    let aliased = fit.aliased_names();
    if !aliased.is_empty() {
        out.push_str(&format!(
            "\n  left out (each is a linear combination of the columns above): {}\n",
            aliased.join(", ")
        ));
    }
    out.push_str(&format!(
        "\n  R² {}   adjusted {}   residual std error {} on {} df   condition number {}\n",
        format_significant(stats.r_squared, 6),
        format_significant(stats.adj_r_squared, 6),
        format_significant(stats.residual_std_error, 5),
        format_count(stats.residual_df),
        format_significant(stats.condition_number, 3),
    ));
    Ok(out)
}

/// The fit as an aligned plain-text report at confidence `level`.
pub fn fit_text(fit: &Fit, level: f64) -> Result<String> {
    let coefficients = fit.coefficients(level)?;
    let stats = fit.statistics();
    let spec = fit.spec();
    let prov = fit.provenance();
    let dropped = fit.design().dropped();
    let mut out = String::new();

    out.push_str(&format!("Least-squares fit of {}\n", spec.target_label()));
    out.push_str(&format!("  source    {}\n", prov.describe()));
    out.push_str(&format!(
        "  data      {} records · {} columns, sha256 {}…, read {}\n",
        format_count(prov.rows),
        prov.cols,
        prov.short_hash(),
        prov.loaded_at
    ));
    out.push_str(&format!(
        "  rows      {} used, dropped for missing values: {}\n",
        format_count(stats.n_obs),
        dropped.describe()
    ));
    out.push_str(&format!("  errors    {}\n\n", fit.covariance_description()));

    out.push_str(&coefficient_lines(&coefficients, level));
    let aliased = fit.aliased_names();
    if !aliased.is_empty() {
        out.push_str(&format!(
            "\n  left out (each is a linear combination of the columns above): {}\n",
            aliased.join(", ")
        ));
    }
    out.push('\n');
    let groups = figure_groups(fit);
    let heading_width = groups.iter().map(|g| g.heading.chars().count()).max().unwrap_or(0);
    // Under 100 columns: long groups continue under their first figure.
    let value_width = 96usize.saturating_sub(heading_width + 5).max(40);
    for group in &groups {
        for (i, line) in group.lines(value_width).iter().enumerate() {
            let heading = if i == 0 { group.heading } else { "" };
            out.push_str(&format!("  {heading:<heading_width$}   {line}\n"));
        }
    }
    if stats.condition_number > 1e8 {
        out.push_str(
            "  note: the condition number is large; small changes in the data can move the coefficients a lot.\n",
        );
    }
    Ok(out)
}

/// Predictions as an aligned plain-text table.
pub fn predictions_text(predictions: &Predictions) -> String {
    let pct = percent(predictions.level);
    let log_scale = predictions.rows.iter().any(|p| p.median_original.is_some());
    let mut out = format!(
        "Predictions ({pct} % intervals{})\n",
        if log_scale { "; original-scale median and smearing mean" } else { "" }
    );
    out.push_str(&format!(
        "  {:>6} {:>12} {:>10} {:>25} {:>25}",
        "row", "estimate", "se(mean)", "mean interval", "prediction interval"
    ));
    if log_scale {
        out.push_str(&format!(" {:>12} {:>12}", "median", "mean"));
    }
    out.push('\n');
    for p in &predictions.rows {
        out.push_str(&format!(
            "  {:>6} {:>12} {:>10} {:>25} {:>25}",
            p.row,
            format_significant(p.estimate, 6),
            format_significant(p.se_fit, 4),
            format!("[{}, {}]", format_significant(p.ci_low, 5), format_significant(p.ci_high, 5)),
            format!("[{}, {}]", format_significant(p.pi_low, 5), format_significant(p.pi_high, 5)),
        ));
        if let (Some(median), Some(mean)) = (p.median_original, p.mean_original) {
            out.push_str(&format!(" {:>12} {:>12}", format_significant(median, 6), format_significant(mean, 6)));
        }
        if !p.outside_range.is_empty() {
            out.push_str(" !");
        }
        out.push('\n');
    }
    let extrapolated: Vec<String> = predictions
        .rows
        .iter()
        .filter(|p| !p.outside_range.is_empty())
        .map(|p| format!("row {} ({})", p.row, p.outside_range.join(", ")))
        .collect();
    if !extrapolated.is_empty() {
        out.push_str(&format!(
            "  ! outside the fitted data's range, so the model extrapolates: {}\n",
            extrapolated.join("; ")
        ));
    }
    if !predictions.skipped_rows.is_empty() {
        let listed: Vec<String> = predictions.skipped_rows.iter().take(20).map(usize::to_string).collect();
        out.push_str(&format!(
            "  not predicted (a term value is missing): rows {}{}\n",
            listed.join(", "),
            if predictions.skipped_rows.len() > 20 { ", …" } else { "" }
        ));
    }
    out
}
