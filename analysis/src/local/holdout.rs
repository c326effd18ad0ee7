//! The local and the global model scored on sales neither was fitted on.
//!
//! In-sample figures flatter a local fit most of all: each sale sits at the
//! centre of its own kernel, so its own price pulls its local model. The
//! fair comparison values sales *held out* of both fits (for instance the
//! latest quarter, [`crate::compare::split_by_cutoff`]) with each model and
//! compares the ratios of value to price by the ratio study's own figures:
//! the median ratio, the COD and the PRD ([`crate::value::ratio_study`],
//! IAAO Standard on Ratio Studies 2013, with its default 1.5 × IQR trim),
//! and the share of values within ±10 % of price
//! ([`crate::value::value_accuracy`]). Each held-out sale is valued at its
//! own place and sale date, so the model's trend moves the value to the day
//! of the price and no time adjustment of prices is needed.

use super::LocalFit;
use crate::data::Frame;
use crate::error::{Error, Result};
use crate::predict::Predictions;
use crate::value::{model_values, ratio_study, value_accuracy, RatioOptions, Retransform};
use serde::{Deserialize, Serialize};

/// One model's figures on the held-out sales.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct HoldoutScore {
    /// Held-out sales the model valued (a sale missing a term value, or
    /// outside the local model's reach, is not valued and not scored).
    pub valued: usize,
    /// Median ratio of value to price.
    pub median_ratio: f64,
    /// Coefficient of dispersion of the ratios, percent.
    pub cod: f64,
    /// Price-related differential.
    pub prd: f64,
    /// Share of values within ±10 % of price, 0–1.
    pub within_10: f64,
}

/// The local model and its global twin (the same terms fitted once for all
/// sales) scored on held-out sales (module documentation).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct HoldoutComparison {
    /// The held-out sales' provenance, in words.
    pub holdout_source: String,
    /// Held-out sales with a price.
    pub sales: usize,
    /// How values were read off a logged target (median or smearing mean).
    pub retransform: Retransform,
    /// The local model's figures.
    pub local: HoldoutScore,
    /// The global model's figures.
    pub global: HoldoutScore,
}

impl LocalFit {
    /// Scores this local fit and its global twin on `holdout`, sales that
    /// neither was fitted on (the caller's split, e.g.
    /// [`crate::compare::split_by_cutoff`]), and keeps the figures in the
    /// summary (document `plumbline.local-fit` version 2). Refuses held-out
    /// sales without the target column or with fewer than two priced sales
    /// either model can value.
    pub fn with_holdout(mut self, holdout: &Frame, retransform: Retransform) -> Result<Self> {
        let prices = holdout.numeric_column(self.spec().target())?;
        let sales = prices.iter().filter(|p| p.is_some()).count();
        let local_values = values_of(&self.predict(holdout, 0.95)?, holdout.height(), retransform);
        let global_values = model_values(self.global(), holdout, retransform)?;
        let local = score(&local_values, &prices, "the local model")?;
        let global = score(&global_values, &prices, "the global model")?;
        self.summary.holdout = Some(HoldoutComparison {
            holdout_source: holdout.provenance().describe(),
            sales,
            retransform,
            local,
            global,
        });
        Ok(self)
    }
}

/// Each row's value (on the price scale) from predictions, `None` where a
/// row was not valued.
fn values_of(predictions: &Predictions, rows: usize, retransform: Retransform) -> Vec<Option<f64>> {
    let mut values = vec![None; rows];
    for p in &predictions.rows {
        values[p.row - 1] = Some(retransform.value_of(p.estimate, p.median_original, p.mean_original));
    }
    values
}

fn score(values: &[Option<f64>], prices: &[Option<f64>], which: &str) -> Result<HoldoutScore> {
    let valued = values.iter().zip(prices).filter(|(v, p)| v.is_some() && p.is_some()).count();
    if valued < 2 {
        return Err(Error::Specification(format!(
            "{which} values {valued} of the held-out sales; scoring needs at least two with a price"
        )));
    }
    let ratios = ratio_study(values, prices, None, &RatioOptions::default())?;
    let accuracy = value_accuracy(values, prices)?;
    Ok(HoldoutScore {
        valued,
        median_ratio: ratios.overall.median,
        cod: ratios.overall.cod,
        prd: ratios.overall.prd,
        within_10: accuracy.within_10,
    })
}
