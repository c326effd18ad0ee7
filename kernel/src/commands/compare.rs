//! `plumbline compare`: several candidate models on one data file.

use super::fit::{covariance, load_with_flags};
use super::CommandError;
use crate::cli::{CompareArgs, Format};
use plumbline::compare::{cross_validate, nested_test, rows_with_values, side_by_side, CrossValidation};
use plumbline::documents::{to_pretty_json, ComparedModel, ComparisonDocument, NestedEntry, ValidationEntry};
use plumbline::model::parse_term_list;
use plumbline::prelude::*;
use std::io::{IsTerminal, Write};

/// Model names: A, B, …, Z, then M27, M28, ….
fn model_name(i: usize) -> String {
    if i < 26 {
        char::from(b'A' + i as u8).to_string()
    } else {
        format!("M{}", i + 1)
    }
}

/// Runs `plumbline compare`.
pub fn run(args: &CompareArgs) -> Result<String, CommandError> {
    let frame = load_with_flags(&args.data, &args.input, Some(&args.source))?;
    let mut specs = Vec::with_capacity(args.models.len());
    for text in &args.models {
        let mut spec = args.model.base_spec();
        for term in parse_term_list(text)? {
            spec = spec.term(term);
        }
        specs.push(spec);
    }
    // Fit every model on the rows that have every column any model uses.
    let mut used: Vec<&str> = vec![args.model.target.as_str()];
    for spec in &specs {
        for term in spec.terms() {
            used.extend(term.columns());
        }
    }
    used.extend(args.model.weights.as_deref());
    let common = rows_with_values(&frame, &used)?;
    let dropped = frame.height() - common.len();
    let frame = frame.subset(&common, "rows complete for every model")?;
    let options = FitOptions::with_covariance(covariance(args.cov, None));
    let fits: Vec<Fit> = specs.iter().map(|s| fit_with(&frame, s, &options)).collect::<Result<_>>()?;
    let names: Vec<String> = (0..fits.len()).map(model_name).collect();
    let named: Vec<(&str, &Fit)> = names.iter().map(String::as_str).zip(fits.iter()).collect();
    let table = side_by_side(&named)?;

    // Nested tests between neighbours in the order given, where they are nested.
    let mut nested = Vec::new();
    for i in 1..fits.len() {
        match nested_test(&fits[i - 1], &fits[i]) {
            Ok(t) => nested.push((names[i - 1].clone(), names[i].clone(), Ok(t))),
            Err(e) => nested.push((names[i - 1].clone(), names[i].clone(), Err(e.to_string()))),
        }
    }

    let mut validation = Vec::new();
    if let Some(k) = args.folds {
        let cv = CrossValidation { folds: k, seed: args.seed, id_column: args.id.clone() };
        let interactive = std::io::stderr().is_terminal();
        for (name, spec) in names.iter().zip(&specs) {
            let mut progress = |done: usize, total: usize| {
                if interactive {
                    let filled = done * 20 / total;
                    eprint!(
                        "\r  cross-validating {name} [{}{}] {done}/{total}",
                        "#".repeat(filled),
                        ".".repeat(20 - filled)
                    );
                    let _ = std::io::stderr().flush();
                }
            };
            validation.push((name.clone(), cross_validate(&frame, spec, &options, &cv, &mut progress)?));
            if interactive {
                eprintln!();
            }
        }
    }

    match args.format {
        Format::Json => {
            let document = ComparisonDocument {
                models: names
                    .iter()
                    .zip(&args.models)
                    .map(|(n, t)| ComparedModel { name: n.clone(), terms: Some(t.clone()) })
                    .collect(),
                rows_dropped: Some(dropped),
                nested: nested
                    .into_iter()
                    .map(|(restricted, full, result)| {
                        let (test, not_comparable) = match result {
                            Ok(t) => (Some(t), None),
                            Err(e) => (None, Some(e)),
                        };
                        NestedEntry { restricted, full, test, not_comparable }
                    })
                    .collect(),
                cross_validation: validation
                    .into_iter()
                    .map(|(model, result)| ValidationEntry { model, result })
                    .collect(),
                data: Some(frame.provenance().clone()),
                ..ComparisonDocument::of_table(&table)
            };
            Ok(to_pretty_json(&document, "comparison document")?)
        }
        Format::Html => {
            use plumbline::render::Report;
            let mut cards = vec![table.bundle().get("text/html").unwrap_or_default().to_string()];
            for (n, r) in &validation {
                let mut card = r.bundle().get("text/html").unwrap_or_default().to_string();
                card = card.replacen("-fold cross-validation", &format!("-fold cross-validation of {n}"), 1);
                cards.push(card);
            }
            Ok(plumbline::render::html::page("Model comparison", &cards))
        }
        Format::Text => {
            let mut out = format!(
                "Comparison of {} models of {}{} on {} rows ({} dropped for missing values)\n",
                fits.len(),
                if args.model.log_target { "log " } else { "" },
                args.model.target,
                frame.height(),
                dropped
            );
            for (n, t) in names.iter().zip(&args.models) {
                out.push_str(&format!("  {n}: {t}\n"));
            }
            out.push('\n');
            out.push_str(&plumbline::render::comparison_text(&table));
            if !nested.is_empty() {
                out.push('\n');
                for (a, b, r) in &nested {
                    match r {
                        Ok(t) => out.push_str(&plumbline::render::nested_text(a, b, t)),
                        Err(e) => out.push_str(&format!("{b} vs {a}: not compared — {e}\n")),
                    }
                }
            }
            if !validation.is_empty() {
                out.push('\n');
                for (n, r) in &validation {
                    out.push_str(&plumbline::render::cross_validation_text(n, r));
                }
            }
            Ok(out)
        }
    }
}
