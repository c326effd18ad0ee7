//! The value roll: one run's value of every parcel, with the sale each
//! parcel last had in that run's data — what a later run is compared with to
//! see whether sold parcels were treated like unsold ones
//! ([`super::sales_chasing_check`]).

use super::time::{model_values, Retransform};
use crate::data::{dates, Frame};
use crate::error::{Error, Result};
use crate::fit::Fit;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// A sale of a parcel, as the run saw it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct RollSale {
    /// Sale date, ISO 8601.
    pub date: String,
    /// Sale price.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub price: f64,
}

/// One parcel on the roll.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct RollParcel {
    /// The parcel's identifier.
    pub id: String,
    /// The model's value as of the valuation date (`None`: a term value was
    /// missing, so the model could not value it).
    pub value: Option<f64>,
    /// The parcel's latest sale in the run's sales, if it sold.
    pub sale: Option<RollSale>,
    /// Why the parcel has no value, when it has none (value-roll version 2;
    /// absent in version 1 documents).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub not_valued: Option<String>,
}

/// Every parcel's value from one run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ValueRoll {
    /// The date the values are estimated for, ISO 8601.
    pub valuation_date: String,
    /// The model in words.
    pub model: String,
    /// Where the parcels came from.
    pub parcels_source: String,
    /// Where the sales came from, once [`ValueRoll::with_sales`] has run.
    pub sales_source: Option<String>,
    /// The parcels, in the order of the parcel frame.
    pub parcels: Vec<RollParcel>,
}

impl ValueRoll {
    /// Parcels that have a value.
    pub fn valued(&self) -> usize {
        self.parcels.iter().filter(|p| p.value.is_some()).count()
    }

    /// The `p`-quantiles (0–1) of the parcels' values, by
    /// the quantile of sorted data every layer shares (`stats`); `None` when no parcel has a value.
    pub fn value_quantiles(&self, p: &[f64]) -> Option<Vec<f64>> {
        let mut values: Vec<f64> = self.parcels.iter().filter_map(|parcel| parcel.value).collect();
        if values.is_empty() {
            return None;
        }
        values.sort_by(f64::total_cmp);
        Some(p.iter().map(|&p| crate::stats::quantile_of_sorted(&values, p)).collect())
    }

    /// Parcels with a sale.
    pub fn sold(&self) -> usize {
        self.parcels.iter().filter(|p| p.sale.is_some()).count()
    }

    /// Records each parcel's latest sale from `sales` (matched on
    /// `id_column`; the latest by `date_column`; rows missing the id, date or
    /// price are passed over). Sales of parcels not on the roll are ignored.
    pub fn with_sales(mut self, sales: &Frame, id_column: &str, date_column: &str, price_column: &str) -> Result<Self> {
        let ids = sales.label_column(id_column)?;
        let days = sales.date_column(date_column)?;
        let prices = sales.numeric_column(price_column)?;
        let mut latest: BTreeMap<&str, (chrono::NaiveDate, f64)> = BTreeMap::new();
        for ((id, day), price) in ids.iter().zip(&days).zip(&prices) {
            if let (Some(id), Some(day), Some(price)) = (id, day, price) {
                let entry = latest.entry(id.as_str()).or_insert((*day, *price));
                if *day > entry.0 {
                    *entry = (*day, *price);
                }
            }
        }
        for parcel in &mut self.parcels {
            parcel.sale = latest
                .get(parcel.id.as_str())
                .map(|(day, price)| RollSale { date: day.format(dates::ISO_DATE_FORMAT).to_string(), price: *price });
        }
        self.sales_source = Some(sales.provenance().describe());
        Ok(self)
    }
}

/// Values every parcel of `parcels` with `fit` as of `valuation_date`.
///
/// The parcel frame holds the parcels' characteristics as of that date (a
/// date column read by the model's time trend must hold the valuation date
/// itself; see [`Frame::with_date`]). Refuses a parcel id that is missing or
/// repeated, since a roll pairs runs by id.
pub fn value_roll(
    fit: &Fit,
    parcels: &Frame,
    id_column: &str,
    valuation_date: &str,
    retransform: Retransform,
) -> Result<ValueRoll> {
    let values = model_values(fit, parcels, retransform)?;
    let valued = values.into_iter().map(|value| {
        let not_valued = value.is_none().then(|| "a term value is missing".to_string());
        (value, not_valued)
    });
    roll_of(parcels, id_column, valuation_date, fit.spec().describe(), valued)
}

/// The roll of `parcels` from each parcel's value (or why it has none), in
/// frame order: the valuation date checked, each parcel's id required and
/// unique. Shared by every way of valuing a roll (one model, a model per
/// group).
pub(crate) fn roll_of(
    parcels: &Frame,
    id_column: &str,
    valuation_date: &str,
    model: String,
    valued: impl IntoIterator<Item = (Option<f64>, Option<String>)>,
) -> Result<ValueRoll> {
    let valuation_date =
        dates::require_iso_date("the valuation date", valuation_date)?.format(dates::ISO_DATE_FORMAT).to_string();
    let ids = parcels.label_column(id_column)?;
    let mut seen: BTreeMap<&str, usize> = BTreeMap::new();
    let mut out = Vec::with_capacity(ids.len());
    for (row, (id, (value, not_valued))) in ids.iter().zip(valued).enumerate() {
        let Some(id) = id else {
            return Err(Error::MissingValue {
                column: id_column.into(),
                row: row + 1,
                line: parcels.source_line(row),
                purpose: "the value roll (every parcel needs its id)".into(),
            });
        };
        if let Some(first) = seen.insert(id.as_str(), row) {
            return Err(Error::Specification(format!(
                "parcel id `{id}` appears on rows {} and {} of the parcel file; a roll needs each parcel once",
                first + 1,
                row + 1
            )));
        }
        out.push(RollParcel { id: id.clone(), value, sale: None, not_valued });
    }
    Ok(ValueRoll {
        valuation_date,
        model,
        parcels_source: parcels.provenance().describe(),
        sales_source: None,
        parcels: out,
    })
}
