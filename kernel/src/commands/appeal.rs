//! `plumbline appeal`: fit the study's sales, then one printable page per
//! parcel — the value built up from a typical home, and comparable sales
//! adjusted to the parcel by the model ([`plumbline::appeal`]).
//!
//! The pages are printed (text, the `plumbline.parcel-pages` document, or
//! HTML) only when every parcel asked for was explained; `--html FILE` is
//! written whole through a temporary file and a rename, or not at all.

use super::fit::{fit_options, load_columns_with_flags, model_spec, split_pair};
use super::CommandError;
use crate::cli::{AppealArgs, CoordinatesArg, Format};
use plumbline::appeal::{parcel_pages, PageOptions};
use plumbline::documents::{to_pretty_json, Versioned};
use plumbline::prelude::*;
use plumbline::render::{parcel_pages_document, parcel_pages_text};
use plumbline::spatial::Coordinates;

/// Runs `plumbline appeal`; returns the pages to print.
pub fn run(args: &AppealArgs) -> Result<String, CommandError> {
    let id_column = args.fit.id.clone().ok_or_else(|| {
        CommandError::Usage("--id COL names the parcel id column of the sales and the parcels".into())
    })?;
    if args.fit.local.is_some() || args.fit.by.is_some() || args.fit.batch_rows.is_some() || args.fit.data.is_dir() {
        return Err(CommandError::Usage(
            "the appeal pages explain one model fitted in memory; --local, --by, --batch-rows and directories do not \
             combine with them"
                .into(),
        ));
    }
    let mut ids = args.parcel.clone();
    if let Some(list) = &args.parcel_list {
        let listed = load(list)?;
        ids.extend(listed.label_column(&id_column)?.into_iter().flatten());
    }
    if ids.is_empty() {
        return Err(CommandError::Usage(
            "name the parcels to explain: --parcel ID (repeatable) or --parcel-list FILE".into(),
        ));
    }
    let spec = model_spec(&args.fit)?;
    // Every column: the pages read ids, dates, market areas and places beside the model's terms.
    let sales = load_columns_with_flags(&args.fit.data, &args.fit.input, Some(&args.fit.source), None)?;
    let model = fit_with(&sales, &spec, &fit_options(&args.fit))?;
    let parcels = load_columns_with_flags(&args.parcels, &args.fit.input, None, None)?;

    let mut options = PageOptions::new(id_column, args.date_column.clone(), args.valuation_date.clone());
    options.level = args.fit.level;
    if let Some(column) = &args.market_area {
        options = options.market_area(column.as_str());
    }
    if let Some(places) = &args.places {
        let (x, y) = split_pair(places, ',', "places", "X,Y such as `x,y` or `Longitude,Latitude`")?;
        let coordinates = match args.fit.spatial.coordinates {
            CoordinatesArg::Geographic => Coordinates::Geographic,
            CoordinatesArg::Planar => Coordinates::Planar,
        };
        options = options.places(x, y, coordinates);
        if let Some(unit) = &args.distance_unit {
            options = options.distance_unit(unit.as_str());
        }
    } else if args.max_distance.is_some() {
        return Err(CommandError::Usage("--max-distance needs the parcels' places: add --places X,Y".into()));
    }
    options.rule.max_distance = args.max_distance;
    options.rule.months_back = args.months_back;
    if args.comparables == 0 {
        return Err(CommandError::Usage("--comparables must be at least 1".into()));
    }
    options.rule.count = args.comparables;
    if let Some(reference) = &args.reference_parcel {
        options = options.reference_parcel(reference.as_str());
    }
    let pages = parcel_pages(&model, &sales, &parcels, &ids, &options)?;
    if let Some(path) = &args.html {
        crate::notebook::document::write_file_atomic(path, parcel_pages_document(&pages).as_bytes())
            .map_err(|e| CommandError::Runtime(e.to_string()))?;
    }
    Ok(match args.fit.format {
        Format::Text => parcel_pages_text(&pages),
        Format::Json => to_pretty_json(&Versioned::new(pages), "parcel-pages document")?,
        Format::Html => parcel_pages_document(&pages),
    })
}
