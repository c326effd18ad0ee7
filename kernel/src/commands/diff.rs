//! `plumbline diff OLD NEW`: the drift report between two runs.

use super::CommandError;
use crate::cli::{DiffArgs, Format};
use crate::notebook::results::read_run;
use plumbline::documents::to_pretty_json;
use plumbline::drift::drift;
use plumbline::render::{drift_html, drift_text, html::page};

/// Runs `plumbline diff`.
pub fn run(args: &DiffArgs) -> Result<String, CommandError> {
    let old = read_run(&args.old)?;
    let new = read_run(&args.new)?;
    let report = drift(&old, &new);
    Ok(match args.format {
        Format::Text => drift_text(&report),
        Format::Json => to_pretty_json(&report, "drift report")?,
        Format::Html => page("What moved between the runs", &[drift_html(&report)]),
    })
}
