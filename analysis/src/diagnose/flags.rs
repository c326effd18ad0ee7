//! Rows worth a second look.
//!
//! Cut-offs (common practice; no single published source sets them):
//! |externally studentized residual| > 3; leverage > 2k/n (Hoaglin & Welsch
//! 1978 suggested 2k/n as a screen); Cook's distance > 4/n. A flag is a reason
//! to check a sale (a keying error, a non-market transfer), not to drop it.

use crate::data::Frame;
use crate::error::Result;
use crate::fit::Fit;
use serde::{Deserialize, Serialize};

/// Cut-off for |externally studentized residual| (common practice).
pub const STUDENTIZED_CUTOFF: f64 = 3.0;

/// Cut-off for leverage with `k` estimated coefficients and `n` rows: `2k/n`
/// (Hoaglin & Welsch 1978).
pub fn leverage_cutoff(k: usize, n: usize) -> f64 {
    2.0 * k as f64 / n as f64
}

/// Cook's distance above which one sale alone moves the fit noticeably: 0.5
/// (common practice: a softer screen than the `D > 1` often quoted after
/// Cook & Weisberg, *Residuals and Influence in Regression*, 1982 — recalled
/// from memory).
pub const COOKS_LARGE: f64 = 0.5;

/// Cut-off for Cook's distance over `n` rows: `4/n` (common practice).
pub fn cooks_cutoff(n: usize) -> f64 {
    4.0 / n as f64
}

/// A row beyond at least one cut-off.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct FlaggedRow {
    /// 1-based data row of the fitting frame.
    pub row: usize,
    /// File line, when the data came from a text file.
    pub line: Option<u64>,
    /// The row's identifier from the chosen id column.
    pub id: Option<String>,
    /// Externally studentized residual.
    pub studentized: Option<f64>,
    /// Leverage.
    pub leverage: f64,
    /// Cook's distance.
    pub cooks_distance: Option<f64>,
    /// Which cut-offs the row exceeds, in words.
    pub reasons: Vec<String>,
}

/// The flagged rows and the cut-offs used.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct RowFlags {
    /// Cut-off for |studentized residual|.
    pub studentized_cutoff: f64,
    /// Cut-off for leverage (2k/n).
    pub leverage_cutoff: f64,
    /// Cut-off for Cook's distance (4/n).
    pub cooks_cutoff: f64,
    /// Flagged rows, largest Cook's distance first.
    pub rows: Vec<FlaggedRow>,
}

impl Fit {
    /// Rows beyond the common-practice cut-offs, identified by `id_column` when given.
    pub fn flagged_rows(&self, frame: &Frame, id_column: Option<&str>) -> Result<RowFlags> {
        let ids = match id_column {
            Some(c) => Some(frame.label_column(c)?),
            None => None,
        };
        let influence = self.influence();
        let n = influence.rows.len();
        let k = self.solution().kept().len();
        let (studentized_cutoff, leverage_cutoff, cooks_cutoff) =
            (STUDENTIZED_CUTOFF, leverage_cutoff(k, n), cooks_cutoff(n));
        let mut rows: Vec<FlaggedRow> = influence
            .rows
            .iter()
            .filter_map(|r| {
                let mut reasons = Vec::new();
                if let Some(t) = r.studentized.filter(|t| t.abs() > studentized_cutoff) {
                    reasons.push(format!("studentized residual {t:.2}"));
                }
                if r.leverage > leverage_cutoff {
                    reasons.push(format!("leverage {:.3} > {leverage_cutoff:.3}", r.leverage));
                }
                if let Some(d) = r.cooks_distance.filter(|d| *d > cooks_cutoff) {
                    reasons.push(format!("Cook's distance {d:.3} > {cooks_cutoff:.4}"));
                }
                (!reasons.is_empty()).then(|| FlaggedRow {
                    row: r.row,
                    line: frame.source_line(r.row - 1),
                    id: ids.as_ref().and_then(|ids| ids[r.row - 1].clone()),
                    studentized: r.studentized,
                    leverage: r.leverage,
                    cooks_distance: r.cooks_distance,
                    reasons,
                })
            })
            .collect();
        rows.sort_by(|a, b| {
            b.cooks_distance
                .unwrap_or(f64::INFINITY)
                .total_cmp(&a.cooks_distance.unwrap_or(f64::INFINITY))
                .then(a.row.cmp(&b.row))
        });
        Ok(RowFlags { studentized_cutoff, leverage_cutoff, cooks_cutoff, rows })
    }
}
