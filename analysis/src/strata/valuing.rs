//! Valuing parcels by group: each row with its own group's model.
//!
//! A row whose group has no model (the group could not be fitted, or did not
//! occur among the sales) and a row without a grouping value are flagged with
//! the reason and left without a value: another group's model, or the pooled
//! model, would value it by a market it is not in.

use super::StratifiedFit;
use crate::data::Frame;
use crate::error::{Error, Result};
use crate::predict::Prediction;
use crate::value::roll_of;
use crate::value::{Retransform, ValueRoll};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// One row valued (or not) by its group's model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct StratifiedPrediction {
    /// 1-based data row of the frame.
    pub row: usize,
    /// The row's grouping value (`None`: missing).
    pub group: Option<String>,
    /// The prediction by the group's model (`row` in it is the frame's row).
    pub prediction: Option<Prediction>,
    /// Why the row has no prediction, when it has none.
    pub not_valued: Option<String>,
}

/// Every row of a frame, each valued by its own group's model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct StratifiedPredictions {
    /// The grouping column.
    pub grouped_by: String,
    /// Confidence level of the intervals.
    pub level: f64,
    /// One entry per frame row, in frame order.
    pub rows: Vec<StratifiedPrediction>,
}

impl StratifiedPredictions {
    /// Rows with a prediction.
    pub fn valued(&self) -> usize {
        self.rows.iter().filter(|r| r.prediction.is_some()).count()
    }

    /// Rows left without one, with their reasons.
    pub fn not_valued(&self) -> impl Iterator<Item = &StratifiedPrediction> {
        self.rows.iter().filter(|r| r.prediction.is_none())
    }
}

impl StratifiedFit {
    /// Predicts every row of `frame` with its own group's model at
    /// confidence `level`; rows that cannot be valued carry the reason.
    pub fn predict(&self, frame: &Frame, level: f64) -> Result<StratifiedPredictions> {
        let labels = match frame.label_column(&self.column) {
            Err(Error::ColumnAllMissing { .. }) => vec![None; frame.height()],
            other => other?,
        };
        let mut rows: Vec<StratifiedPrediction> = labels
            .iter()
            .enumerate()
            .map(|(i, group)| StratifiedPrediction {
                row: i + 1,
                group: group.clone(),
                prediction: None,
                not_valued: None,
            })
            .collect();
        let mut by_group: BTreeMap<&str, Vec<usize>> = BTreeMap::new();
        for (i, label) in labels.iter().enumerate() {
            match label {
                Some(label) => by_group.entry(label.as_str()).or_default().push(i),
                None => rows[i].not_valued = Some(format!("no `{}` value, so no market model applies", self.column)),
            }
        }
        for (label, members) in by_group {
            let model = match self.stratum(label).map(|s| s.outcome()) {
                Some(super::StratumOutcome::Fitted(model)) => model,
                Some(super::StratumOutcome::NotFitted { reason }) => {
                    let reason = format!("no model for {} `{label}`: {reason}", self.column);
                    members.iter().for_each(|&i| rows[i].not_valued = Some(reason.clone()));
                    continue;
                }
                None => {
                    let reason =
                        format!("no model for {} `{label}`: no sale of it was in the fitting data", self.column);
                    members.iter().for_each(|&i| rows[i].not_valued = Some(reason.clone()));
                    continue;
                }
            };
            let subset = frame.subset(&members, &format!("{} = {label}", self.column))?;
            let predictions = model.predict(&subset, level)?;
            for mut p in predictions.rows {
                let i = members[p.row - 1];
                p.row = i + 1;
                rows[i].prediction = Some(p);
            }
            for skipped in predictions.skipped_rows {
                rows[members[skipped - 1]].not_valued = Some("a term value is missing".into());
            }
        }
        Ok(StratifiedPredictions { grouped_by: self.column.clone(), level, rows })
    }

    /// Values every parcel of `parcels` with its own group's model as of
    /// `valuation_date`, as [`crate::value::value_roll`] does with one model.
    /// A parcel whose group has no model has no value and says why.
    pub fn value_roll(
        &self,
        parcels: &Frame,
        id_column: &str,
        valuation_date: &str,
        retransform: Retransform,
    ) -> Result<ValueRoll> {
        let predictions = self.predict(parcels, 0.95)?;
        let valued = predictions.rows.into_iter().map(|row| {
            let value =
                row.prediction.as_ref().map(|p| retransform.value_of(p.estimate, p.median_original, p.mean_original));
            (value, row.not_valued)
        });
        let model = format!("{} within each {}", self.spec.describe(), self.column);
        roll_of(parcels, id_column, valuation_date, model, valued)
    }
}
