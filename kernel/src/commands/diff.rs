//! `plumbline diff OLD NEW`: the drift report between two runs.

use super::CommandError;
use crate::cli::{DiffArgs, Format};
use crate::notebook::results::read_run;
use plumbline::drift::drift;
use plumbline::render::{drift_html, drift_text, html::page};

/// Runs `plumbline diff`.
pub fn run(args: &DiffArgs) -> Result<String, CommandError> {
    let old = read_run(&args.old).map_err(|e| CommandError::Usage(e.to_string()))?;
    let new = read_run(&args.new).map_err(|e| CommandError::Usage(e.to_string()))?;
    let report = drift(&old, &new);
    Ok(match args.format {
        Format::Text => drift_text(&report),
        Format::Json => serde_json::to_string_pretty(&report)
            .map(|s| s + "\n")
            .map_err(|e| CommandError::Usage(format!("could not serialise the report: {e}")))?,
        Format::Html => page("What moved between the runs", &[drift_html(&report)]),
    })
}
