//! The distribution and order-statistic helpers every layer above shares:
//! confidence-level checks, Student t and F tails (from `statrs`, regularized
//! incomplete beta), and the median and quantiles of sorted data. Below
//! `data`, so that reading a fit (`inference`), the valuation job (`value`)
//! and charts (`plot`) use one definition each.

use crate::error::{Error, Result};
use statrs::distribution::{ContinuousCDF, FisherSnedecor, StudentsT};

/// Checks a confidence level.
pub(crate) fn check_level(level: f64) -> Result<()> {
    if level > 0.0 && level < 1.0 {
        Ok(())
    } else {
        Err(Error::OutOfRange {
            what: "the confidence level".into(),
            requirement: "strictly between 0 and 1 (e.g. 0.95)".into(),
            value: level.to_string(),
        })
    }
}

/// The two-sided critical value `t_{1−α/2, df}`; the normal quantile when `df` is infinite.
pub(crate) fn t_critical(level: f64, df: f64) -> f64 {
    match StudentsT::new(0.0, 1.0, df) {
        Ok(t) => t.inverse_cdf(0.5 + level / 2.0),
        Err(_) => f64::NAN,
    }
}

/// Two-sided p-value of a t statistic, from the survival function (accurate in the tail).
pub(crate) fn t_two_sided_p(t: f64, df: f64) -> f64 {
    match StudentsT::new(0.0, 1.0, df) {
        Ok(dist) => (2.0 * dist.sf(t.abs())).min(1.0),
        Err(_) => f64::NAN,
    }
}

/// Upper-tail p-value of an F statistic.
pub(crate) fn f_upper_p(f: f64, df1: f64, df2: f64) -> Option<f64> {
    FisherSnedecor::new(df1, df2).ok().map(|d| d.sf(f))
}

/// Median of an ascending slice; `None` when empty.
pub(crate) fn median_of_sorted(sorted: &[f64]) -> Option<f64> {
    let n = sorted.len();
    match n {
        0 => None,
        _ if n % 2 == 1 => Some(sorted[n / 2]),
        _ => Some(0.5 * (sorted[n / 2 - 1] + sorted[n / 2])),
    }
}

/// Quantile `q` of ascending data by linear interpolation between order
/// statistics (numpy's default method); used for trimming fences and bin widths.
pub(crate) fn quantile_of_sorted(sorted: &[f64], q: f64) -> f64 {
    let position = q * (sorted.len() - 1) as f64;
    let (i, frac) = (position.floor() as usize, position.fract());
    if i + 1 < sorted.len() {
        sorted[i] + (sorted[i + 1] - sorted[i]) * frac
    } else {
        sorted[i]
    }
}
