//! The sales-chasing check: were sold parcels' values moved differently from
//! unsold parcels' between two runs?
//!
//! "Sales chasing" is setting a sold parcel's value at or near its sale price
//! while its unsold neighbours keep theirs. It makes a ratio study on those
//! sales look better than the roll is, because the ratio study then measures
//! the values against the very prices they were copied from. The IAAO
//! *Standard on Ratio Studies* (2013) describes detecting it by comparing the
//! value changes of sold and unsold parcels between two valuation dates
//! (recalled from memory; see its appendix on sales chasing).
//!
//! Given two value rolls ([`super::ValueRoll`]) the check pairs parcels by
//! id and takes each parcel's value change `ln(later / earlier)`. A parcel is
//! **sold between the runs** when the later roll records a sale the earlier
//! one did not have (no sale, or an older one). Then:
//!
//! * the median and mean change of sold and of unsold parcels;
//! * the Mann–Whitney rank-sum test of equal change distributions
//!   (Mann & Whitney 1947, *Ann. Math. Statist.* 18, 50–60): `U` of the sold
//!   sample from mid-ranks, `E U = n₁n₂/2`,
//!   `Var U = n₁n₂/12 · [(n + 1) − Σ(t³ − t)/(n(n − 1))]` over tie groups of
//!   size `t` (Conover, *Practical Nonparametric Statistics*, 3rd ed., §5.1),
//!   two-sided p from `z = (|U − E U| − ½)/√Var U` (continuity-corrected);
//! * the ratio statistics of the sold parcels' earlier values and of their
//!   later values against the same prices (untrimmed): a COD that collapses
//!   from the earlier to the later run is the mark of chasing.
//!
//! A small p-value with sold parcels' values moving more toward their prices
//! than unsold parcels' values moved is a reason to look; it is not proof.
//! Values are not time-adjusted here: the check compares changes, and a
//! market move shifts sold and unsold parcels alike.

use super::ratio_study::{statistics, RatioOptions, RatioStatistics};
use super::roll::ValueRoll;
use crate::error::{Error, Result};
use crate::stats::median_of_sorted;
use serde::{Deserialize, Serialize};
use statrs::distribution::{ContinuousCDF, Normal};
use std::collections::BTreeMap;

/// A two-sample rank test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct RankSumTest {
    /// `U` of the first sample (sold parcels).
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub u: f64,
    /// The continuity-corrected standard score.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub z_score: f64,
    /// Two-sided p-value (normal approximation with tie correction).
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub p_value: f64,
}

/// How one group's values changed between the runs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ValueChange {
    /// Parcels in the group valued by both runs.
    pub count: usize,
    /// Median of `ln(later/earlier)`.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub median_log_change: f64,
    /// Mean of `ln(later/earlier)`.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub mean_log_change: f64,
}

/// The outcome of the check (module documentation).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct SalesChasingCheck {
    /// The earlier run's valuation date.
    pub earlier_date: String,
    /// The later run's valuation date.
    pub later_date: String,
    /// Parcels sold between the runs.
    pub sold: ValueChange,
    /// Parcels not sold between the runs.
    pub unsold: ValueChange,
    /// Mann–Whitney test of equal change distributions, sold against unsold.
    pub rank_sum: RankSumTest,
    /// Sold parcels' earlier values against their sale prices.
    pub sold_ratios_earlier: Option<RatioStatistics>,
    /// Sold parcels' later values against the same prices.
    pub sold_ratios_later: Option<RatioStatistics>,
    /// Parcels on only one roll, or without a value in one of them, left out.
    pub not_paired: usize,
}

fn summarise(mut changes: Vec<f64>) -> ValueChange {
    changes.sort_by(f64::total_cmp);
    let count = changes.len();
    ValueChange {
        count,
        median_log_change: median_of_sorted(&changes).unwrap_or(f64::NAN),
        mean_log_change: changes.iter().sum::<f64>() / count as f64,
    }
}

/// The Mann–Whitney test of `first` against `second` (module documentation).
pub fn rank_sum_test(first: &[f64], second: &[f64]) -> Result<RankSumTest> {
    let (n1, n2) = (first.len(), second.len());
    if n1 == 0 || n2 == 0 {
        return Err(Error::Specification("a rank-sum test needs values in both samples".into()));
    }
    let mut all: Vec<(f64, bool)> =
        first.iter().map(|v| (*v, true)).chain(second.iter().map(|v| (*v, false))).collect();
    if let Some((v, _)) = all.iter().find(|(v, _)| !v.is_finite()) {
        return Err(Error::OutOfRange {
            what: "a value of the rank-sum test".into(),
            requirement: "a finite number".into(),
            value: v.to_string(),
        });
    }
    all.sort_by(|a, b| a.0.total_cmp(&b.0));
    let n = all.len();
    let (mut rank_sum_first, mut tie_term) = (0.0, 0.0);
    let mut i = 0;
    while i < n {
        let mut j = i;
        while j + 1 < n && all[j + 1].0 == all[i].0 {
            j += 1;
        }
        // Ranks i+1 … j+1 share their mean.
        let mid_rank = (i + j + 2) as f64 / 2.0;
        let t = (j - i + 1) as f64;
        tie_term += t * t * t - t;
        rank_sum_first += mid_rank * all[i..=j].iter().filter(|p| p.1).count() as f64;
        i = j + 1;
    }
    let (a, b, nf) = (n1 as f64, n2 as f64, n as f64);
    let u = rank_sum_first - a * (a + 1.0) / 2.0;
    let mean = a * b / 2.0;
    let variance = a * b / 12.0 * ((nf + 1.0) - tie_term / (nf * (nf - 1.0)));
    let z_score = if variance > 0.0 { ((u - mean).abs() - 0.5).max(0.0) / variance.sqrt() } else { 0.0 };
    let p_value = (2.0 * Normal::standard().sf(z_score)).min(1.0);
    Ok(RankSumTest { u, z_score: z_score.copysign(u - mean), p_value })
}

/// Compares two runs' rolls for signs of sales chasing (module
/// documentation). `options` sets the interval level of the ratio
/// statistics; they are computed untrimmed.
pub fn sales_chasing_check(
    earlier: &ValueRoll,
    later: &ValueRoll,
    options: &RatioOptions,
) -> Result<SalesChasingCheck> {
    let before: BTreeMap<&str, &super::roll::RollParcel> = earlier.parcels.iter().map(|p| (p.id.as_str(), p)).collect();
    let (mut sold, mut unsold) = (Vec::new(), Vec::new());
    let (mut pairs_before, mut pairs_after) = (Vec::new(), Vec::new());
    let mut not_paired = earlier.parcels.len() + later.parcels.len();
    for parcel in &later.parcels {
        let Some(old) = before.get(parcel.id.as_str()) else { continue };
        let (Some(old_value), Some(new_value)) = (old.value, parcel.value) else { continue };
        if !(old_value > 0.0 && new_value > 0.0) {
            continue;
        }
        not_paired -= 2;
        let change = (new_value / old_value).ln();
        let sold_since = match (&parcel.sale, &old.sale) {
            (Some(new), Some(previous)) => new.date > previous.date,
            (Some(_), None) => true,
            (None, _) => false,
        };
        if sold_since {
            sold.push(change);
            if let Some(sale) = &parcel.sale {
                pairs_before.push((old_value, sale.price));
                pairs_after.push((new_value, sale.price));
            }
        } else {
            unsold.push(change);
        }
    }
    if sold.is_empty() || unsold.is_empty() {
        return Err(Error::Specification(format!(
            "the sales-chasing check needs parcels sold between the runs and parcels not sold, each valued by both runs; found {} sold and {} unsold",
            sold.len(),
            unsold.len()
        )));
    }
    let rank_sum = rank_sum_test(&sold, &unsold)?;
    let untrimmed = RatioOptions { trim: None, ..options.clone() };
    Ok(SalesChasingCheck {
        earlier_date: earlier.valuation_date.clone(),
        later_date: later.valuation_date.clone(),
        sold: summarise(sold),
        unsold: summarise(unsold),
        rank_sum,
        sold_ratios_earlier: statistics(&pairs_before, &untrimmed),
        sold_ratios_later: statistics(&pairs_after, &untrimmed),
        not_paired,
    })
}
