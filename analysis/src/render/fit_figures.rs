//! The whole-model figures of a fit, grouped by the question each answers.
//!
//! One source for the text report, the HTML card and the Markdown export, so
//! the three show the same groups in the same order:
//!
//! | group | question | figures |
//! |---|---|---|
//! | `fit` | how closely does the model follow the sales? | R², adjusted R², typical miss (the residual standard error `s`) and its degrees of freedom |
//! | `all terms together` | do the terms explain anything at all? | `F(model df, residual df)` and its p-value |
//! | `comparing models` | is this model better than another of the same target on the same rows? | AIC, BIC, log-likelihood |
//! | `numerics` | can the digits be trusted? | condition number, solver |
//!
//! For a log target the typical miss is also given in price terms: a sale one
//! `s` above its fitted log value sells for `e^s` times the model value, one
//! `s` below for `e^−s` times, so the miss reads as `−(1 − e^−s)` to
//! `+(e^s − 1)` percent of the model value.

use super::numbers::{format_count, format_p_value, format_significant, format_trimmed};
use crate::fit::{Fit, SolverMethod};
use crate::model::TargetTransform;

/// One group of figures: a heading and `(label, value)` items in reading order.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct FigureGroup {
    /// What the group answers, e.g. `fit`, `all terms together`.
    pub heading: &'static str,
    /// The figures, each a label and its formatted value.
    pub items: Vec<(String, String)>,
}

impl FigureGroup {
    /// Each item as `label value`.
    fn phrases(&self) -> Vec<String> {
        self.items
            .iter()
            .map(|(label, value)| if label.is_empty() { value.clone() } else { format!("{label} {value}") })
            .collect()
    }

    /// The items as one line: `R² 0.99548 · adjusted R² 0.99247 · …`.
    pub fn line(&self) -> String {
        self.phrases().join(" · ")
    }

    /// The items packed greedily into lines of at most `width` characters,
    /// breaking only between items (an item longer than `width` gets a line
    /// of its own).
    pub fn lines(&self, width: usize) -> Vec<String> {
        let mut lines: Vec<String> = Vec::new();
        for phrase in self.phrases() {
            match lines.last_mut() {
                Some(line) if line.chars().count() + 3 + phrase.chars().count() <= width => {
                    line.push_str(" · ");
                    line.push_str(&phrase);
                }
                _ => lines.push(phrase),
            }
        }
        lines
    }
}

/// The solver in words.
fn solver_words(method: SolverMethod) -> String {
    match method {
        SolverMethod::ExtendedQr => "pivoted QR in double-double arithmetic".to_string(),
        SolverMethod::RefinedQr { refinement_steps } => {
            format!("pivoted QR with {refinement_steps} refinement step(s)")
        }
    }
}

/// The typical miss `±s`, and for a log target the same miss as
/// percentages of the model value.
fn typical_miss(fit: &Fit) -> String {
    let s = fit.statistics().residual_std_error;
    if fit.spec().target_transform() == TargetTransform::Log && s.is_finite() {
        format!(
            "±{} in logs = −{} % to +{} % of model value",
            format_significant(s, 5),
            format_significant(100.0 * (1.0 - (-s).exp()), 3),
            format_significant(100.0 * (s.exp() - 1.0), 3)
        )
    } else {
        format!("±{}", format_significant(s, 5))
    }
}

/// The four groups, in the order every report shows them.
pub(crate) fn figure_groups(fit: &Fit) -> Vec<FigureGroup> {
    let stats = fit.statistics();
    let uncentred = if fit.spec().has_intercept() { "" } else { " (uncentred: no intercept)" };
    let fit_group = FigureGroup {
        heading: "fit",
        items: vec![
            (format!("R²{uncentred}"), format_significant(stats.r_squared, 5)),
            ("adjusted R²".into(), format_significant(stats.adj_r_squared, 5)),
            ("typical miss".into(), typical_miss(fit)),
            ("residual df".into(), format_count(stats.residual_df)),
        ],
    };
    let together = FigureGroup {
        heading: "all terms together",
        items: match stats.f_statistic {
            Some(f) => vec![
                (format!("F({}, {}) =", stats.model_df, format_trimmed(stats.df_t, 6)), format_significant(f, 5)),
                // `p = 0.0123`, but `p < 1e-16` below what the arithmetic resolves.
                match format_p_value(stats.f_p_value) {
                    p if p.starts_with('<') => ("p".into(), p),
                    p => ("p =".into(), p),
                },
            ],
            None => vec![(String::new(), "no F test (no slope terms, or residuals exactly zero)".into())],
        },
    };
    let comparing = FigureGroup {
        heading: "comparing models",
        items: vec![
            ("AIC".into(), format_significant(stats.aic, 6)),
            ("BIC".into(), format_significant(stats.bic, 6)),
            ("log-likelihood".into(), format_significant(stats.log_likelihood, 6)),
        ],
    };
    let numerics = FigureGroup {
        heading: "numerics",
        items: vec![
            ("condition number".into(), format_significant(stats.condition_number, 4)),
            ("solver".into(), solver_words(fit.solution().method())),
        ],
    };
    vec![fit_group, together, comparing, numerics]
}

#[cfg(test)]
mod tests {
    use super::FigureGroup;

    #[test]
    fn long_groups_break_between_figures() {
        let group = FigureGroup {
            heading: "fit",
            items: vec![
                ("R²".into(), "0.92913".into()),
                ("adjusted R²".into(), "0.92887".into()),
                ("typical miss".into(), "±0.0863".into()),
            ],
        };
        assert_eq!(group.line(), "R² 0.92913 · adjusted R² 0.92887 · typical miss ±0.0863");
        assert_eq!(group.lines(36), vec!["R² 0.92913 · adjusted R² 0.92887", "typical miss ±0.0863"]);
        assert_eq!(group.lines(5), vec!["R² 0.92913", "adjusted R² 0.92887", "typical miss ±0.0863"]);
    }
}
