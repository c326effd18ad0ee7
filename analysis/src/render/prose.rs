//! Wording shared by every report: the valuation caution, confidence levels
//! as percentages, and word wrap for the text forms. Below all the report
//! modules, so none of them imports another for these.

/// The caution every valuation-facing report carries.
pub const VALUATION_CAUTION: &str =
    "These figures are analytical estimates, not appraisals. Valuations for taxation or \
lending are governed by local assessment law and licensed appraisal practice.";

/// A confidence level as a percentage without trailing zeros (`95`, `99.5`).
pub(crate) fn percent(level: f64) -> String {
    let value = (level * 100.0 * 1e6).round() / 1e6;
    format!("{value}")
}

/// Greedy word wrap to `width` columns with first-line and continuation indents.
pub(crate) fn wrap(text: &str, width: usize, first: &str, rest: &str) -> String {
    let mut out = String::new();
    let mut line = first.to_string();
    let mut empty = true;
    for word in text.split_whitespace() {
        if !empty && line.chars().count() + 1 + word.chars().count() > width {
            out.push_str(line.trim_end());
            out.push('\n');
            line = rest.to_string();
            empty = true;
        }
        if !empty {
            line.push(' ');
        }
        line.push_str(word);
        empty = false;
    }
    out.push_str(line.trim_end());
    out.push('\n');
    out
}
