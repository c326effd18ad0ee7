//! Choosing between candidate models.
//!
//! * [`nested`] — F and likelihood-ratio tests of a restriction.
//! * [`table`] — several fits side by side.
//! * [`cross_validation`] — seeded k-fold out-of-sample errors.
//! * [`split`] — holdout splits by fraction or by a date cut-off.
//!
//! Row placement in folds and splits never depends on the order of rows in
//! the file: each row gets a key (its identifier, or all of its values), the
//! key is hashed with the seed (SHA-256), and rows are ordered by that hash.

pub mod cross_validation;
pub mod nested;
pub mod split;
pub mod table;

pub use cross_validation::{cross_validate, CrossValidation, CrossValidationResult, FoldScore};
pub use nested::{nested_test, NestedTest};
pub use split::{split_by_cutoff, split_by_fraction};
pub use table::{side_by_side, Comparison};

use crate::data::Frame;
use crate::error::Result;
use sha2::{Digest, Sha256};

/// Row indices of `frame` ordered by the seeded hash of each row's key (the
/// `id_column` value when given, else all of the row's values).
pub(crate) fn seeded_order(frame: &Frame, seed: u64, id_column: Option<&str>) -> Result<Vec<usize>> {
    let ids = match id_column {
        Some(c) => Some(frame.label_column(c)?),
        None => None,
    };
    let mut keyed: Vec<([u8; 32], String, usize)> = (0..frame.height())
        .map(|row| {
            let key = match &ids {
                Some(ids) => ids[row].clone().unwrap_or_default(),
                None => frame.row_key(row),
            };
            let mut hasher = Sha256::new();
            hasher.update(seed.to_le_bytes());
            hasher.update(key.as_bytes());
            (hasher.finalize().into(), key, row)
        })
        .collect();
    keyed.sort_by(|a, b| a.0.cmp(&b.0).then_with(|| a.1.cmp(&b.1)));
    Ok(keyed.into_iter().map(|(_, _, row)| row).collect())
}

/// Rows (0-based) where every named column has a value — the common rows on
/// which several candidate models must be fitted to be compared.
pub fn rows_with_values(frame: &Frame, columns: &[&str]) -> Result<Vec<usize>> {
    let mut keep = vec![true; frame.height()];
    for column in columns {
        let nulls = frame.column_by_name(column)?.is_null();
        for (row, is_null) in nulls.iter().enumerate() {
            if is_null == Some(true) {
                keep[row] = false;
            }
        }
    }
    Ok(keep.iter().enumerate().filter(|(_, k)| **k).map(|(r, _)| r).collect())
}
