//! The study's inputs cell and `--set NAME=VALUE`.
//!
//! A study marks one code cell as its inputs by making the cell's first
//! non-blank line the comment [`INPUTS_MARKER`]. Each line of that cell of the
//! form `let NAME = VALUE;` (optionally `let mut`, optionally with a type) is
//! an input. `plumbline run --set NAME=VALUE` rewrites that line before the
//! run, keeping the type, and notes the old value in a trailing comment so
//! that a reader of the executed notebook sees what was changed:
//!
//! ```text
//! // plumbline: study inputs
//! let sales_file = "data/sales.csv";
//! let confidence: f64 = 0.95;
//! ```
//!
//! `--set sales_file=data/sales-next-quarter.csv` makes the second line
//! `let sales_file = "data/sales-next-quarter.csv"; // set by plumbline run (was "data/sales.csv")`.
//! A value replacing a string literal is written as a string literal (quoted
//! and escaped); any other value is written as given, and must stay a number
//! where the old value was one.

use super::document::{CellKind, Notebook};

/// The comment that marks a code cell as the study's inputs.
pub const INPUTS_MARKER: &str = "// plumbline: study inputs";

/// Why the inputs could not be set.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum InputError {
    /// A `--set` argument without `=`.
    #[error("`--set {0}` needs the form NAME=VALUE")]
    Malformed(String),
    /// `--set` was given but no cell carries the marker.
    #[error("the notebook has no inputs cell: make the first line of one code cell `{INPUTS_MARKER}` and declare each input there as `let NAME = VALUE;`")]
    NoInputsCell,
    /// Two cells carry the marker.
    #[error("cells {0} and {1} are both marked `{INPUTS_MARKER}`; keep the marker on one cell")]
    TwoInputsCells(usize, usize),
    /// The name is not declared in the inputs cell.
    #[error("the inputs cell (cell {cell}) declares no input `{name}`; it declares: {declared}")]
    UnknownInput { name: String, cell: usize, declared: String },
    /// The same name was set twice.
    #[error("input `{0}` is set twice; give each --set once")]
    SetTwice(String),
    /// A number was replaced by something that is not one.
    #[error("input `{name}` holds a number ({old}); `{value}` is not a number")]
    NotANumber { name: String, old: String, value: String },
    /// A value that would break the cell.
    #[error("the value of input `{0}` must be one line")]
    MultilineValue(String),
}

/// One input declared in the inputs cell.
#[derive(Debug, Clone, PartialEq)]
pub struct DeclaredInput {
    /// Variable name.
    pub name: String,
    /// Its value as written (a Rust expression).
    pub value: String,
    /// Line index within the cell.
    line: usize,
}

/// An input changed for this run.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize, schemars::JsonSchema)]
pub struct AppliedInput {
    /// Variable name.
    pub name: String,
    /// The value it had in the notebook.
    pub old: String,
    /// The value the run used (as written into the cell).
    pub new: String,
}

/// Splits `NAME=VALUE`.
pub fn parse_assignment(text: &str) -> Result<(String, String), InputError> {
    let (name, value) = text.split_once('=').ok_or_else(|| InputError::Malformed(text.to_string()))?;
    let name = name.trim();
    if name.is_empty() {
        return Err(InputError::Malformed(text.to_string()));
    }
    Ok((name.to_string(), value.to_string()))
}

/// Index of the cell marked as the inputs, if any.
pub fn inputs_cell(notebook: &Notebook) -> Result<Option<usize>, InputError> {
    let mut found = None;
    for index in 0..notebook.len() {
        if notebook.kind(index) != CellKind::Code {
            continue;
        }
        let source = notebook.source(index);
        if source.lines().find(|l| !l.trim().is_empty()).map(str::trim) == Some(INPUTS_MARKER) {
            if let Some(first) = found {
                return Err(InputError::TwoInputsCells(first + 1, index + 1));
            }
            found = Some(index);
        }
    }
    Ok(found)
}

/// The `let` declarations of an inputs cell.
pub fn declared_inputs(source: &str) -> Vec<DeclaredInput> {
    source
        .lines()
        .enumerate()
        .filter_map(|(line, text)| {
            let rest = text.trim_start().strip_prefix("let ")?;
            let rest = rest.trim_start().strip_prefix("mut ").unwrap_or(rest).trim_start();
            let name_end = rest.find(|c: char| !(c.is_alphanumeric() || c == '_'))?;
            let name = &rest[..name_end];
            let (_, value) = rest.split_once('=')?;
            let value = statement_value(value)?;
            (!name.is_empty()).then(|| DeclaredInput { name: name.to_string(), value: value.to_string(), line })
        })
        .collect()
}

/// The expression of `VALUE; // comment`, without the semicolon and comment.
fn statement_value(after_equals: &str) -> Option<&str> {
    // Find the terminating `;` outside a string literal.
    let mut in_string = false;
    let mut escaped = false;
    for (i, c) in after_equals.char_indices() {
        match c {
            _ if escaped => escaped = false,
            '\\' if in_string => escaped = true,
            '"' => in_string = !in_string,
            ';' if !in_string => return Some(after_equals[..i].trim()),
            _ => {}
        }
    }
    None
}

fn is_number(text: &str) -> bool {
    let plain: String = text.trim().chars().filter(|c| *c != '_').collect();
    let plain = plain.trim_end_matches(|c: char| c.is_ascii_alphabetic() && c != 'e' && c != 'E');
    plain.parse::<f64>().is_ok()
}

/// The Rust text of `value` replacing the old expression `old`.
fn new_expression(name: &str, old: &str, value: &str) -> Result<String, InputError> {
    if value.contains('\n') {
        return Err(InputError::MultilineValue(name.to_string()));
    }
    if old.starts_with('"') || old.starts_with("r\"") || old.starts_with("r#") {
        // Debug formatting of a str is a valid Rust string literal.
        return Ok(format!("{value:?}"));
    }
    let value = value.trim();
    if is_number(old) && !is_number(value) {
        return Err(InputError::NotANumber { name: name.to_string(), old: old.to_string(), value: value.to_string() });
    }
    // A floating-point input stays one: `39` replacing `36.0` is written `39.0`
    // (Rust does not turn an integer literal into an f64).
    let float_old = is_number(old) && (old.contains('.') || old.ends_with("f64") || old.ends_with("f32"));
    if float_old && value.chars().all(|c| c.is_ascii_digit() || c == '-' || c == '_') {
        return Ok(format!("{value}.0"));
    }
    Ok(value.to_string())
}

/// Applies `assignments` to the notebook's inputs cell; returns what changed.
pub fn apply(notebook: &mut Notebook, assignments: &[(String, String)]) -> Result<Vec<AppliedInput>, InputError> {
    for (i, (name, _)) in assignments.iter().enumerate() {
        if assignments[..i].iter().any(|(n, _)| n == name) {
            return Err(InputError::SetTwice(name.clone()));
        }
    }
    let cell = inputs_cell(notebook)?;
    if assignments.is_empty() {
        return Ok(Vec::new());
    }
    let cell = cell.ok_or(InputError::NoInputsCell)?;
    let source = notebook.source(cell);
    let declared = declared_inputs(&source);
    let mut lines: Vec<String> = source.lines().map(str::to_string).collect();
    let mut applied = Vec::new();
    for (name, value) in assignments {
        let input = declared.iter().find(|d| &d.name == name).ok_or_else(|| InputError::UnknownInput {
            name: name.clone(),
            cell: cell + 1,
            declared: if declared.is_empty() {
                "nothing (declare inputs as `let NAME = VALUE;`)".into()
            } else {
                declared.iter().map(|d| d.name.as_str()).collect::<Vec<_>>().join(", ")
            },
        })?;
        let expression = new_expression(name, &input.value, value)?;
        let line = &lines[input.line];
        let Some(equals) = line.find('=') else { continue };
        let indent_and_let = &line[..equals + 1];
        lines[input.line] = format!("{indent_and_let} {expression}; // set by plumbline run (was {})", input.value);
        applied.push(AppliedInput { name: name.clone(), old: input.value.clone(), new: expression });
    }
    let mut new_source = lines.join("\n");
    if source.ends_with('\n') {
        new_source.push('\n');
    }
    notebook.set_source(cell, &new_source);
    Ok(applied)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn notebook(inputs: &str) -> Notebook {
        let doc = serde_json::json!({
            "nbformat": 4, "nbformat_minor": 5, "metadata": {},
            "cells": [
                {"cell_type": "markdown", "metadata": {}, "source": "# A study"},
                {"cell_type": "code", "metadata": {}, "source": inputs, "outputs": [], "execution_count": null},
                {"cell_type": "code", "metadata": {}, "source": "let model = 1;", "outputs": [], "execution_count": null}
            ]
        });
        Notebook::parse(&doc.to_string()).unwrap()
    }

    const CELL: &str = "// plumbline: study inputs\nlet sales_file = \"data/sales.csv\";\nlet mut level: f64 = 0.95; // interval level\nlet folds = 10;\n";

    #[test]
    fn declarations_are_found_with_types_and_comments() {
        let names: Vec<(String, String)> = declared_inputs(CELL).into_iter().map(|d| (d.name, d.value)).collect();
        assert_eq!(
            names,
            vec![
                ("sales_file".into(), "\"data/sales.csv\"".into()),
                ("level".into(), "0.95".into()),
                ("folds".into(), "10".into())
            ]
        );
    }

    #[test]
    fn strings_are_quoted_and_the_old_value_is_noted() {
        let mut nb = notebook(CELL);
        let applied =
            apply(&mut nb, &[("sales_file".into(), "data/next \"q\".csv".into()), ("level".into(), "0.9".into())])
                .unwrap();
        assert_eq!(applied.len(), 2);
        let source = nb.source(1);
        assert!(
            source
                .contains(r#"let sales_file = "data/next \"q\".csv"; // set by plumbline run (was "data/sales.csv")"#),
            "{source}"
        );
        assert!(source.contains("let mut level: f64 = 0.9; // set by plumbline run (was 0.95)"), "{source}");
        assert!(source.ends_with("let folds = 10;\n"));
    }

    #[test]
    fn mistakes_name_what_to_fix() {
        let mut nb = notebook(CELL);
        let err = apply(&mut nb, &[("sale_file".into(), "x".into())]).unwrap_err();
        assert_eq!(
            err.to_string(),
            "the inputs cell (cell 2) declares no input `sale_file`; it declares: sales_file, level, folds"
        );
        let mut floats = notebook(CELL);
        apply(&mut floats, &[("level".into(), "1".into())]).unwrap();
        assert!(floats.source(1).contains("let mut level: f64 = 1.0;"));
        let err = apply(&mut nb, &[("folds".into(), "ten".into())]).unwrap_err();
        assert!(matches!(err, InputError::NotANumber { .. }));
        let mut plain = notebook("let x = 1;");
        assert_eq!(apply(&mut plain, &[("x".into(), "2".into())]).unwrap_err(), InputError::NoInputsCell);
        assert!(parse_assignment("novalue").is_err());
        assert_eq!(parse_assignment("a=b=c").unwrap(), ("a".into(), "b=c".into()));
    }
}
