//! `plumbline diff OLD NEW`: the drift report between two runs.

use super::CommandError;
use crate::cli::{DiffArgs, Format};
use crate::notebook::drift::{drift, drift_text};

/// Runs `plumbline diff`.
pub fn run(args: &DiffArgs) -> Result<String, CommandError> {
    let report = drift(&args.old, &args.new).map_err(|e| CommandError::Usage(e.to_string()))?;
    let text = drift_text(&report);
    Ok(match args.format {
        Format::Text => text,
        Format::Json => serde_json::to_string_pretty(&report)
            .map(|s| s + "\n")
            .map_err(|e| CommandError::Usage(format!("could not serialise the report: {e}")))?,
        Format::Html => {
            let mut card = String::new();
            card.push_str(&format!(
                "<div style=\"{}\"><div style=\"{}\">Drift between runs</div><pre style=\"margin:0;font-size:12px\">{}</pre></div>\n",
                plumbline::render::html::CARD,
                plumbline::render::html::HEADING,
                plumbline::render::html::escape(&text)
            ));
            plumbline::render::html::page("Drift between runs", &[card])
        }
    })
}
