//! Exports of a fit for a written study: a Markdown section and a CSV table.

use super::numbers::{format_p_value, format_significant};
use crate::fit::Fit;

/// The fit as a Markdown section: what was fit, the coefficient table, fit
/// quality and the caution.
pub fn fit_markdown(fit: &Fit, level: f64) -> crate::Result<String> {
    let stats = fit.statistics();
    let prov = fit.provenance();
    let pct = super::prose::percent(level);
    let mut out = format!("### Least-squares fit of {}\n\n", fit.spec().target_label());
    out.push_str(&format!(
        "Data: `{}` (SHA-256 `{}`), {} records used, dropped for missing values: {}. Standard errors: {}.\n\n",
        prov.describe(),
        prov.sha256,
        super::numbers::format_count(stats.n_obs),
        fit.design().dropped().describe(),
        fit.covariance_description()
    ));
    out.push_str(&format!(
        "| term | estimate | std error | t | p-value | {pct} % interval |\n|---|---:|---:|---:|---:|---:|\n"
    ));
    for c in fit.coefficients(level)? {
        out.push_str(&format!(
            "| {} | {} | {} | {} | {} | {} to {} |\n",
            c.term.replace('|', "\\|"),
            format_significant(c.estimate, 6),
            format_significant(c.std_error, 4),
            c.t.map_or("—".into(), |t| format!("{t:.2}")),
            format_p_value(c.p_value),
            format_significant(c.ci_low, 5),
            format_significant(c.ci_high, 5)
        ));
    }
    out.push('\n');
    for group in super::fit_figures::figure_groups(fit) {
        out.push_str(&format!("- **{}**: {}\n", group.heading, group.line().replace('|', "\\|")));
    }
    out.push('\n');
    out.push_str(&format!("> {}\n", super::prose::VALUATION_CAUTION));
    Ok(out)
}

/// The coefficient table as CSV (RFC 4180), full precision (shortest
/// round-trip), via the `csv` crate so quoting is right.
pub fn fit_csv(fit: &Fit, level: f64) -> crate::Result<String> {
    let mut writer = csv::Writer::from_writer(Vec::new());
    let write_error = |e: csv::Error| crate::Error::Specification(format!("could not write CSV: {e}"));
    writer.write_record(["term", "estimate", "std_error", "t", "p_value", "ci_low", "ci_high"]).map_err(write_error)?;
    for c in fit.coefficients(level)? {
        let opt = |v: Option<f64>| v.map(|x| x.to_string()).unwrap_or_default();
        writer
            .write_record([
                c.term.clone(),
                c.estimate.to_string(),
                c.std_error.to_string(),
                opt(c.t),
                opt(c.p_value),
                c.ci_low.to_string(),
                c.ci_high.to_string(),
            ])
            .map_err(write_error)?;
    }
    let bytes = writer.into_inner().map_err(|e| crate::Error::Specification(format!("could not write CSV: {e}")))?;
    Ok(String::from_utf8_lossy(&bytes).into_owned())
}
