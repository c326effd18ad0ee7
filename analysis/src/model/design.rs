//! From a frame and a specification to the numbers a solver needs.

use super::encode::{learn, GeneratedColumn, RowValues, TermEncoding};
use super::spec::{ModelSpec, TargetTransform, Term};
use crate::data::Frame;
use crate::error::{Error, Result};
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};

/// The name of the intercept column in every table and JSON document.
pub const INTERCEPT_NAME: &str = "intercept";

/// One column of the design matrix (see [`GeneratedColumn`]).
pub type DesignColumn = GeneratedColumn;

/// Rows left out of a fit because a value the model needs was missing.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct DroppedRows {
    /// Rows dropped in all.
    pub total: usize,
    /// For every model column with missing values, how many rows miss it (a
    /// row missing two columns counts under both).
    pub by_column: Vec<(String, usize)>,
}

impl DroppedRows {
    /// A one-line account, e.g. `12 rows (lot_size: 9, age: 4)`.
    pub fn describe(&self) -> String {
        if self.total == 0 {
            return "none".into();
        }
        let parts: Vec<String> = self.by_column.iter().map(|(c, k)| format!("{c}: {k}")).collect();
        format!("{} row{} ({})", self.total, if self.total == 1 { "" } else { "s" }, parts.join(", "))
    }
}

/// How to turn any frame with the model's columns into design columns, as
/// learned from the fitting rows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DesignRecipe {
    /// The specification the recipe was learned for.
    pub spec: ModelSpec,
    /// One learned encoding per term, in term order.
    pub encodings: Vec<TermEncoding>,
    /// Names of all design columns, intercept first when present.
    pub column_names: Vec<String>,
    /// Which design columns each term produced, in term order.
    pub term_spans: Vec<TermSpan>,
    /// `(column, min, max)` of every numeric term column over the fitting rows,
    /// so that predictions outside the data's range can be flagged.
    pub numeric_ranges: Vec<(String, f64, f64)>,
}

/// The design columns one term produced.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TermSpan {
    /// The term as written, e.g. `log(area)`, `district`, `poly(age, 3)`.
    pub label: String,
    /// Indices of its design columns.
    pub columns: std::ops::Range<usize>,
}

/// The design matrix `X` (column-wise), target `y` and weights of a fit.
#[derive(Debug, Clone)]
pub struct Design {
    /// The columns of `X`, intercept first when the model has one.
    pub columns: Vec<DesignColumn>,
    /// The target, transformed as the specification asks.
    pub target: Vec<f64>,
    /// Case weights, when the specification names a weight column.
    pub weights: Option<Vec<f64>>,
    /// Original 0-based frame row of each design row.
    pub rows_used: Vec<usize>,
    /// Rows dropped for missing values.
    pub dropped: DroppedRows,
    /// The learned encodings, for coding new data the same way.
    pub recipe: DesignRecipe,
}

impl Design {
    /// Rows in the design.
    pub fn n_rows(&self) -> usize {
        self.target.len()
    }

    /// Names of the design columns.
    pub fn column_names(&self) -> &[String] {
        &self.recipe.column_names
    }
}

/// The values of every column a model reads, restricted to complete rows.
struct CompleteRows {
    numbers: BTreeMap<String, Vec<f64>>,
    labels: BTreeMap<String, Vec<String>>,
    rows: Vec<usize>,
    dropped: DroppedRows,
}

fn numeric_columns_of(term: &Term, out: &mut BTreeSet<String>) {
    match term {
        Term::Numeric { column, .. } => {
            out.insert(column.clone());
        }
        Term::Category { .. } => {}
        Term::Interaction(a, b) => {
            numeric_columns_of(a, out);
            numeric_columns_of(b, out);
        }
    }
}

fn label_columns_of(term: &Term, out: &mut BTreeSet<String>) {
    match term {
        Term::Category { column, .. } => {
            out.insert(column.clone());
        }
        Term::Numeric { .. } => {}
        Term::Interaction(a, b) => {
            label_columns_of(a, out);
            label_columns_of(b, out);
        }
    }
}

/// Reads the named columns and keeps the rows where all of them are present.
fn complete_rows(frame: &Frame, numeric: &BTreeSet<String>, label: &BTreeSet<String>, order: &[String]) -> Result<CompleteRows> {
    for name in numeric.iter().chain(label) {
        frame.require_column(name)?;
    }
    let mut raw_numbers = BTreeMap::new();
    for name in numeric {
        raw_numbers.insert(name.clone(), frame.numeric_column(name)?);
    }
    let mut raw_labels = BTreeMap::new();
    for name in label {
        raw_labels.insert(name.clone(), frame.label_column(name)?);
    }
    let height = frame.height();
    let mut missing_by_column: BTreeMap<&str, usize> = BTreeMap::new();
    let mut rows = Vec::with_capacity(height);
    for row in 0..height {
        let mut complete = true;
        for (name, values) in &raw_numbers {
            if values[row].is_none() {
                *missing_by_column.entry(name).or_default() += 1;
                complete = false;
            }
        }
        for (name, values) in &raw_labels {
            if values[row].is_none() {
                *missing_by_column.entry(name).or_default() += 1;
                complete = false;
            }
        }
        if complete {
            rows.push(row);
        }
    }
    let mut by_column: Vec<(String, usize)> = Vec::new();
    for name in order {
        if let Some(k) = missing_by_column.remove(name.as_str()) {
            by_column.push((name.clone(), k));
        }
    }
    let dropped = DroppedRows { total: height - rows.len(), by_column };
    let numbers = raw_numbers
        .into_iter()
        .map(|(k, v)| (k, rows.iter().map(|&r| v[r].unwrap_or(f64::NAN)).collect()))
        .collect();
    let labels = raw_labels
        .into_iter()
        .map(|(k, v)| (k, rows.iter().map(|&r| v[r].clone().unwrap_or_default()).collect()))
        .collect();
    Ok(CompleteRows { numbers, labels, rows, dropped })
}

/// Builds the design of `spec` on `frame`.
///
/// Rows missing any value the model reads (target, terms, weights, and the
/// extra columns in `also_require`, such as a cluster column) are dropped and
/// counted per column. Category levels, centres and polynomial recurrences
/// are learned from the rows kept.
pub fn build_design(frame: &Frame, spec: &ModelSpec, also_require: &[&str]) -> Result<Design> {
    if spec.terms().is_empty() && !spec.has_intercept() {
        return Err(Error::Specification("a model without intercept needs at least one term".into()));
    }
    check_degrees(spec.terms())?;
    let mut numeric = BTreeSet::new();
    let mut label = BTreeSet::new();
    numeric.insert(spec.target().to_string());
    for term in spec.terms() {
        numeric_columns_of(term, &mut numeric);
        label_columns_of(term, &mut label);
    }
    if let Some(w) = spec.weight_column() {
        numeric.insert(w.to_string());
    }
    for extra in also_require {
        label.insert(extra.to_string());
    }
    let mut order = vec![spec.target().to_string()];
    for term in spec.terms() {
        order.extend(term.columns().into_iter().map(str::to_string));
    }
    order.extend(spec.weight_column().map(str::to_string));
    order.extend(also_require.iter().map(|s| s.to_string()));
    order.dedup();

    let complete = complete_rows(frame, &numeric, &label, &order)?;
    if complete.rows.is_empty() {
        return Err(Error::AllRowsDropped { detail: complete.dropped.describe() });
    }
    let line_of = |row: usize| frame.source_line(row);
    let values = RowValues { numbers: &complete.numbers, labels: &complete.labels, rows: &complete.rows, line_of: &line_of };

    // Target.
    let mut target = complete.numbers[spec.target()].clone();
    if spec.target_transform() == TargetTransform::Log {
        if let Some((i, &v)) = target.iter().enumerate().find(|(_, v)| !(**v > 0.0)) {
            let row = complete.rows[i];
            return Err(Error::TransformDomain {
                transform: "log of the target".into(),
                column: spec.target().into(),
                requirement: "positive values".into(),
                row: row + 1,
                line: frame.source_line(row),
                value: v,
            });
        }
        target.iter_mut().for_each(|v| *v = v.ln());
    }

    // Weights.
    let weights = match spec.weight_column() {
        None => None,
        Some(w) => {
            let ws = complete.numbers[w].clone();
            if let Some((i, &v)) = ws.iter().enumerate().find(|(_, v)| !(v.is_finite() && **v > 0.0)) {
                let row = complete.rows[i];
                return Err(Error::BadWeight { column: w.into(), row: row + 1, line: frame.source_line(row), value: v });
            }
            Some(ws)
        }
    };

    // Terms.
    let mut encodings = Vec::with_capacity(spec.terms().len());
    let mut full_coding_pending = !spec.has_intercept();
    for term in spec.terms() {
        let full = full_coding_pending && matches!(term, Term::Category { .. });
        if full {
            full_coding_pending = false;
        }
        encodings.push(learn(term, &values, full)?);
    }
    let (columns, term_spans) = assemble_columns(spec, &encodings, &values, complete.rows.len())?;
    let column_names: Vec<String> = columns.iter().map(|c| c.name.clone()).collect();
    if let Some(dup) = column_names.iter().enumerate().find(|(i, n)| column_names[..*i].contains(n)).map(|(_, n)| n) {
        return Err(Error::Specification(format!("the design column `{dup}` is generated twice; remove the repeated term")));
    }
    let mut term_numeric = BTreeSet::new();
    for term in spec.terms() {
        numeric_columns_of(term, &mut term_numeric);
    }
    let numeric_ranges = term_numeric
        .iter()
        .map(|c| {
            let v = &complete.numbers[c];
            (c.clone(), v.iter().cloned().fold(f64::INFINITY, f64::min), v.iter().cloned().fold(f64::NEG_INFINITY, f64::max))
        })
        .collect();
    let recipe = DesignRecipe { spec: spec.clone(), encodings, column_names, term_spans, numeric_ranges };
    Ok(Design { columns, target, weights, rows_used: complete.rows, dropped: complete.dropped, recipe })
}

fn check_degrees(terms: &[Term]) -> Result<()> {
    for term in terms {
        match term {
            Term::Numeric { transform: super::Transform::Polynomial(d) | super::Transform::OrthogonalPolynomial(d), column } if *d == 0 || *d > 20 => {
                return Err(Error::OutOfRange {
                    what: format!("the polynomial degree of `{column}`"),
                    requirement: "between 1 and 20".into(),
                    value: d.to_string(),
                })
            }
            Term::Interaction(a, b) => check_degrees(&[(**a).clone(), (**b).clone()])?,
            _ => {}
        }
    }
    Ok(())
}

fn assemble_columns(spec: &ModelSpec, encodings: &[TermEncoding], values: &RowValues, n: usize) -> Result<(Vec<DesignColumn>, Vec<TermSpan>)> {
    let mut columns = Vec::new();
    let mut spans = Vec::with_capacity(encodings.len());
    if spec.has_intercept() {
        columns.push(DesignColumn { name: INTERCEPT_NAME.into(), hi: vec![1.0; n], lo: None });
    }
    for (term, encoding) in spec.terms().iter().zip(encodings) {
        let start = columns.len();
        columns.extend(encoding.columns(values)?);
        spans.push(TermSpan { label: term.label(), columns: start..columns.len() });
    }
    Ok((columns, spans))
}

impl DesignRecipe {
    /// Codes the rows of a new frame exactly as the fitting rows were coded.
    ///
    /// Returns the design columns for the rows that have every term value, and
    /// those rows' original indices; rows with a missing term value are left
    /// out (the caller reports them). The target is not needed.
    pub fn apply(&self, frame: &Frame) -> Result<(Vec<DesignColumn>, Vec<usize>)> {
        let mut numeric = BTreeSet::new();
        let mut label = BTreeSet::new();
        for term in self.spec.terms() {
            numeric_columns_of(term, &mut numeric);
            label_columns_of(term, &mut label);
        }
        let order: Vec<String> = self.spec.terms().iter().flat_map(|t| t.columns()).map(str::to_string).collect();
        let complete = complete_rows(frame, &numeric, &label, &order)?;
        let line_of = |row: usize| frame.source_line(row);
        let values = RowValues { numbers: &complete.numbers, labels: &complete.labels, rows: &complete.rows, line_of: &line_of };
        let (columns, _) = assemble_columns(&self.spec, &self.encodings, &values, complete.rows.len())?;
        Ok((columns, complete.rows))
    }
}
