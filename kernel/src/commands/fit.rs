//! `plumbline fit`: one model, one data file, a report on stdout.

use super::CommandError;
use crate::cli::{CovarianceArg, FitArgs, Format, InputFlags, PrecisionArg};
use plumbline::documents::{to_pretty_json, FitDiagnostics, FitDocument};
use plumbline::prelude::*;
use std::collections::BTreeMap;

/// Splits `COL<sep>VALUE`, naming the flag in the error.
fn split_pair<'a>(text: &'a str, separator: char, flag: &str, shape: &str) -> Result<(&'a str, &'a str), CommandError> {
    text.split_once(separator)
        .map(|(a, b)| (a.trim(), b.trim()))
        .filter(|(a, b)| !a.is_empty() && !b.is_empty())
        .ok_or_else(|| CommandError::Usage(format!("--{flag} expects {shape}, got `{text}`")))
}

fn degree(text: &str, flag: &str) -> Result<(String, u32), CommandError> {
    let (column, degree) = split_pair(text, ':', flag, "COL:DEGREE such as `age:2`")?;
    let degree = degree
        .parse::<u32>()
        .map_err(|_| CommandError::Usage(format!("--{flag}: the degree in `{text}` must be a whole number")))?;
    Ok((column.to_string(), degree))
}

/// The CSV options the flags describe.
pub fn csv_options(args: &InputFlags) -> Result<CsvOptions, CommandError> {
    let delimiter = match args.delimiter.as_str() {
        "\\t" | "tab" => b'\t',
        d if d.len() == 1 => d.as_bytes()[0],
        d => return Err(CommandError::Usage(format!("--delimiter must be one character (or `\\t`), got `{d}`"))),
    };
    let mut options = CsvOptions { delimiter, ..CsvOptions::default() };
    for marker in &args.null_markers {
        options = options.null_marker(marker.clone());
    }
    for pair in &args.column_types {
        let (column, ty) = split_pair(pair, '=', "column-type", "COL=TYPE such as `parcel=text`")?;
        let ty: ColumnType = ty.parse().map_err(|given: String| {
            CommandError::Analysis(Error::UnknownColumnType { column: column.to_string(), given })
        })?;
        options = options.column_type(column, ty);
    }
    for pair in &args.date_formats {
        let (column, format) = split_pair(pair, '=', "date-format", "COL=FORMAT such as `sale_date=%d/%m/%Y`")?;
        options = options.date_format(column, format);
    }
    options.encoding = args.encoding.parse().map_err(CommandError::Usage)?;
    options.non_finite = non_finite_rule(args)?;
    Ok(options)
}

/// The `--non-finite` rule, for every source type.
fn non_finite_rule(args: &InputFlags) -> Result<NonFinite, CommandError> {
    args.non_finite.parse().map_err(|e: String| CommandError::Usage(format!("--non-finite: {e}")))
}

/// The model the flags describe.
pub fn model_spec(args: &FitArgs) -> Result<ModelSpec, CommandError> {
    let mut spec = args.model.base_spec();
    let references: BTreeMap<&str, &str> = args
        .reference
        .iter()
        .map(|r| split_pair(r, '=', "reference", "COL=LEVEL such as `district=Tidewright Quay`"))
        .collect::<Result<_, _>>()?;
    for column in references.keys() {
        if !args.category.iter().any(|c| c == column) {
            return Err(CommandError::Usage(format!(
                "--reference names `{column}`, which is not listed in --category"
            )));
        }
    }
    let category_term = |column: &str| {
        let term = Term::category(column);
        match references.get(column) {
            Some(level) => term.reference(*level),
            None => term,
        }
    };
    let side = |column: &str| {
        if args.category.iter().any(|c| c == column) {
            category_term(column)
        } else {
            Term::numeric(column)
        }
    };
    for column in args.terms.iter().filter(|c| !c.is_empty()) {
        spec = spec.term(Term::numeric(column.trim()));
    }
    for text in &args.poly {
        let (column, d) = degree(text, "poly")?;
        spec = spec.term(Term::numeric(column).polynomial(d));
    }
    for text in &args.orthogonal_poly {
        let (column, d) = degree(text, "orthogonal-poly")?;
        spec = spec.term(Term::numeric(column).orthogonal_polynomial(d));
    }
    for column in &args.log {
        spec = spec.term(Term::numeric(column.trim()).log());
    }
    for column in &args.center {
        spec = spec.term(Term::numeric(column.trim()).center());
    }
    for column in &args.standardize {
        spec = spec.term(Term::numeric(column.trim()).standardize());
    }
    for column in args.category.iter().filter(|c| !c.is_empty()) {
        spec = spec.term(category_term(column.trim()));
    }
    for text in &args.interact {
        let (a, b) = split_pair(text, '*', "interact", "A*B such as `living_area*district`")?;
        spec = spec.term(side(a).times(side(b)));
    }
    for text in &args.date_terms {
        for term in plumbline::model::parse_term_list(text)? {
            if !matches!(term, Term::Date { .. }) {
                return Err(CommandError::Usage(format!(
                    "--date-term expects a date term such as `months:sale_date:2023-01-01` or `quarter:sale_date`, got `{text}`"
                )));
            }
            spec = spec.term(term);
        }
    }
    Ok(spec)
}

/// The covariance estimator the flags describe (`--cluster` wins over `--cov`).
pub fn covariance(cov: CovarianceArg, cluster: Option<&String>) -> CovarianceKind {
    match (cluster, cov) {
        (Some(c), _) => CovarianceKind::Cluster(c.clone()),
        (None, CovarianceArg::Classical) => CovarianceKind::Classical,
        (None, CovarianceArg::Hc0) => CovarianceKind::Hc0,
        (None, CovarianceArg::Hc1) => CovarianceKind::Hc1,
        (None, CovarianceArg::Hc2) => CovarianceKind::Hc2,
        (None, CovarianceArg::Hc3) => CovarianceKind::Hc3,
    }
}

/// The fit options the flags describe.
pub fn fit_options(args: &FitArgs) -> FitOptions {
    FitOptions {
        covariance: covariance(args.cov, args.cluster.as_ref()),
        precision: precision(args.precision),
        rank_tolerance: None,
    }
}

/// Maps the command-line precision flag to the library's.
pub fn precision(arg: PrecisionArg) -> Precision {
    match arg {
        PrecisionArg::Auto => Precision::Auto,
        PrecisionArg::Double => Precision::Double,
        PrecisionArg::Extended => Precision::Extended,
    }
}

/// Loads a data file, reading text files with the input flags.
pub fn load_with_flags(path: &std::path::Path, args: &InputFlags) -> Result<Frame, CommandError> {
    let extension = path.extension().and_then(|e| e.to_str()).unwrap_or("").to_ascii_lowercase();
    if extension == "parquet" || extension == "pq" {
        Ok(load_parquet(path)?.with_non_finite(non_finite_rule(args)?))
    } else {
        Ok(load_csv(path, &csv_options(args)?)?)
    }
}

/// Runs `plumbline fit`; returns the report to print. Nothing is printed
/// unless every step succeeded, so a failure never leaves partial JSON.
pub fn run(args: &FitArgs) -> Result<String, CommandError> {
    let frame = load_with_flags(&args.data, &args.input)?;
    let spec = model_spec(args)?;
    let model = fit_with(&frame, &spec, &fit_options(args))?;
    let predictions = match &args.predict {
        Some(path) => Some(model.predict(&load_with_flags(path, &args.input)?, args.level)?),
        None => None,
    };
    let diagnostics = if args.diagnose {
        Some((model.assumption_tests(), model.collinearity(), model.flagged_rows(&frame, args.id.as_deref())?))
    } else {
        None
    };
    match args.format {
        Format::Text => {
            let mut text = plumbline::render::fit_text(&model, args.level)?;
            if let Some((tests, collinearity, flags)) = &diagnostics {
                text.push('\n');
                text.push_str(&plumbline::render::tests_text(tests));
                text.push('\n');
                text.push_str(&plumbline::render::collinearity_text(collinearity));
                text.push('\n');
                text.push_str(&plumbline::render::flags_text(flags, 25));
            }
            if let Some(p) = &predictions {
                text.push('\n');
                text.push_str(&plumbline::render::predictions_text(p));
            }
            Ok(text)
        }
        Format::Html => {
            use plumbline::render::{AssumptionTests, Report};
            let html_of = |b: plumbline::render::MimeBundle| b.get("text/html").unwrap_or_default().to_string();
            let mut cards = vec![plumbline::render::fit_html(&model, args.level)?];
            if let Some((tests, collinearity, flags)) = &diagnostics {
                cards.push(html_of(AssumptionTests(tests.clone()).bundle()));
                cards.push(html_of(collinearity.bundle()));
                cards.push(html_of(flags.bundle()));
            }
            if let Some(p) = &predictions {
                cards.push(html_of(p.bundle()));
            }
            Ok(plumbline::render::html::page(&format!("Fit of {}", model.spec().target_label()), &cards))
        }
        Format::Json => {
            let document = FitDocument {
                summary: model.summary(args.level)?,
                predictions,
                diagnostics: diagnostics.map(|(tests, collinearity, flagged_rows)| FitDiagnostics {
                    tests,
                    collinearity,
                    flagged_rows,
                }),
                influence: args.influence.then(|| model.influence()),
            };
            Ok(to_pretty_json(&document, "fit document")?)
        }
    }
}
