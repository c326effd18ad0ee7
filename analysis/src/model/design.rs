//! From a frame and a specification to the numbers a solver needs.

use super::encode::{learn, GeneratedColumn, RowValues, TermEncoding};
use super::spec::{DatePart, ModelSpec, NamedPoint, TargetTransform, Term};
use crate::data::{dates, Frame};
use crate::error::{Error, Result};
use crate::spatial::geodesy::{check_lon_lat, refuse_degrees_as_planar};
use crate::spatial::Coordinates;
use crate::state_bytes::{StateReader, StateWriter};
use chrono::NaiveDate;
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
    /// Of those, the values that were present but not finite (NaN, ±∞) and
    /// were read as missing because the frame's rule said so, by column.
    pub non_finite_by_column: Vec<(String, usize)>,
}

impl DroppedRows {
    /// A one-line account, e.g. `12 rows (lot_size: 9, age: 4)`, or with
    /// non-finite values read as missing,
    /// `3 rows (sale_price: 3, of which 2 not finite and read as missing)`.
    pub fn describe(&self) -> String {
        if self.total == 0 {
            return "none".into();
        }
        let parts: Vec<String> = self
            .by_column
            .iter()
            .map(|(c, k)| match self.non_finite_by_column.iter().find(|(n, _)| n == c) {
                Some((_, f)) => format!("{c}: {k}, of which {f} not finite and read as missing"),
                None => format!("{c}: {k}"),
            })
            .collect();
        format!("{} row{} ({})", self.total, if self.total == 1 { "" } else { "s" }, parts.join("; "))
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
    /// The term as written, e.g. `log(area)`, `district`, `age (powers 1–3)`.
    pub label: String,
    /// Indices of its design columns.
    pub columns: std::ops::Range<usize>,
}

/// The design matrix `X` (column-wise), target `y` and weights of a fit.
/// Built only by this module (from a frame, or a recipe's fitting design);
/// read through its accessors.
#[derive(Debug, Clone)]
pub struct Design {
    /// The columns of `X`, intercept first when the model has one.
    columns: Vec<DesignColumn>,
    /// The target, transformed as the specification asks.
    target: Vec<f64>,
    /// Case weights, when the specification names a weight column.
    weights: Option<Vec<f64>>,
    /// Original 0-based frame row of each design row.
    rows_used: Vec<usize>,
    /// Rows dropped for missing values.
    dropped: DroppedRows,
    /// The learned encodings, for coding new data the same way.
    recipe: DesignRecipe,
}

impl Design {
    /// The columns of `X`, intercept first when the model has one.
    pub fn columns(&self) -> &[DesignColumn] {
        &self.columns
    }

    /// The target, transformed as the specification asks.
    pub fn target(&self) -> &[f64] {
        &self.target
    }

    /// Case weights, when the specification names a weight column.
    pub fn weights(&self) -> Option<&[f64]> {
        self.weights.as_deref()
    }

    /// Original 0-based frame row of each design row.
    pub fn rows_used(&self) -> &[usize] {
        &self.rows_used
    }

    /// Rows dropped for missing values.
    pub fn dropped(&self) -> &DroppedRows {
        &self.dropped
    }

    /// The learned encodings, for coding new data the same way.
    pub fn recipe(&self) -> &DesignRecipe {
        &self.recipe
    }

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

/// Where one set of values the design reads comes from: a frame column, a
/// part of a date column (a date term), or the distance of two coordinate
/// columns from a place. Keyed in the maps below by the name the encoder
/// reads it under ([`Term::derived_name`] for derived values).
#[derive(Debug, Clone, PartialEq)]
enum ValueSource {
    Column(String),
    DatePart { column: String, part: DatePart },
    Distance { x: String, y: String, point: NamedPoint },
}

impl ValueSource {
    /// The frame column a missing value is counted under. A distance is
    /// missing exactly where one of its coordinates is, and its coordinates
    /// are read (and counted) as columns of their own, so it has none.
    fn column(&self) -> Option<&str> {
        match self {
            ValueSource::Column(c) | ValueSource::DatePart { column: c, .. } => Some(c),
            ValueSource::Distance { .. } => None,
        }
    }

    /// Every frame column the source reads.
    fn frame_columns(&self) -> Vec<&str> {
        match self {
            ValueSource::Column(c) | ValueSource::DatePart { column: c, .. } => vec![c],
            ValueSource::Distance { x, y, .. } => vec![x, y],
        }
    }
}

/// The values a set of terms reads, as numbers and as labels.
#[derive(Debug, Default)]
struct ValueReads {
    numbers: BTreeMap<String, ValueSource>,
    labels: BTreeMap<String, ValueSource>,
}

impl ValueReads {
    fn of_terms(terms: &[Term]) -> Self {
        let mut reads = Self::default();
        terms.iter().for_each(|t| reads.add_term(t));
        reads
    }

    fn add_term(&mut self, term: &Term) {
        match term {
            Term::Numeric { column, .. } => self.add_number(column),
            Term::Category { column, .. } => self.add_label(column),
            Term::Date { column, part, .. } => {
                let source = ValueSource::DatePart { column: column.clone(), part: part.clone() };
                let map = if part.is_numeric() { &mut self.numbers } else { &mut self.labels };
                map.insert(part.derived_name(column), source);
            }
            Term::Distance { x, y, point, .. } => {
                self.add_number(x);
                self.add_number(y);
                let source = ValueSource::Distance { x: x.clone(), y: y.clone(), point: point.clone() };
                self.numbers.insert(term.derived_name().unwrap_or_default(), source);
            }
            Term::Interaction(a, b) => {
                self.add_term(a);
                self.add_term(b);
            }
        }
    }

    fn add_number(&mut self, column: &str) {
        self.numbers.insert(column.to_string(), ValueSource::Column(column.to_string()));
    }

    fn add_label(&mut self, column: &str) {
        self.labels.insert(column.to_string(), ValueSource::Column(column.to_string()));
    }
}

/// The numbers a source yields, one per frame row (NaN where missing), and
/// how many non-finite values the frame's rule read as missing.
fn read_numbers(frame: &Frame, source: &ValueSource) -> Result<(Vec<f64>, usize)> {
    match source {
        ValueSource::Column(c) => {
            let read = frame.numeric_values(c)?;
            Ok((read.values, read.non_finite_as_missing))
        }
        ValueSource::DatePart { column, part } => {
            let Some((reference, between)) = part.trend_measure() else {
                unreachable!("categorical date parts are read as labels")
            };
            let what = format!("the reference date of the term `{}`", part.derived_name(column));
            let reference = dates::require_iso_date(what, reference)?;
            let days = frame.date_column(column)?;
            Ok((days.into_iter().map(|d| d.map_or(f64::NAN, |d| between(reference, d))).collect(), 0))
        }
        ValueSource::Distance { x: x_column, y: y_column, point } => {
            // Non-finite coordinates are counted under their own columns.
            let (xs, ys) = (frame.numeric_values(x_column)?.values, frame.numeric_values(y_column)?.values);
            match point.coordinates {
                Coordinates::Planar => refuse_degrees_as_planar(
                    x_column,
                    y_column,
                    &xs,
                    &ys,
                    &format!(
                        "a geodesic distance term, `geodist:{x_column}:{y_column}:PLON:PLAT:{}` \
                         (in code, `NamedPoint::geographic`)",
                        point.name
                    ),
                )?,
                Coordinates::Geographic => {
                    for (row, (&lon, &lat)) in xs.iter().zip(&ys).enumerate() {
                        if !(lon.is_nan() || lat.is_nan()) {
                            check_lon_lat(lon, lat, &|| {
                                format!("`{x_column}`, `{y_column}` on data row {} (longitude, latitude)", row + 1)
                            })?;
                        }
                    }
                }
            }
            // NaN (missing) in either coordinate gives NaN (missing) here.
            let distance = |(x, y): (f64, f64)| if x.is_nan() || y.is_nan() { f64::NAN } else { point.distance(x, y) };
            Ok((xs.into_iter().zip(ys).map(distance).collect(), 0))
        }
    }
}

/// The labels a source yields, one per frame row.
fn read_labels(frame: &Frame, source: &ValueSource) -> Result<Vec<Option<String>>> {
    match source {
        ValueSource::Column(c) => frame.label_column(c),
        ValueSource::DatePart { column, part } => {
            let label: fn(NaiveDate) -> String = match part {
                DatePart::Year => dates::year_label,
                DatePart::Quarter => dates::quarter_label,
                DatePart::MonthOfYear => dates::month_of_year_label,
                DatePart::MonthsSince(_) | DatePart::DaysSince(_) => {
                    unreachable!("numeric date parts are read as numbers")
                }
            };
            Ok(frame.date_column(column)?.into_iter().map(|d| d.map(label)).collect())
        }
        ValueSource::Distance { .. } => unreachable!("distances are read as numbers"),
    }
}

/// Reads the values a design needs and keeps the rows where all of them are
/// present; missing values are counted by frame column, in `order`.
fn complete_rows(frame: &Frame, reads: &ValueReads, order: &[String]) -> Result<CompleteRows> {
    for source in reads.numbers.values().chain(reads.labels.values()) {
        for column in source.frame_columns() {
            frame.require_column(column)?;
        }
    }
    let mut non_finite_by_column: BTreeMap<&str, usize> = BTreeMap::new();
    let mut raw_numbers = BTreeMap::new();
    // Read in model order (target first), so that of two bad values on one
    // row the message names the column the user thinks of first.
    let position = |column: &str| order.iter().position(|c| c == column).unwrap_or(usize::MAX);
    let mut number_reads: Vec<(&String, &ValueSource)> = reads.numbers.iter().collect();
    number_reads.sort_by_key(|(_, source)| source.column().map_or(usize::MAX, position));
    for (key, source) in number_reads {
        let (values, non_finite) = read_numbers(frame, source)?;
        if let (true, Some(column)) = (non_finite > 0, source.column()) {
            *non_finite_by_column.entry(column).or_default() = non_finite;
        }
        raw_numbers.insert(key.clone(), (source.column(), values));
    }
    let mut raw_labels = BTreeMap::new();
    for (key, source) in &reads.labels {
        raw_labels.insert(key.clone(), (source.column(), read_labels(frame, source)?));
    }
    let height = frame.height();
    // Only columns with a missing value take part in the row-by-row scan.
    let gappy_numbers: Vec<(Option<&str>, &Vec<f64>)> =
        raw_numbers.values().filter(|(_, v)| crate::numeric::scan::any_nan(v)).map(|(c, v)| (*c, v)).collect();
    let gappy_labels: Vec<(Option<&str>, &Vec<Option<String>>)> =
        raw_labels.values().filter(|(_, v)| v.iter().any(Option::is_none)).map(|(c, v)| (*c, v)).collect();
    let mut missing_by_column: BTreeMap<&str, usize> = BTreeMap::new();
    let rows: Vec<usize> = if gappy_numbers.is_empty() && gappy_labels.is_empty() {
        (0..height).collect()
    } else {
        let mut rows = Vec::with_capacity(height);
        let mut missing_now: BTreeSet<&str> = BTreeSet::new();
        for row in 0..height {
            missing_now.clear();
            let mut present = true;
            for (column, values) in &gappy_numbers {
                if values[row].is_nan() {
                    present = false;
                    missing_now.extend(*column);
                }
            }
            for (column, values) in &gappy_labels {
                if values[row].is_none() {
                    present = false;
                    missing_now.extend(*column);
                }
            }
            if present {
                rows.push(row);
            }
            for column in &missing_now {
                *missing_by_column.entry(column).or_default() += 1;
            }
        }
        rows
    };
    let in_order = |counts: &mut BTreeMap<&str, usize>| -> Vec<(String, usize)> {
        order.iter().filter_map(|name| counts.remove(name.as_str()).map(|k| (name.clone(), k))).collect()
    };
    let dropped = DroppedRows {
        total: height - rows.len(),
        by_column: in_order(&mut missing_by_column),
        non_finite_by_column: in_order(&mut non_finite_by_column),
    };
    let every_row = rows.len() == height;
    let numbers = raw_numbers
        .into_iter()
        .map(|(k, (_, v))| if every_row { (k, v) } else { (k, rows.iter().map(|&r| v[r]).collect()) })
        .collect();
    let labels = raw_labels
        .into_iter()
        .map(|(k, (_, v))| {
            if every_row {
                (k, v.into_iter().map(Option::unwrap_or_default).collect())
            } else {
                (k, rows.iter().map(|&r| v[r].clone().unwrap_or_default()).collect())
            }
        })
        .collect();
    Ok(CompleteRows { numbers, labels, rows, dropped })
}

/// The complete rows of a fit, with the (transformed) target and the weights.
struct FittingRows {
    complete: CompleteRows,
    target: Vec<f64>,
    weights: Option<Vec<f64>>,
}

/// Reads the rows a fit of `spec` uses: drops rows missing any value the
/// model reads, takes the log of the target when asked (refusing values that
/// are not positive) and checks the weights.
fn fitting_rows(frame: &Frame, spec: &ModelSpec, also_require: &[&str]) -> Result<FittingRows> {
    if spec.terms().is_empty() && !spec.has_intercept() {
        return Err(Error::Specification("a model without intercept needs at least one term".into()));
    }
    check_degrees(spec.terms())?;
    let mut reads = ValueReads::of_terms(spec.terms());
    reads.add_number(spec.target());
    if let Some(w) = spec.weight_column() {
        reads.add_number(w);
    }
    for extra in also_require {
        reads.add_label(extra);
    }
    let order = read_order(spec, also_require);
    let mut complete = complete_rows(frame, &reads, &order)?;

    // Target.
    // Moved out when no term or weight reads the same column, copied otherwise.
    let target_shared = ValueReads::of_terms(spec.terms()).numbers.contains_key(spec.target())
        || spec.weight_column() == Some(spec.target());
    let mut target = if target_shared {
        complete.numbers[spec.target()].clone()
    } else {
        complete.numbers.remove(spec.target()).unwrap_or_default()
    };
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
                return Err(Error::BadWeight {
                    column: w.into(),
                    row: row + 1,
                    line: frame.source_line(row),
                    value: v,
                });
            }
            Some(ws)
        }
    };
    Ok(FittingRows { complete, target, weights })
}

/// The frame columns a model reads, target first, in the order messages name them.
fn read_order(spec: &ModelSpec, also_require: &[&str]) -> Vec<String> {
    let mut order = vec![spec.target().to_string()];
    for term in spec.terms() {
        order.extend(term.columns().into_iter().map(str::to_string));
    }
    order.extend(spec.weight_column().map(str::to_string));
    order.extend(also_require.iter().map(|s| s.to_string()));
    order.dedup();
    order
}

/// Builds the design of `spec` on `frame`.
///
/// Rows missing any value the model reads (target, terms, weights, and the
/// extra columns in `also_require`, such as a cluster column) are dropped and
/// counted per column. Category levels, centres and polynomial recurrences
/// are learned from the rows kept.
pub fn build_design(frame: &Frame, spec: &ModelSpec, also_require: &[&str]) -> Result<Design> {
    let FittingRows { mut complete, target, weights } = fitting_rows(frame, spec, also_require)?;
    if complete.rows.is_empty() {
        return Err(Error::AllRowsDropped { detail: complete.dropped.describe() });
    }
    let line_of = |row: usize| frame.source_line(row);
    let values =
        RowValues { numbers: &complete.numbers, labels: &complete.labels, rows: &complete.rows, line_of: &line_of };

    // Terms.
    let mut encodings = Vec::with_capacity(spec.terms().len());
    let mut full_coding_pending = !spec.has_intercept();
    for term in spec.terms() {
        let full = full_coding_pending && matches!(term.resolved(), Term::Category { .. });
        if full {
            full_coding_pending = false;
        }
        encodings.push(learn(term, &values, full)?);
    }
    let numeric_ranges = ValueReads::of_terms(spec.terms())
        .numbers
        .keys()
        .map(|c| {
            let v = &complete.numbers[c];
            (
                c.clone(),
                v.iter().cloned().fold(f64::INFINITY, f64::min),
                v.iter().cloned().fold(f64::NEG_INFINITY, f64::max),
            )
        })
        .collect();
    check_design_memory(spec, &encodings, complete.rows.len())?;
    let mut moved = take_untransformed(spec, &encodings, &mut complete.numbers);
    let values =
        RowValues { numbers: &complete.numbers, labels: &complete.labels, rows: &complete.rows, line_of: &line_of };
    let (columns, term_spans) = assemble_columns(spec, &encodings, &values, complete.rows.len(), &mut moved)?;
    let column_names: Vec<String> = columns.iter().map(|c| c.name.clone()).collect();
    if let Some(dup) = column_names.iter().enumerate().find(|(i, n)| column_names[..*i].contains(n)).map(|(_, n)| n) {
        return Err(Error::Specification(format!(
            "the design column `{dup}` is generated twice; remove the repeated term"
        )));
    }
    let recipe = DesignRecipe { spec: spec.clone(), encodings, column_names, term_spans, numeric_ranges };
    Ok(Design { columns, target, weights, rows_used: complete.rows, dropped: complete.dropped, recipe })
}

/// Copies of the design a fit holds at its peak, for the memory check: the
/// design's columns, the solver's working copy, and its triangular factor and
/// Householder vectors (as large as the design at worst).
const DESIGN_COPIES: u64 = 3;

/// Refuses a design larger than the memory budget before any column is
/// built: `rows × columns × 8 bytes × DESIGN_COPIES`, naming the widest term
/// (a category of many levels is the usual cause).
fn check_design_memory(spec: &ModelSpec, encodings: &[TermEncoding], rows: usize) -> Result<()> {
    let width: usize = usize::from(spec.has_intercept())
        + encodings.iter().map(TermEncoding::width).fold(0usize, usize::saturating_add);
    let needed = (rows as u64).saturating_mul(width as u64).saturating_mul(8 * DESIGN_COPIES);
    let widest = spec.terms().iter().zip(encodings).max_by_key(|(_, e)| e.width());
    let advice = match widest {
        Some((term, encoding)) if encoding.width() > 1 => format!(
            "the term `{}` alone makes {} columns; group its rare levels into one, fit one model per market \
             area (`fit_by`), or leave it out",
            term.label(),
            encoding.width()
        ),
        _ => "use fewer terms, or fewer rows (a sample, or one market area at a time)".into(),
    };
    crate::data::MemoryBudget::current()?.check(
        needed,
        || format!("a design of {rows} rows and {width} columns"),
        &advice,
    )
}

fn check_degrees(terms: &[Term]) -> Result<()> {
    for term in terms {
        match term {
            Term::Numeric {
                transform: super::Transform::Polynomial(d) | super::Transform::OrthogonalPolynomial(d),
                column,
            } if *d == 0 || *d > 20 => {
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

/// Takes out of `numbers` the columns that enter the design once and
/// unchanged — an untransformed numeric term that no other term reads — so
/// that [`assemble_columns`] moves them into the design instead of copying
/// them (at 10⁶ rows, 8 MB a column saved).
fn take_untransformed(
    spec: &ModelSpec,
    encodings: &[TermEncoding],
    numbers: &mut BTreeMap<String, Vec<f64>>,
) -> BTreeMap<String, Vec<f64>> {
    let mut uses: BTreeMap<&str, usize> = BTreeMap::new();
    for term in spec.terms() {
        for column in term.columns() {
            *uses.entry(column).or_default() += 1;
        }
    }
    let mut moved = BTreeMap::new();
    for encoding in encodings {
        if let TermEncoding::Numeric { column, transform: super::Transform::Identity, .. } = encoding {
            if uses.get(column.as_str()) == Some(&1) {
                if let Some(values) = numbers.remove(column) {
                    moved.insert(column.clone(), values);
                }
            }
        }
    }
    moved
}

/// The design columns of `encodings` on `values`, after the intercept when
/// the model has one. Columns in `moved` (see [`take_untransformed`]) are
/// moved into the design.
fn assemble_columns(
    spec: &ModelSpec,
    encodings: &[TermEncoding],
    values: &RowValues,
    n: usize,
    moved: &mut BTreeMap<String, Vec<f64>>,
) -> Result<(Vec<DesignColumn>, Vec<TermSpan>)> {
    let mut columns = Vec::new();
    let mut spans = Vec::with_capacity(encodings.len());
    if spec.has_intercept() {
        columns.push(DesignColumn { name: INTERCEPT_NAME.into(), hi: vec![1.0; n], lo: None });
    }
    for (term, encoding) in spec.terms().iter().zip(encodings) {
        let start = columns.len();
        let taken = match encoding {
            TermEncoding::Numeric { column, transform: super::Transform::Identity, .. } => moved.remove_entry(column),
            _ => None,
        };
        match taken {
            Some((name, hi)) => columns.push(DesignColumn { name, hi, lo: None }),
            None => columns.extend(encoding.columns(values)?),
        }
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
    pub fn apply(&self, frame: &Frame) -> Result<AppliedDesign> {
        let reads = ValueReads::of_terms(self.spec.terms());
        let order: Vec<String> = self.spec.terms().iter().flat_map(|t| t.columns()).map(str::to_string).collect();
        let complete = complete_rows(frame, &reads, &order)?;
        let line_of = |row: usize| frame.source_line(row);
        let values =
            RowValues { numbers: &complete.numbers, labels: &complete.labels, rows: &complete.rows, line_of: &line_of };
        let (columns, _) =
            assemble_columns(&self.spec, &self.encodings, &values, complete.rows.len(), &mut BTreeMap::new())?;
        Ok(AppliedDesign { columns, rows: complete.rows, numbers: complete.numbers })
    }
}

impl DesignRecipe {
    /// The design of a frame's rows coded with this recipe, target and
    /// weights included, for fits assembled from several frames (row batches
    /// of a large file, or partitions). Rows are dropped for missing values
    /// as [`build_design`] drops them; a frame with no complete row gives an
    /// empty design. A category level the recipe does not know is refused.
    pub fn fitting_design(&self, frame: &Frame) -> Result<Design> {
        self.design_of_rows(frame, fitting_rows(frame, &self.spec, &[])?)
    }

    /// The design of `frame`'s fitting rows, already read.
    fn design_of_rows(&self, frame: &Frame, rows: FittingRows) -> Result<Design> {
        let FittingRows { mut complete, target, weights } = rows;
        let mut moved = take_untransformed(&self.spec, &self.encodings, &mut complete.numbers);
        let line_of = |row: usize| frame.source_line(row);
        let values =
            RowValues { numbers: &complete.numbers, labels: &complete.labels, rows: &complete.rows, line_of: &line_of };
        let (columns, _) = assemble_columns(&self.spec, &self.encodings, &values, complete.rows.len(), &mut moved)?;
        Ok(Design {
            columns,
            target,
            weights,
            rows_used: complete.rows,
            dropped: complete.dropped,
            recipe: self.clone(),
        })
    }
}

/// The frame columns `spec` reads, as `(numbers, labels)`: what a reader that
/// loads only a model's columns ([`crate::data::RowBatches`]) must provide.
/// Date columns are listed with the labels (read as ISO 8601 text).
pub fn columns_read(spec: &ModelSpec) -> (Vec<String>, Vec<String>) {
    let mut reads = ValueReads::of_terms(spec.terms());
    reads.add_number(spec.target());
    if let Some(w) = spec.weight_column() {
        reads.add_number(w);
    }
    split_reads(&reads)
}

/// The frame columns `spec`'s terms read (no target, no weights), as
/// `(numbers, labels)`: what new rows to predict must provide.
pub fn term_columns_read(spec: &ModelSpec) -> (Vec<String>, Vec<String>) {
    split_reads(&ValueReads::of_terms(spec.terms()))
}

fn split_reads(reads: &ValueReads) -> (Vec<String>, Vec<String>) {
    let mut numbers = Vec::new();
    let mut labels = Vec::new();
    for source in reads.numbers.values().chain(reads.labels.values()) {
        for column in source.frame_columns() {
            let list = match source {
                ValueSource::Column(_) if reads.numbers.values().any(|s| s == source) => &mut numbers,
                ValueSource::Distance { .. } => &mut numbers,
                _ => &mut labels,
            };
            if !list.iter().any(|c: &String| c == column) {
                list.push(column.to_string());
            }
        }
    }
    (numbers, labels)
}

/// Learns a [`DesignRecipe`] from frames seen one after another (row batches
/// of data larger than memory), as [`build_design`] learns it from one frame:
/// the same levels, the same reference levels (the most frequent, unless
/// named), the same column names and value ranges. Terms whose coding needs
/// every value at once (centred, standardised and orthogonal-polynomial
/// terms) are refused with the alternative to use.
#[derive(Debug)]
pub struct RecipeLearner {
    spec: ModelSpec,
    level_counts: BTreeMap<String, BTreeMap<String, usize>>,
    ranges: BTreeMap<String, (f64, f64)>,
    dropped: DroppedRows,
    rows_kept: usize,
}

impl RecipeLearner {
    /// A learner for `spec`; refuses terms that cannot be learned in batches.
    pub fn new(spec: &ModelSpec) -> Result<Self> {
        fn check(term: &Term) -> Result<()> {
            match term {
                Term::Numeric {
                    column,
                    transform:
                        super::Transform::Center | super::Transform::Standardize | super::Transform::OrthogonalPolynomial(_),
                } => Err(Error::Specification(format!(
                    "the term `{}` is coded from every value of `{column}` at once, which a fit read in batches \
                     cannot do; use `{column}` itself (or its raw powers): the fitted values are the same, only the \
                     intercept and this term's coefficients are on the raw scale",
                    term.label()
                ))),
                Term::Interaction(a, b) => check(a).and_then(|()| check(b)),
                _ => Ok(()),
            }
        }
        spec.terms().iter().try_for_each(check)?;
        check_degrees(spec.terms())?;
        Ok(Self {
            spec: spec.clone(),
            level_counts: BTreeMap::new(),
            ranges: BTreeMap::new(),
            dropped: DroppedRows::default(),
            rows_kept: 0,
        })
    }

    /// Takes in one frame's complete rows.
    pub fn absorb(&mut self, frame: &Frame) -> Result<()> {
        let FittingRows { complete, .. } = fitting_rows(frame, &self.spec, &[])?;
        self.absorb_rows(&complete);
        Ok(())
    }

    /// Whether the model's coding needs no level of any column: it reads no
    /// text or date column, so every design column is a function of its own
    /// row's numbers, known before any row is seen.
    pub fn codes_without_levels(&self) -> bool {
        ValueReads::of_terms(self.spec.terms()).labels.is_empty()
    }

    /// The recipe to code rows with before any has been seen, for a model
    /// that [codes without levels](Self::codes_without_levels) (`None`
    /// otherwise): the same columns as [`Self::finish`] gives, without the
    /// value ranges, which only the rows can tell. A fit can then learn and
    /// factor in one pass over the rows ([`Self::absorb_into_design`]).
    pub fn recipe_before_rows(&self) -> Option<DesignRecipe> {
        if !self.codes_without_levels() {
            return None;
        }
        self.recipe().ok()
    }

    /// Takes in one frame's complete rows, as [`Self::absorb`], and codes
    /// them with `recipe`, as [`DesignRecipe::fitting_design`]: one reading
    /// of the frame for both (a fit that learns while it factors).
    pub fn absorb_into_design(&mut self, recipe: &DesignRecipe, frame: &Frame) -> Result<Design> {
        let rows = fitting_rows(frame, &self.spec, &[])?;
        self.absorb_rows(&rows.complete);
        recipe.design_of_rows(frame, rows)
    }

    fn absorb_rows(&mut self, complete: &CompleteRows) {
        for (key, labels) in &complete.labels {
            let counts = self.level_counts.entry(key.clone()).or_default();
            for label in labels {
                match counts.get_mut(label) {
                    Some(c) => *c += 1,
                    None => {
                        counts.insert(label.clone(), 1);
                    }
                }
            }
        }
        for key in ValueReads::of_terms(self.spec.terms()).numbers.keys() {
            let (low, high) = crate::numeric::scan::min_max(&complete.numbers[key]);
            let range = self.ranges.entry(key.clone()).or_insert((f64::INFINITY, f64::NEG_INFINITY));
            range.0 = range.0.min(low);
            range.1 = range.1.max(high);
        }
        self.dropped.absorb(&complete.dropped);
        self.rows_kept += complete.rows.len();
    }

    /// Rows kept so far.
    pub fn rows_kept(&self) -> usize {
        self.rows_kept
    }

    /// Adds what another learner of the same specification saw (another
    /// partition's rows): level counts and kept rows summed, ranges widened,
    /// dropped rows added. The result does not depend on the order of merges
    /// except for the order in which dropped columns are listed.
    pub fn merge(&mut self, other: &RecipeLearner) {
        for (key, counts) in &other.level_counts {
            let mine = self.level_counts.entry(key.clone()).or_default();
            for (label, count) in counts {
                *mine.entry(label.clone()).or_default() += count;
            }
        }
        for (key, &(lo, hi)) in &other.ranges {
            let range = self.ranges.entry(key.clone()).or_insert((f64::INFINITY, f64::NEG_INFINITY));
            range.0 = range.0.min(lo);
            range.1 = range.1.max(hi);
        }
        self.dropped.absorb(&other.dropped);
        self.rows_kept += other.rows_kept;
    }

    /// What the learner saw, as exact bytes ([`crate::state_bytes`]); the
    /// specification is not written (the reader is given it).
    pub fn to_bytes(&self) -> Vec<u8> {
        let mut writer = StateWriter::new(LEARNER_TAG);
        writer.count(self.level_counts.len());
        for (key, counts) in &self.level_counts {
            writer.text(key).count(counts.len());
            for (label, &count) in counts {
                writer.text(label).count(count);
            }
        }
        writer.count(self.ranges.len());
        for (key, &(lo, hi)) in &self.ranges {
            writer.text(key).number(lo).number(hi);
        }
        writer.count(self.dropped.total);
        for list in [&self.dropped.by_column, &self.dropped.non_finite_by_column] {
            writer.count(list.len());
            for (column, count) in list {
                writer.text(column).count(*count);
            }
        }
        writer.count(self.rows_kept).finish()
    }

    /// Reads what [`Self::to_bytes`] wrote, for `spec`.
    pub fn from_bytes(bytes: &[u8], spec: &ModelSpec) -> Result<Self> {
        let mut learner = Self::new(spec)?;
        let mut reader = StateReader::new(bytes, LEARNER_TAG, "coding")?;
        for _ in 0..reader.count()? {
            let key = reader.text()?;
            let mut counts = BTreeMap::new();
            for _ in 0..reader.count()? {
                counts.insert(reader.text()?, reader.count()?);
            }
            learner.level_counts.insert(key, counts);
        }
        for _ in 0..reader.count()? {
            let key = reader.text()?;
            learner.ranges.insert(key, (reader.number()?, reader.number()?));
        }
        learner.dropped.total = reader.count()?;
        for list in [&mut learner.dropped.by_column, &mut learner.dropped.non_finite_by_column] {
            for _ in 0..reader.count()? {
                list.push((reader.text()?, reader.count()?));
            }
        }
        learner.rows_kept = reader.count()?;
        reader.finish()?;
        Ok(learner)
    }

    /// Rows dropped so far, by column.
    pub fn dropped(&self) -> &DroppedRows {
        &self.dropped
    }

    /// The recipe learned from every frame absorbed.
    pub fn finish(&self) -> Result<DesignRecipe> {
        if self.rows_kept == 0 {
            return Err(Error::AllRowsDropped { detail: self.dropped.describe() });
        }
        self.recipe()
    }

    /// The recipe of what has been seen so far, rows or none.
    fn recipe(&self) -> Result<DesignRecipe> {
        let spec = &self.spec;
        let mut encodings = Vec::with_capacity(spec.terms().len());
        let mut full_coding_pending = !spec.has_intercept();
        for term in spec.terms() {
            let full = full_coding_pending && matches!(term.resolved(), Term::Category { .. });
            if full {
                full_coding_pending = false;
            }
            encodings.push(super::encode::learn_from_level_counts(term, &self.level_counts, full)?);
        }
        // Column names do not depend on values: assemble on no rows (every
        // value the terms read, whether or not a row has been seen).
        let reads = ValueReads::of_terms(spec.terms());
        let (numbers, labels): (BTreeMap<String, Vec<f64>>, BTreeMap<String, Vec<String>>) = (
            reads.numbers.keys().map(|k| (k.clone(), Vec::new())).collect(),
            reads.labels.keys().map(|k| (k.clone(), Vec::new())).collect(),
        );
        let line_of = |_: usize| None;
        let values = RowValues { numbers: &numbers, labels: &labels, rows: &[], line_of: &line_of };
        let (columns, term_spans) = assemble_columns(spec, &encodings, &values, 0, &mut BTreeMap::new())?;
        let column_names: Vec<String> = columns.iter().map(|c| c.name.clone()).collect();
        let numeric_ranges = self.ranges.iter().map(|(c, &(lo, hi))| (c.clone(), lo, hi)).collect();
        Ok(DesignRecipe { spec: spec.clone(), encodings, column_names, term_spans, numeric_ranges })
    }
}

impl DroppedRows {
    /// Adds another frame's dropped rows to these (counts by column summed,
    /// columns kept in first-seen order).
    pub fn absorb(&mut self, other: &DroppedRows) {
        self.total += other.total;
        for (mine, theirs) in
            [(&mut self.by_column, &other.by_column), (&mut self.non_finite_by_column, &other.non_finite_by_column)]
        {
            for (column, count) in theirs {
                match mine.iter_mut().find(|(c, _)| c == column) {
                    Some((_, k)) => *k += count,
                    None => mine.push((column.clone(), *count)),
                }
            }
        }
    }
}

/// The tag of a learner's state ([`crate::state_bytes`]).
const LEARNER_TAG: &[u8; 4] = b"PLC0";

/// New rows coded by [`DesignRecipe::apply`].
#[derive(Debug, Clone)]
pub struct AppliedDesign {
    /// The design columns, for the rows in `rows`.
    pub columns: Vec<DesignColumn>,
    /// The 0-based frame rows that had every term value.
    pub rows: Vec<usize>,
    /// The numeric values the terms read (before transforms), by the names in
    /// [`DesignRecipe::numeric_ranges`], for the rows in `rows`.
    pub numbers: BTreeMap<String, Vec<f64>>,
}
