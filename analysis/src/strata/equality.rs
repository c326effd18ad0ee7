//! Do the groups need models of their own? The F test of equal coefficients.
//!
//! With `G` groups fitted separately (`n_g` rows used, numerical rank `k_g`,
//! residual sum of squares `RSS_g`) and a restricted model fitted once to the
//! same `N = Σ n_g` rows (rank `k_R`, residual sum of squares `RSS_R`):
//!
//! ```text
//! F = [(RSS_R − Σ RSS_g) / (Σ k_g − k_R)] / [Σ RSS_g / (N − Σ k_g)]
//! ```
//!
//! on `(Σ k_g − k_R, N − Σ k_g)` degrees of freedom, the upper tail giving the
//! p-value. With two groups and full rank this is Chow's test (G. C. Chow,
//! 1960, "Tests of equality between sets of coefficients in two linear
//! regressions", *Econometrica* 28(3), 591–605); for `G` groups and designs
//! of lower rank the degrees of freedom count the estimated coefficients as
//! above (F. M. Fisher, 1970, "Tests of equality between sets of coefficients
//! in two linear regressions: an expository note", *Econometrica* 38(2),
//! 361–366). Citations recalled from memory; the formula is the general
//! linear hypothesis test of nested least-squares models (the separate models
//! are the pooled one with every coefficient interacted with the group).
//!
//! Two restricted models are tested ([`EqualityHypothesis`]):
//!
//! * **all coefficients equal** — the pooled model: one model for all groups;
//! * **slopes equal given each group's level** — the pooled model plus the
//!   group as a category: groups differ only by a constant (in logs, a
//!   percentage), the usual location adjustment.
//!
//! The test assumes one error variance across the groups; the typical miss of
//! each group is reported beside it so a reader can judge. Weighted fits use
//! weighted residual sums throughout.

use crate::error::{Error, Result};
use crate::inference::FitStatistics;
use crate::stats::f_upper_p;
use serde::{Deserialize, Serialize};

/// Which restricted model the separate models are tested against.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "snake_case")]
pub enum EqualityHypothesis {
    /// One model for every group (the pooled model).
    AllCoefficients,
    /// Common slopes, one level per group (the pooled model plus the group as a category).
    SlopesGivenLevels,
}

impl EqualityHypothesis {
    /// The hypothesis in words, for reports.
    pub fn words(self) -> &'static str {
        match self {
            EqualityHypothesis::AllCoefficients => "one model for all groups",
            EqualityHypothesis::SlopesGivenLevels => "common slopes, each group its own level",
        }
    }
}

/// The F test of one restricted model against the separate models.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct CoefficientEquality {
    /// The restricted model.
    pub hypothesis: EqualityHypothesis,
    /// Groups fitted separately.
    pub groups: usize,
    /// Rows used, `N = Σ n_g` (the restricted model uses the same rows).
    pub rows: usize,
    /// Residual sum of squares of the restricted model, `RSS_R`.
    pub rss_restricted: f64,
    /// Sum of the groups' residual sums of squares, `Σ RSS_g`.
    pub rss_separate: f64,
    /// Numerator degrees of freedom `Σ k_g − k_R`.
    pub df_numerator: usize,
    /// Denominator degrees of freedom `N − Σ k_g`.
    pub df_denominator: usize,
    /// The F statistic; `None` when undefined (the separate models fit exactly).
    pub f_statistic: Option<f64>,
    /// Its upper-tail p-value.
    pub p_value: Option<f64>,
}

/// Tests `restricted` (fitted to the same rows) against the `separate` models.
pub(crate) fn test(
    hypothesis: EqualityHypothesis,
    restricted: &FitStatistics,
    separate: &[FitStatistics],
) -> std::result::Result<CoefficientEquality, String> {
    equality_f(hypothesis, restricted, separate).map_err(|e| e.to_string())
}

fn equality_f(
    hypothesis: EqualityHypothesis,
    restricted: &FitStatistics,
    separate: &[FitStatistics],
) -> Result<CoefficientEquality> {
    let rows: usize = separate.iter().map(|s| s.n_obs).sum();
    if restricted.n_obs != rows {
        return Err(Error::Specification(format!(
            "the restricted model used {} rows but the groups {rows}; the test needs the same rows",
            restricted.n_obs
        )));
    }
    let rank_separate: usize = separate.iter().map(|s| s.n_coefficients).sum();
    let rank_restricted = restricted.n_coefficients;
    if rank_separate <= rank_restricted {
        return Err(Error::Specification(format!(
            "the separate models estimate {rank_separate} coefficients, no more than the restricted model's \
             {rank_restricted}, so there is nothing to test"
        )));
    }
    let df_numerator = rank_separate - rank_restricted;
    let df_denominator = rows - rank_separate;
    let rss_separate: f64 = separate.iter().map(|s| s.ss_residual).sum();
    let rss_restricted = restricted.ss_residual;
    let f_statistic = (rss_separate > 0.0).then(|| {
        // The restricted RSS is never below the separate one in exact
        // arithmetic; a rounding difference below it reads as no improvement.
        let gain = (rss_restricted - rss_separate).max(0.0);
        (gain / df_numerator as f64) / (rss_separate / df_denominator as f64)
    });
    let p_value = f_statistic.and_then(|f| f_upper_p(f, df_numerator as f64, df_denominator as f64));
    Ok(CoefficientEquality {
        hypothesis,
        groups: separate.len(),
        rows,
        rss_restricted,
        rss_separate,
        df_numerator,
        df_denominator,
        f_statistic,
        p_value,
    })
}
