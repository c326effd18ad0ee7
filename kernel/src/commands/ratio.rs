//! `plumbline ratio`: a ratio study of values against sale prices.

use super::fit::load_with_flags;
use super::CommandError;
use crate::cli::{Format, RatioArgs, TierByArg};
use plumbline::documents::{to_pretty_json, RatioStudyDocument};
use plumbline::render::Report;
use plumbline::value::{ratio_study, ratio_tiers, value_accuracy, PropertyClass, RatioOptions, TierBasis};

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
    let basis = match args.tier_by {
        TierByArg::Price => TierBasis::SalePrice,
        TierByArg::Value => TierBasis::Value,
        TierByArg::Blend => TierBasis::Blend,
    };
    let tiers = args.tiers.map(|t| ratio_tiers(&values, &prices, t, basis, &options)).transpose()?;
    let accuracy = args.accuracy.then(|| value_accuracy(&values, &prices)).transpose()?;
    let mut bundles = vec![study.bundle()];
    bundles.extend(tiers.as_ref().map(Report::bundle));
    bundles.extend(accuracy.as_ref().map(Report::bundle));
    let part =
        |mime: &str| -> Vec<String> { bundles.iter().map(|b| b.get(mime).unwrap_or_default().to_string()).collect() };
    Ok(match args.format {
        Format::Text => part("text/plain").join("\n"),
        Format::Json => {
            let document = RatioStudyDocument { tiers, accuracy, ..RatioStudyDocument::from(study) };
            to_pretty_json(&document, "ratio-study document")?
        }
        Format::Html => plumbline::render::html::page("Ratio study", &part("text/html")),
    })
}
