//! Ratio statistics by price tier: vertical equity seen tier by tier.
//!
//! Sales are ranked by a *tier basis* and cut into `t` groups of (nearly)
//! equal count — quantile groups: with `n` sales the first `n mod t` tiers
//! hold `⌊n/t⌋ + 1` sales and the rest `⌊n/t⌋`, ties in the basis broken by
//! row order (the grouping of numpy's `array_split` over a stable sort).
//! Each tier gets the full ratio statistics of [`super::ratio_study`]. Median
//! ratios that fall from the low tier to the high tier say dear properties
//! are valued low against cheap ones (regressivity); rising medians say the
//! reverse.
//!
//! The basis matters. Ranking by sale price makes low-priced sales look
//! over-valued by construction (a sale priced low by chance lands in the low
//! tier with a high ratio); ranking by value biases the other way. The blend
//! `V = ½S + ½A/median` — the basis of the PRB in the IAAO *Standard on
//! Ratio Studies* (2013) — balances the two (recalled from memory; see
//! `shared/reference/ratio-study.md`), and is the default.

use super::ratio_study::{ratio_pairs, statistics, RatioOptions, RatioPairs, RatioStatistics};
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// What sales are ranked by to form tiers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum TierBasis {
    /// The sale price `S`.
    SalePrice,
    /// The value `A`.
    Value,
    /// `V = ½S + ½A/median ratio`, the PRB's proxy for market value.
    #[default]
    Blend,
}

impl TierBasis {
    /// In words, for reports.
    pub fn describe(self) -> &'static str {
        match self {
            TierBasis::SalePrice => "sale price",
            TierBasis::Value => "value",
            TierBasis::Blend => "½ price + ½ value ÷ median ratio",
        }
    }
}

/// One tier.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct PriceTier {
    /// 1 for the lowest tier.
    pub tier: usize,
    /// Lowest basis amount in the tier (currency).
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub lower: f64,
    /// Highest basis amount in the tier.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub upper: f64,
    /// The tier's ratio statistics (`None` with fewer than two sales).
    pub statistics: Option<RatioStatistics>,
}

/// A ratio study by price tier.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct TierStudy {
    /// What the sales were ranked by.
    pub basis: TierBasis,
    /// Sales with a value and a price.
    pub n_pairs: usize,
    /// 1-based rows trimmed before tiering, with their ratios.
    pub trimmed: Vec<(usize, f64)>,
    /// The tiers, lowest first.
    pub tiers: Vec<PriceTier>,
    /// Statistics over all kept sales (its PRB is the tiers' trend in one number).
    pub overall: RatioStatistics,
    /// Median ratio of the top tier minus that of the bottom tier.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub median_spread: f64,
}

/// Ratio statistics of `values` against `prices` in `tiers` quantile groups
/// of `basis` (module documentation). Trimming and the interval level follow
/// `options`, as in [`super::ratio_study`]; trimming happens before tiering.
/// Needs 2 to 20 tiers and at least two sales per tier.
pub fn ratio_tiers(
    values: &[Option<f64>],
    prices: &[Option<f64>],
    tiers: usize,
    basis: TierBasis,
    options: &RatioOptions,
) -> Result<TierStudy> {
    crate::stats::check_level(options.level)?;
    if !(2..=20).contains(&tiers) {
        return Err(Error::OutOfRange {
            what: "the number of price tiers".into(),
            requirement: "between 2 and 20".into(),
            value: tiers.to_string(),
        });
    }
    let RatioPairs { n_pairs, rows, trimmed, .. } = ratio_pairs(values, prices, options)?;
    let n = rows.len();
    if n < 2 * tiers {
        return Err(Error::Specification(format!(
            "{tiers} tiers need at least {} sales (two per tier); {n} remain after trimming — use fewer tiers",
            2 * tiers
        )));
    }
    let pairs: Vec<(f64, f64)> = rows.iter().map(|r| (r.1, r.2)).collect();
    let overall = statistics(&pairs, options)
        .ok_or_else(|| Error::Specification("fewer than two sales remain after trimming".into()))?;
    // The blend basis divides by the median ratio the overall statistics already hold.
    let median = overall.median;
    let basis_of = |(a, s): (f64, f64)| match basis {
        TierBasis::SalePrice => s,
        TierBasis::Value => a,
        TierBasis::Blend => 0.5 * s + 0.5 * a / median,
    };
    let mut order: Vec<usize> = (0..n).collect();
    // A stable sort keeps row order among equal amounts.
    order.sort_by(|&i, &j| basis_of(pairs[i]).total_cmp(&basis_of(pairs[j])));
    let (size, extra) = (n / tiers, n % tiers);
    let mut start = 0;
    let mut out = Vec::with_capacity(tiers);
    for t in 0..tiers {
        let len = size + usize::from(t < extra);
        let members = &order[start..start + len];
        start += len;
        let tier_pairs: Vec<(f64, f64)> = members.iter().map(|&i| pairs[i]).collect();
        out.push(PriceTier {
            tier: t + 1,
            lower: basis_of(pairs[members[0]]),
            upper: basis_of(pairs[members[len - 1]]),
            statistics: statistics(&tier_pairs, options),
        });
    }
    let tier_median = |t: &PriceTier| t.statistics.as_ref().map_or(f64::NAN, |s| s.median);
    let median_spread = tier_median(&out[tiers - 1]) - tier_median(&out[0]);
    Ok(TierStudy { basis, n_pairs, trimmed, tiers: out, overall, median_spread })
}
