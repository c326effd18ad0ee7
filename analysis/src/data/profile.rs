//! A first look at every column: what type it is, how much is missing, and
//! what values it takes.

use super::Frame;
use crate::error::Result;
use crate::stats::median_of_sorted;
use polars::prelude::DataType;
use serde::Serialize;
use std::collections::BTreeMap;

/// Summary of one column.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ColumnProfile {
    /// Column name.
    pub name: String,
    /// Storage type as polars names it (`i64`, `f64`, `str`, …).
    pub dtype: String,
    /// Rows where the value is missing.
    pub missing: usize,
    /// Distinct present values.
    pub distinct: usize,
    /// Smallest present value (numeric columns only).
    pub min: Option<f64>,
    /// Median of present values, the mean of the two middle values for an even
    /// count (numeric columns only).
    pub median: Option<f64>,
    /// Largest present value (numeric columns only).
    pub max: Option<f64>,
    /// Non-finite numbers (NaN, ±∞) present in a numeric column; they are
    /// left out of min, median and max.
    pub non_finite: usize,
    /// Earliest date (date columns only), ISO 8601.
    pub earliest: Option<String>,
    /// Latest date (date columns only), ISO 8601.
    pub latest: Option<String>,
    /// The most frequent levels with their counts, most frequent first, ties
    /// in label order (text columns only; at most five).
    pub top_levels: Vec<(String, usize)>,
}

/// Profiles every column of a frame, in column order.
pub fn profile(frame: &Frame) -> Result<Vec<ColumnProfile>> {
    let mut out = Vec::with_capacity(frame.width());
    for name in frame.column_names() {
        let column = frame.column_by_name(&name)?;
        let dtype = column.dtype().clone();
        let base = ColumnProfile {
            name: name.clone(),
            dtype: dtype.to_string(),
            missing: column.null_count(),
            distinct: 0,
            min: None,
            median: None,
            max: None,
            non_finite: 0,
            earliest: None,
            latest: None,
            top_levels: Vec::new(),
        };
        out.push(if dtype.is_primitive_numeric() || dtype.is_bool() {
            // Read the stored numbers directly: a profile shows non-finite
            // values (counted) rather than refusing them as a model would.
            let cast = column.as_materialized_series().cast(&DataType::Float64)?;
            let present: Vec<f64> = cast.f64()?.iter().flatten().collect();
            let mut values: Vec<f64> = present.iter().copied().filter(|v| v.is_finite()).collect();
            values.sort_by(f64::total_cmp);
            let mut distinct = values.clone();
            distinct.dedup();
            ColumnProfile {
                distinct: distinct.len(),
                min: values.first().copied(),
                median: median_of_sorted(&values),
                max: values.last().copied(),
                non_finite: present.len() - values.len(),
                ..base
            }
        } else if dtype == DataType::Date {
            let mut dates: Vec<chrono::NaiveDate> =
                frame.date_column(&name).unwrap_or_default().into_iter().flatten().collect();
            dates.sort_unstable();
            let iso = |d: Option<&chrono::NaiveDate>| d.map(|d| d.format(super::dates::ISO_DATE_FORMAT).to_string());
            let (earliest, latest) = (iso(dates.first()), iso(dates.last()));
            dates.dedup();
            ColumnProfile { distinct: dates.len(), earliest, latest, ..base }
        } else {
            let labels =
                if dtype == DataType::Null { Vec::new() } else { frame.label_column(&name).unwrap_or_default() };
            let mut counts: BTreeMap<String, usize> = BTreeMap::new();
            for label in labels.into_iter().flatten() {
                *counts.entry(label).or_default() += 1;
            }
            let distinct = counts.len();
            let mut levels: Vec<(String, usize)> = counts.into_iter().collect();
            levels.sort_by(|a, b| b.1.cmp(&a.1).then_with(|| a.0.cmp(&b.0)));
            levels.truncate(5);
            ColumnProfile { distinct, top_levels: levels, ..base }
        });
    }
    Ok(out)
}
