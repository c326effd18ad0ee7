//! A first look at every column: what type it is, how much is missing, and
//! what values it takes.

use super::Frame;
use crate::error::Result;
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
        let missing = column.null_count();
        let is_numeric = dtype.is_primitive_numeric() || dtype.is_bool();
        if is_numeric {
            let mut values: Vec<f64> = frame.numeric_column(&name).unwrap_or_default().into_iter().flatten().collect();
            values.sort_by(f64::total_cmp);
            let mut distinct = values.clone();
            distinct.dedup();
            out.push(ColumnProfile {
                name,
                dtype: dtype.to_string(),
                missing,
                distinct: distinct.len(),
                min: values.first().copied(),
                median: median_of_sorted(&values),
                max: values.last().copied(),
                top_levels: Vec::new(),
            });
        } else {
            let labels = if dtype == DataType::Null { Vec::new() } else { frame.label_column(&name).unwrap_or_default() };
            let mut counts: BTreeMap<String, usize> = BTreeMap::new();
            for label in labels.into_iter().flatten() {
                *counts.entry(label).or_default() += 1;
            }
            let distinct = counts.len();
            let mut levels: Vec<(String, usize)> = counts.into_iter().collect();
            levels.sort_by(|a, b| b.1.cmp(&a.1).then_with(|| a.0.cmp(&b.0)));
            levels.truncate(5);
            out.push(ColumnProfile {
                name,
                dtype: dtype.to_string(),
                missing,
                distinct,
                min: None,
                median: None,
                max: None,
                top_levels: levels,
            });
        }
    }
    Ok(out)
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
    if i + 1 < sorted.len() { sorted[i] + (sorted[i + 1] - sorted[i]) * frac } else { sorted[i] }
}
