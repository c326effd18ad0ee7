//! `plumbline accuracy`: fit every NIST StRD linear-regression dataset and
//! score the results against NIST's certified values; the scoring is
//! [`plumbline::accuracy`], the table [`plumbline::render::accuracy_table`].

use super::CommandError;
use crate::cli::{AccuracyArgs, Format};
use plumbline::accuracy::score_all;
use plumbline::render::accuracy_table;

/// Runs `plumbline accuracy`.
pub fn run(args: &AccuracyArgs) -> Result<String, CommandError> {
    let scores = score_all(&args.reference, super::fit::precision(args.precision))?;
    match args.format {
        Format::Json => serde_json::to_string_pretty(&scores)
            .map(|s| s + "\n")
            .map_err(|e| CommandError::Runtime(format!("could not serialise the table: {e}"))),
        Format::Text | Format::Html => Ok(accuracy_table(&scores)),
    }
}
