//! `plumbline ratio`: a ratio study of values against sale prices.

use super::fit::load_with_flags;
use super::CommandError;
use crate::cli::{Format, RatioArgs};
use plumbline::documents::{to_pretty_json, RatioStudyDocument};
use plumbline::render::Report;
use plumbline::value::{ratio_study, PropertyClass, RatioOptions};

/// Runs `plumbline ratio`.
pub fn run(args: &RatioArgs) -> Result<String, CommandError> {
    let frame = load_with_flags(&args.data, &args.input, Some(&args.source))?;
    let class: PropertyClass = args.class.parse().map_err(CommandError::Usage)?;
    let values = frame.numeric_column(&args.value)?;
    let prices = frame.numeric_column(&args.price)?;
    let groups = match &args.group {
        Some(g) => Some(frame.label_column(g)?),
        None => None,
    };
    let options = RatioOptions { trim: (!args.no_trim).then_some(args.trim), level: args.level, class };
    let study = ratio_study(&values, &prices, groups.as_deref(), &options)?;
    let bundle = study.bundle();
    Ok(match args.format {
        Format::Text => bundle.get("text/plain").unwrap_or_default().to_string(),
        Format::Json => to_pretty_json(&RatioStudyDocument::from(study), "ratio-study document")?,
        Format::Html => {
            plumbline::render::html::page("Ratio study", &[bundle.get("text/html").unwrap_or_default().to_string()])
        }
    })
}
