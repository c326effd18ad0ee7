//! The frame type cells and the command line work with.

use super::dates::{from_epoch_days, parse_iso_date, require_iso_date, to_epoch_days};
use super::values::number_hint;
use super::{NonFinite, Provenance};
use crate::error::{Error, Result};
use chrono::NaiveDate;
use polars::prelude::{AnyValue, DataFrame, DataType, IdxCa, IdxSize};

/// A polars [`DataFrame`] that remembers where it came from.
///
/// Rows are numbered from 1 in every message (data rows, header excluded);
/// when the source was a text file, [`Frame::source_line`] gives the file line
/// of each row as well, because that is what an analyst opens an editor at.
///
/// A frame also carries its rule for non-finite numbers ([`NonFinite`]):
/// by default a NaN or infinite value in a column used as numbers is an
/// error naming the column, the row and the line.
#[derive(Debug, Clone)]
pub struct Frame {
    data: DataFrame,
    provenance: Provenance,
    source_lines: Option<Vec<u64>>,
    non_finite: NonFinite,
}

/// A column read as numbers, with the count of non-finite values that the
/// frame's rule turned into missing ones.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct NumericValues {
    /// One value per row; NaN where missing. Every other value is finite:
    /// non-finite values were refused or read as missing before this was
    /// built, so NaN can mean nothing else.
    pub values: Vec<f64>,
    /// Rows whose value was not finite and now reads as missing.
    pub non_finite_as_missing: usize,
}

impl Frame {
    /// Wraps a frame read from a source; `source_lines`, if given, holds the
    /// 1-based file line of each data row.
    pub(crate) fn from_parts(data: DataFrame, provenance: Provenance, source_lines: Option<Vec<u64>>) -> Self {
        Self { data, provenance, source_lines, non_finite: NonFinite::Refuse }
    }

    /// Wraps a frame built in code; its provenance says so under `label`.
    pub fn from_dataframe(data: DataFrame, label: &str) -> Self {
        let provenance = Provenance::in_memory(label, data.height(), data.width());
        Self { data, provenance, source_lines: None, non_finite: NonFinite::Refuse }
    }

    /// The same frame with another rule for non-finite numbers.
    pub fn with_non_finite(mut self, rule: NonFinite) -> Self {
        self.non_finite = rule;
        self
    }

    /// The same frame, reading NaN and infinite numbers as missing values:
    /// rows holding one are then dropped from fits like rows with an empty
    /// field, and counted apart in the account of dropped rows.
    pub fn non_finite_as_missing(&self) -> Self {
        self.clone().with_non_finite(NonFinite::AsMissing)
    }

    /// The frame's rule for non-finite numbers.
    pub fn non_finite_rule(&self) -> NonFinite {
        self.non_finite
    }

    /// The rows at `rows` (0-based, in the order given) as a new frame whose
    /// provenance names the source and `label`, keeping each row's file line.
    pub fn subset(&self, rows: &[usize], label: &str) -> Result<Frame> {
        let index: Vec<IdxSize> = rows.iter().map(|&r| r as IdxSize).collect();
        let data = self.data.take(&IdxCa::from_vec("row".into(), index))?;
        let mut provenance = self.provenance.clone();
        provenance.path = format!("{} [{label}]", self.provenance.path);
        provenance.rows = data.height();
        let source_lines = self.source_lines.as_ref().map(|lines| rows.iter().map(|&r| lines[r]).collect());
        Ok(Frame { data, provenance, source_lines, non_finite: self.non_finite })
    }

    /// A copy with `column` set to `value` on every row (added when absent) —
    /// for example subject properties valued as of one month.
    pub fn with_number(&self, column: &str, value: f64) -> Result<Frame> {
        let filled = polars::prelude::Column::new(column.into(), vec![value; self.height()]);
        self.with_filled_column(filled, &value.to_string())
    }

    /// A copy with `column` set to the date `date` (ISO 8601, `YYYY-MM-DD`) on
    /// every row (added when absent) — for example subject properties valued
    /// as of one date through a model with a sale-date term.
    pub fn with_date(&self, column: &str, date: &str) -> Result<Frame> {
        let day = require_iso_date(format!("the date given for `{column}`"), date)?;
        let days = vec![to_epoch_days(day); self.height()];
        let filled = polars::prelude::Column::new(column.into(), days).cast(&DataType::Date)?;
        self.with_filled_column(filled, date)
    }

    /// A copy with the text column `column` holding `text` on every row
    /// (added, or replacing its namesake).
    pub fn with_text(&self, column: &str, text: &str) -> Result<Frame> {
        let filled = polars::prelude::Column::new(column.into(), vec![text; self.height()]);
        self.with_filled_column(filled, text)
    }

    /// A copy with `filled` (one value on every row) added or replacing its
    /// namesake; the provenance notes `[column = shown]`.
    fn with_filled_column(&self, filled: polars::prelude::Column, shown: &str) -> Result<Frame> {
        let mut data = self.data.clone();
        let label = format!("{} [{} = {shown}]", self.provenance.path, filled.name());
        data.with_column(filled)?;
        let mut provenance = self.provenance.clone();
        provenance.path = label;
        provenance.cols = data.width();
        Ok(Frame { data, provenance, source_lines: self.source_lines.clone(), non_finite: self.non_finite })
    }

    /// A stable text key of row `row` built from every column's value, used to
    /// place rows in folds independently of their order in the file.
    pub fn row_key(&self, row: usize) -> String {
        self.data
            .columns()
            .iter()
            .map(|c| c.get(row).map(|v| v.to_string()).unwrap_or_default())
            .collect::<Vec<_>>()
            .join("\u{1f}")
    }

    /// The underlying polars frame.
    pub fn data(&self) -> &DataFrame {
        &self.data
    }

    /// Where the data came from.
    pub fn provenance(&self) -> &Provenance {
        &self.provenance
    }

    /// Number of data rows.
    pub fn height(&self) -> usize {
        self.data.height()
    }

    /// Number of columns.
    pub fn width(&self) -> usize {
        self.data.width()
    }

    /// Column names in file order.
    pub fn column_names(&self) -> Vec<String> {
        self.data.get_column_names().iter().map(|s| s.to_string()).collect()
    }

    /// The file line of data row `row` (0-based index), when known.
    pub fn source_line(&self, row: usize) -> Option<u64> {
        self.source_lines.as_ref().and_then(|lines| lines.get(row).copied())
    }

    /// The column called `name`, found by scanning the names rather than through
    /// polars' hashed schema lookup: in a notebook each cell is a separately
    /// linked library with its own copy of polars, and a schema cached by one
    /// copy must not be looked up through another's hasher.
    pub fn column_by_name(&self, name: &str) -> Result<&polars::prelude::Column> {
        self.require_column(name)?;
        let index = self.data.get_column_names().iter().position(|c| c.as_str() == name).unwrap_or(0);
        Ok(&self.data.columns()[index])
    }

    /// Checks that `name` is a column, suggesting close names when it is not.
    pub fn require_column(&self, name: &str) -> Result<()> {
        if self.data.get_column_names().iter().any(|c| c.as_str() == name) {
            return Ok(());
        }
        let available = self.column_names();
        Err(Error::ColumnNotFound {
            name: name.to_string(),
            source_label: format!("`{}`", self.provenance.path),
            suggestions: closest_names(name, &available),
            available,
        })
    }

    /// The values of numeric column `name` at the 0-based `rows`, in that
    /// order; a row without a finite value is an error naming the column, the
    /// row and its line, and `purpose` (why every one of these rows needs it).
    pub fn numbers_at(&self, name: &str, rows: &[usize], purpose: &str) -> Result<Vec<f64>> {
        let values = self.numeric_column(name)?;
        rows.iter()
            .map(|&r| {
                values[r].filter(|v| v.is_finite()).ok_or_else(|| Error::MissingValue {
                    column: name.to_string(),
                    row: r + 1,
                    line: self.source_line(r),
                    purpose: purpose.to_string(),
                })
            })
            .collect()
    }

    /// The places of the 0-based `rows`: columns `x` and `y` read as
    /// [`Frame::numbers_at`] does, and — when they are declared planar —
    /// refused if they read as longitude and latitude in degrees
    /// ([`crate::spatial::geodesy::refuse_degrees_as_planar`]), the message
    /// naming `declare_geographic`, the option that reads them as degrees.
    pub fn places_at(
        &self,
        (x, y): (&str, &str),
        rows: &[usize],
        coordinates: crate::spatial::Coordinates,
        purpose: &str,
        declare_geographic: &str,
    ) -> Result<(Vec<f64>, Vec<f64>)> {
        let (xs, ys) = (self.numbers_at(x, rows, purpose)?, self.numbers_at(y, rows, purpose)?);
        if coordinates == crate::spatial::Coordinates::Planar {
            crate::spatial::geodesy::refuse_degrees_as_planar(x, y, &xs, &ys, declare_geographic)?;
        }
        Ok((xs, ys))
    }

    /// The column as numbers, `None` for missing values.
    ///
    /// Integer and boolean columns convert exactly (integers beyond 2⁵³ round).
    /// A text column is accepted only when every present value parses as a
    /// number; otherwise the first offending row is reported with its value
    /// (and, for a spreadsheet-formatted number, the option that reads it).
    /// A non-finite value is refused with its row and line, or read as
    /// missing when the frame's rule says so ([`Frame::non_finite_as_missing`]).
    pub fn numeric_column(&self, name: &str) -> Result<Vec<Option<f64>>> {
        Ok(self.numeric_values(name)?.values.into_iter().map(|v| (!v.is_nan()).then_some(v)).collect())
    }

    /// [`Frame::numeric_column`] with the count of non-finite values read as
    /// missing, for the account of dropped rows.
    pub(crate) fn numeric_values(&self, name: &str) -> Result<NumericValues> {
        let series = self.column_by_name(name)?.as_materialized_series().clone();
        let values: Vec<Option<f64>> = match series.dtype() {
            DataType::String => {
                let strings = series.str()?;
                let mut out = Vec::with_capacity(strings.len());
                for (row, value) in strings.iter().enumerate() {
                    match value {
                        None => out.push(None),
                        Some(text) => match text.trim().parse::<f64>() {
                            Ok(v) => out.push(Some(v)),
                            Err(_) => {
                                return Err(Error::NotNumeric {
                                    column: name.to_string(),
                                    row: row + 1,
                                    line: self.source_line(row),
                                    value: text.to_string(),
                                    hint: number_hint(name, text),
                                })
                            }
                        },
                    }
                }
                out
            }
            DataType::Date | DataType::Datetime(..) => return Err(Error::DatesNotNumbers { column: name.to_string() }),
            dtype if dtype.is_primitive_numeric() || dtype.is_bool() => {
                let cast = series.cast(&DataType::Float64)?;
                let doubles = cast.f64()?;
                if doubles.null_count() == 0 {
                    // The common case, copied chunk by chunk (a memcpy each) without a per-value branch.
                    let mut values = Vec::with_capacity(doubles.len());
                    for chunk in doubles.downcast_iter() {
                        values.extend_from_slice(chunk.values());
                    }
                    return self.checked_numbers(name, values, None);
                }
                doubles.iter().collect()
            }
            other => {
                let first = series.get(0).map(|v| v.to_string()).unwrap_or_default();
                return Err(Error::NotNumeric {
                    column: name.to_string(),
                    row: 1,
                    line: self.source_line(0),
                    value: format!("{first} (a {other} column)"),
                    hint: None,
                });
            }
        };
        let missing: Vec<bool> = values.iter().map(Option::is_none).collect();
        let values = values.into_iter().map(|v| v.unwrap_or(f64::NAN)).collect();
        self.checked_numbers(name, values, Some(missing))
    }

    /// Applies the frame's non-finite rule to `values` (where `missing`, if
    /// given, marks the rows that were missing in the source; their values
    /// are NaN) and refuses a column with no value at all.
    fn checked_numbers(&self, name: &str, mut values: Vec<f64>, missing: Option<Vec<bool>>) -> Result<NumericValues> {
        let is_missing = |row: usize| missing.as_ref().is_some_and(|m| m[row]);
        let mut non_finite_as_missing = 0;
        if crate::numeric::scan::any_non_finite(&values) {
            for (row, value) in values.iter_mut().enumerate() {
                if !value.is_finite() && !is_missing(row) {
                    match self.non_finite {
                        NonFinite::Refuse => {
                            return Err(Error::NonFinite {
                                column: name.to_string(),
                                row: row + 1,
                                line: self.source_line(row),
                                value: *value,
                            })
                        }
                        NonFinite::AsMissing => {
                            *value = f64::NAN;
                            non_finite_as_missing += 1;
                        }
                    }
                }
            }
        }
        if !values.is_empty() && values.iter().all(|v| v.is_nan()) {
            return Err(Error::ColumnAllMissing { column: name.to_string() });
        }
        Ok(NumericValues { values, non_finite_as_missing })
    }

    /// The column as calendar dates, `None` for missing values.
    ///
    /// A date column reads directly; a text column is accepted when every
    /// present value is an ISO 8601 date (`YYYY-MM-DD`), otherwise the first
    /// other value is reported with its row and line.
    pub fn date_column(&self, name: &str) -> Result<Vec<Option<NaiveDate>>> {
        let series = self.column_by_name(name)?.as_materialized_series().clone();
        let dates: Vec<Option<NaiveDate>> = match series.dtype() {
            DataType::Date => series.date()?.physical().iter().map(|d| d.and_then(from_epoch_days)).collect(),
            DataType::String => {
                let mut out = Vec::with_capacity(series.len());
                for (row, value) in series.str()?.iter().enumerate() {
                    out.push(match value {
                        None => None,
                        Some(text) => Some(parse_iso_date(text).ok_or_else(|| Error::BadDate {
                            column: name.to_string(),
                            row: row + 1,
                            line: self.source_line(row),
                            value: text.to_string(),
                            format: super::dates::ISO_DATE_FORMAT.to_string(),
                        })?),
                    });
                }
                out
            }
            other => return Err(Error::NotDates { column: name.to_string(), found: format!("{other} values") }),
        };
        if !dates.is_empty() && dates.iter().all(Option::is_none) {
            return Err(Error::ColumnAllMissing { column: name.to_string() });
        }
        Ok(dates)
    }

    /// The column as text labels (numbers print as they would in a file), for
    /// use as a categorical term; `None` for missing values.
    pub fn label_column(&self, name: &str) -> Result<Vec<Option<String>>> {
        let series = self.column_by_name(name)?.as_materialized_series().clone();
        let labels: Vec<Option<String>> = if series.dtype() == &DataType::String {
            series.str()?.iter().map(|v| v.map(str::to_string)).collect()
        } else {
            series
                .iter()
                .map(|v| match v {
                    AnyValue::Null => None,
                    AnyValue::String(s) => Some(s.to_string()),
                    other => Some(other.to_string()),
                })
                .collect()
        };
        if !labels.is_empty() && labels.iter().all(Option::is_none) {
            return Err(Error::ColumnAllMissing { column: name.to_string() });
        }
        Ok(labels)
    }
}

/// Up to three existing names closest to `wanted` (normalised Damerau–Levenshtein
/// similarity ≥ 0.5, or one containing the other, ignoring case).
pub(crate) fn closest_names(wanted: &str, available: &[String]) -> Vec<String> {
    let wanted_lower = wanted.to_lowercase();
    let mut scored: Vec<(f64, &String)> = available
        .iter()
        .map(|name| {
            let lower = name.to_lowercase();
            let mut score = strsim::normalized_damerau_levenshtein(&wanted_lower, &lower);
            if !lower.is_empty() && (lower.contains(&wanted_lower) || wanted_lower.contains(&lower)) {
                score = score.max(0.6);
            }
            (score, name)
        })
        .filter(|(score, _)| *score >= 0.5)
        .collect();
    scored.sort_by(|a, b| b.0.total_cmp(&a.0).then_with(|| a.1.cmp(b.1)));
    scored.into_iter().take(3).map(|(_, n)| n.clone()).collect()
}
