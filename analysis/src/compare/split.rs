//! Holdout splits: a seeded fraction, or "fit on older sales, test on newer".

use super::seeded_order;
use crate::data::{dates, Frame};
use crate::error::{Error, Result};
use polars::prelude::DataType;

/// Splits off a seeded `test_fraction` of the rows (order-independent, see
/// [`super`]). Returns `(training, test)`, each in file order.
pub fn split_by_fraction(
    frame: &Frame,
    test_fraction: f64,
    seed: u64,
    id_column: Option<&str>,
) -> Result<(Frame, Frame)> {
    if !(test_fraction > 0.0 && test_fraction < 1.0) {
        return Err(Error::OutOfRange {
            what: "the test fraction".into(),
            requirement: "strictly between 0 and 1".into(),
            value: test_fraction.to_string(),
        });
    }
    let order = seeded_order(frame, seed, id_column)?;
    let n_test = ((frame.height() as f64) * test_fraction).round().max(1.0) as usize;
    let mut test: Vec<usize> = order[..n_test.min(order.len())].to_vec();
    let mut train: Vec<usize> = order[n_test.min(order.len())..].to_vec();
    test.sort_unstable();
    train.sort_unstable();
    Ok((frame.subset(&train, "holdout: training")?, frame.subset(&test, "holdout: test")?))
}

/// Splits on a cut-off in `column`: rows before `cutoff` train, rows at or
/// after it test — "fit on older sales, test on newer" with a sale date.
/// A date column compares as dates (the cut-off written `YYYY-MM-DD`);
/// numeric columns compare as numbers; text columns compare as text. Rows
/// missing the value are left out of both parts.
pub fn split_by_cutoff(frame: &Frame, column: &str, cutoff: &str) -> Result<(Frame, Frame)> {
    let dtype = frame.column_by_name(column)?.dtype().clone();
    let before_cutoff: Vec<Option<bool>> = if dtype == DataType::Date {
        let day = dates::require_iso_date(format!("the cut-off on the date column `{column}`"), cutoff)?;
        frame.date_column(column)?.iter().map(|d| d.map(|d| d < day)).collect()
    } else if dtype.is_primitive_numeric() {
        let c = cutoff.trim().parse::<f64>().map_err(|_| Error::OutOfRange {
            what: format!("the cut-off on the numeric column `{column}`"),
            requirement: "a number".into(),
            value: cutoff.to_string(),
        })?;
        frame.numeric_column(column)?.iter().map(|v| v.map(|v| v < c)).collect()
    } else {
        frame.label_column(column)?.iter().map(|v| v.as_ref().map(|v| v.as_str() < cutoff)).collect()
    };
    let (mut train, mut test) = (Vec::new(), Vec::new());
    for (row, before) in before_cutoff.into_iter().enumerate() {
        match before {
            Some(true) => train.push(row),
            Some(false) => test.push(row),
            None => {}
        }
    }
    if train.is_empty() || test.is_empty() {
        return Err(Error::Specification(format!(
            "cut-off `{cutoff}` on `{column}` leaves {} training and {} test rows; choose a value inside the data's range",
            train.len(),
            test.len()
        )));
    }
    Ok((
        frame.subset(&train, &format!("{column} before {cutoff}"))?,
        frame.subset(&test, &format!("{column} from {cutoff}"))?,
    ))
}
