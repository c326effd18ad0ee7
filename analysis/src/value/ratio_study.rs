//! Ratio-study statistics (formulas as in `shared/reference/ratio-study.md`,
//! after the IAAO *Standard on Ratio Studies*, 2013).
//!
//! For values `Aᵢ`, sale prices `Sᵢ` and ratios `rᵢ = Aᵢ/Sᵢ`:
//!
//! * median ratio; mean ratio `Σr/n`; weighted mean `ΣA/ΣS`;
//! * `COD = 100 · mean|r − median| / median`;
//! * `PRD = mean / weighted mean`;
//! * `PRB`: slope of the least-squares line of `(r − median)/median` on
//!   `log₂ V`, `V = ½S + ½A/median`, with its t interval on `n − 2` df;
//! * `COV = 100 · sd(r) / mean(r)` (sample sd).
//!
//! The median's interval is distribution-free: the order statistics
//! `r₍ⱼ₎, r₍ₙ₋ⱼ₊₁₎` with the largest `j` such that `P(B ≤ j − 1) ≤ α/2` for
//! `B ~ Binomial(n, ½)` (e.g. Conover, *Practical Nonparametric Statistics*,
//! 3rd ed., §3.2). Trimming drops ratios outside `Q1 − k·IQR, Q3 + k·IQR`
//! (quartiles by linear interpolation, as numpy's default) before any
//! statistic is computed, and the trimmed rows are reported.

use super::standards::{Judgement, PropertyClass, LEVEL_RANGE, PRB_RANGE, PRD_RANGE, STANDARD};
use crate::error::{Error, Result};
use crate::stats::t_critical;
use serde::{Deserialize, Serialize};
use statrs::distribution::{Binomial, DiscreteCDF};
use std::collections::BTreeMap;

/// How to run a ratio study.
#[derive(Debug, Clone, PartialEq)]
pub struct RatioOptions {
    /// IQR multiplier for trimming; `None` keeps every ratio. 1.5 is the usual
    /// choice, 3.0 trims extreme outliers only (common practice).
    pub trim: Option<f64>,
    /// Confidence level of the intervals.
    pub level: f64,
    /// Property class for the COD range.
    pub class: PropertyClass,
}

impl Default for RatioOptions {
    fn default() -> Self {
        Self { trim: Some(1.5), level: 0.95, class: PropertyClass::default() }
    }
}

/// Ratio statistics of one set of sales.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct RatioStatistics {
    /// Sales used (after trimming).
    pub count: usize,
    /// Median ratio.
    pub median: f64,
    /// Distribution-free interval of the median (`None` when the sample is too small).
    pub median_interval: Option<(f64, f64)>,
    /// Mean ratio.
    pub mean: f64,
    /// Weighted mean ratio `ΣA/ΣS`.
    pub weighted_mean: f64,
    /// Coefficient of dispersion, percent.
    pub cod: f64,
    /// Price-related differential.
    pub prd: f64,
    /// Price-related bias.
    pub prb: Option<f64>,
    /// Interval of the PRB.
    pub prb_interval: Option<(f64, f64)>,
    /// Coefficient of variation, percent.
    pub cov: f64,
    /// Each statistic beside its range.
    pub judgements: Vec<Judgement>,
}

/// A group's statistics.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct GroupStudy {
    /// The group's label.
    pub group: String,
    /// Its statistics (`None` when it has fewer than two sales).
    pub statistics: Option<RatioStatistics>,
}

/// A complete ratio study.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct RatioStudy {
    /// Sales with both a value and a price.
    pub n_pairs: usize,
    /// 1-based rows trimmed as outliers, with their ratios.
    pub trimmed: Vec<(usize, f64)>,
    /// Fences used for trimming.
    pub fences: Option<(f64, f64)>,
    /// Statistics over all kept sales.
    pub overall: RatioStatistics,
    /// Statistics per group, in label order.
    pub groups: Vec<GroupStudy>,
    /// Property class of the COD range.
    pub class: PropertyClass,
    /// Interval level.
    pub level: f64,
    /// The standard the ranges come from.
    pub standard: String,
}

use crate::stats::quantile_of_sorted as quantile;

fn median(sorted: &[f64]) -> f64 {
    crate::stats::median_of_sorted(sorted).unwrap_or(f64::NAN)
}

/// Statistics of `(value, price)` pairs (`None` for fewer than two).
pub(crate) fn statistics(pairs: &[(f64, f64)], options: &RatioOptions) -> Option<RatioStatistics> {
    let n = pairs.len();
    if n < 2 {
        return None;
    }
    let nf = n as f64;
    let mut ratios: Vec<f64> = pairs.iter().map(|(a, s)| a / s).collect();
    ratios.sort_by(f64::total_cmp);
    let med = median(&ratios);
    let mean = ratios.iter().sum::<f64>() / nf;
    let weighted_mean = pairs.iter().map(|p| p.0).sum::<f64>() / pairs.iter().map(|p| p.1).sum::<f64>();
    let cod = 100.0 * ratios.iter().map(|r| (r - med).abs()).sum::<f64>() / nf / med;
    let prd = mean / weighted_mean;
    let sd = (ratios.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (nf - 1.0)).sqrt();
    let cov = 100.0 * sd / mean;

    // Median interval from binomial order statistics.
    let alpha = 1.0 - options.level;
    let median_interval = Binomial::new(0.5, n as u64).ok().and_then(|b| {
        let mut j = 0u64;
        while j < n as u64 / 2 && b.cdf(j) <= alpha / 2.0 {
            j += 1;
        }
        // j is now the count of order statistics cut from each end.
        (j >= 1).then(|| (ratios[j as usize - 1], ratios[n - j as usize]))
    });

    // PRB: (r − median)/median on log2 V.
    let (prb, prb_interval) = if n >= 3 {
        let points: Vec<(f64, f64)> =
            pairs.iter().map(|(a, s)| ((0.5 * s + 0.5 * a / med).log2(), (a / s - med) / med)).collect();
        let mx = points.iter().map(|p| p.0).sum::<f64>() / nf;
        let my = points.iter().map(|p| p.1).sum::<f64>() / nf;
        let sxx: f64 = points.iter().map(|p| (p.0 - mx).powi(2)).sum();
        let sxy: f64 = points.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
        if sxx > 0.0 {
            let slope = sxy / sxx;
            let rss: f64 = points.iter().map(|p| (p.1 - my - slope * (p.0 - mx)).powi(2)).sum();
            let se = (rss / (nf - 2.0) / sxx).sqrt();
            let crit = t_critical(options.level, nf - 2.0);
            (Some(slope), Some((slope - crit * se, slope + crit * se)))
        } else {
            (None, None)
        }
    } else {
        (None, None)
    };
    let mut judgements = vec![
        Judgement::new("median ratio", med, Some(LEVEL_RANGE)),
        Judgement::new("COD", cod, options.class.cod_range()),
        Judgement::new("PRD", prd, Some(PRD_RANGE)),
    ];
    if let Some(p) = prb {
        judgements.push(Judgement::new("PRB", p, Some(PRB_RANGE)));
    }
    Some(RatioStatistics {
        count: n,
        median: med,
        median_interval,
        mean,
        weighted_mean,
        cod,
        prd,
        prb,
        prb_interval,
        cov,
        judgements,
    })
}

/// The `(value, price)` pairs a ratio study uses, after trimming.
pub(crate) struct RatioPairs {
    /// Sales with both a value and a price, before trimming.
    pub n_pairs: usize,
    /// `(0-based row, value, price)` of the sales kept.
    pub rows: Vec<(usize, f64, f64)>,
    /// 1-based rows trimmed, with their ratios.
    pub trimmed: Vec<(usize, f64)>,
    /// The trimming fences.
    pub fences: Option<(f64, f64)>,
}

/// Pairs values with prices by row (rows missing either are skipped),
/// refuses a non-positive price or a negative or non-finite value, and trims
/// ratios outside the IQR fences when `options.trim` asks.
pub(crate) fn ratio_pairs(
    values: &[Option<f64>],
    prices: &[Option<f64>],
    options: &RatioOptions,
) -> Result<RatioPairs> {
    if values.len() != prices.len() {
        return Err(Error::Specification("values and prices must have one entry per row".into()));
    }
    let mut rows: Vec<(usize, f64, f64)> = Vec::new();
    for (i, (v, p)) in values.iter().zip(prices).enumerate() {
        if let (Some(v), Some(p)) = (v, p) {
            if !(*p > 0.0 && p.is_finite() && v.is_finite() && *v >= 0.0) {
                return Err(Error::Specification(format!(
                    "row {}: a ratio study needs a positive sale price and a non-negative value, got value {v} and price {p}",
                    i + 1
                )));
            }
            rows.push((i, *v, *p));
        }
    }
    if rows.len() < 2 {
        return Err(Error::Specification(format!(
            "a ratio study needs at least two sales with a value and a price; found {}",
            rows.len()
        )));
    }
    let n_pairs = rows.len();
    let (mut trimmed, mut fences) = (Vec::new(), None);
    if let Some(k) = options.trim {
        if !(k > 0.0) {
            return Err(Error::OutOfRange {
                what: "the trimming multiplier".into(),
                requirement: "positive".into(),
                value: k.to_string(),
            });
        }
        let mut ratios: Vec<f64> = rows.iter().map(|r| r.1 / r.2).collect();
        ratios.sort_by(f64::total_cmp);
        let (q1, q3) = (quantile(&ratios, 0.25), quantile(&ratios, 0.75));
        let (lo, hi) = (q1 - k * (q3 - q1), q3 + k * (q3 - q1));
        fences = Some((lo, hi));
        rows.retain(|r| {
            let ratio = r.1 / r.2;
            let keep = ratio >= lo && ratio <= hi;
            if !keep {
                trimmed.push((r.0 + 1, ratio));
            }
            keep
        });
    }
    Ok(RatioPairs { n_pairs, rows, trimmed, fences })
}

/// Runs a ratio study of `values` against `prices` (aligned by row; rows
/// missing either are skipped), optionally grouped by `groups`.
pub fn ratio_study(
    values: &[Option<f64>],
    prices: &[Option<f64>],
    groups: Option<&[Option<String>]>,
    options: &RatioOptions,
) -> Result<RatioStudy> {
    if values.len() != prices.len() || groups.is_some_and(|g| g.len() != values.len()) {
        return Err(Error::Specification("values, prices and groups must have one entry per row".into()));
    }
    crate::stats::check_level(options.level)?;
    let RatioPairs { n_pairs, rows, trimmed, fences } = ratio_pairs(values, prices, options)?;
    let pairs: Vec<(f64, f64)> = rows.iter().map(|r| (r.1, r.2)).collect();
    let overall = statistics(&pairs, options).ok_or_else(|| {
        Error::Specification("fewer than two sales remain after trimming; loosen the trimming".into())
    })?;
    let mut by_group: BTreeMap<String, Vec<(f64, f64)>> = BTreeMap::new();
    if let Some(groups) = groups {
        for r in &rows {
            let label = groups[r.0].clone().unwrap_or_else(|| "(missing)".to_string());
            by_group.entry(label).or_default().push((r.1, r.2));
        }
    }
    let groups = by_group
        .into_iter()
        .map(|(group, pairs)| GroupStudy { group, statistics: statistics(&pairs, options) })
        .collect();
    Ok(RatioStudy {
        n_pairs,
        trimmed,
        fences,
        overall,
        groups,
        class: options.class,
        level: options.level,
        standard: STANDARD.into(),
    })
}
