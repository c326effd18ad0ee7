//! Arrow arrays (what DataFusion hands an aggregate) to our frames.
//!
//! The analysis codes designs from a [`Frame`] (polars); DataFusion hands
//! each accumulator Arrow arrays of the `arrow` crate, which polars does not
//! read. The columns a model reads are numbers (`Float64`, the driver casts)
//! and text (`Utf8`), so each is copied across value by value — one pass over
//! memory that is in cache, small beside coding and factoring the rows.

use crate::error::{EngineError, Result};
use crate::plan::RoundPlan;
use datafusion::arrow::array::{Array, ArrayRef, AsArray};
use datafusion::arrow::datatypes::{DataType, Float64Type};
use plumbline::data::Frame;
use plumbline::polars::prelude::{Column, DataFrame};

/// The frame of one batch's rows: `arrays` are the plan's numbers then its
/// labels (the plan and group arguments already taken off).
pub fn frame_of(plan: &RoundPlan, arrays: &[ArrayRef]) -> Result<Frame> {
    let names = plan.numbers.iter().chain(&plan.labels);
    if arrays.len() != plan.numbers.len() + plan.labels.len() {
        return Err(EngineError::Data(format!(
            "a round function was given {} columns, its plan names {}",
            arrays.len(),
            plan.numbers.len() + plan.labels.len()
        )));
    }
    let height = arrays.first().map_or(0, |a| a.len());
    let mut columns = Vec::with_capacity(arrays.len());
    for (index, (name, array)) in names.zip(arrays).enumerate() {
        let column = if index < plan.numbers.len() {
            let values = match array.data_type() {
                DataType::Float64 => array.as_primitive::<Float64Type>(),
                other => return Err(wrong_type(name, other, "Float64")),
            };
            if values.null_count() == 0 {
                Column::new(name.as_str().into(), values.values().as_ref())
            } else {
                Column::new(name.as_str().into(), values.iter().collect::<Vec<Option<f64>>>())
            }
        } else {
            let values = match array.data_type() {
                DataType::Utf8 => array.as_string::<i32>(),
                other => return Err(wrong_type(name, other, "Utf8")),
            };
            Column::new(name.as_str().into(), values.iter().collect::<Vec<Option<&str>>>())
        };
        columns.push(column);
    }
    let data = DataFrame::new(height, columns).map_err(plumbline::Error::from)?;
    Ok(Frame::from_dataframe(data, "a partition's batch").with_non_finite(plan.non_finite))
}

fn wrong_type(name: &str, found: &DataType, wanted: &str) -> EngineError {
    EngineError::Data(format!("the column `{name}` reached a round function as {found}, not {wanted}"))
}
