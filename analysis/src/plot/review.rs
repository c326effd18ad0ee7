//! What the review charts read from a fit and the frame it was fitted to:
//! each sale's model value, miss, studentized residual, Cook's distance, sale
//! date (or other time value), location group and identifier.
//!
//! The residual panels that need the data beside the fit (time, location,
//! influence) go through [`ReviewData::gather`], which matches every design
//! row to its frame row through `Design::rows_used` and refuses a frame other
//! than the fitting one ([`crate::Error::FrameMismatch`]).
//!
//! **The miss** is what a reviewer reads a residual as: for a log target
//! `100 (e^r − 1)` percent — the sale sold that many percent above (below,
//! when negative) the model's median value — and for a level target the
//! residual `y − ŷ` itself, in the target's units.

use crate::data::dates::{from_epoch_days, to_epoch_days};
use crate::data::Frame;
use crate::diagnose::flags::cooks_cutoff;
use crate::error::Result;
use crate::fit::Fit;
use crate::model::{TargetTransform, Term};
use polars::prelude::DataType;

use super::PlotSize;

/// Most parcels the influence panel labels by default.
pub const DEFAULT_LABELLED: usize = 5;

/// What the review charts draw beside the fit. Built with
/// `ReviewOptions::default().ids("parcel_id")` and the like; every column
/// left unset is chosen from the model (see each field).
#[derive(Debug, Clone, PartialEq)]
pub struct ReviewOptions {
    /// Column whose values name the labelled sales (a parcel id); `None`
    /// labels them `row N` (1-based data row).
    pub id_column: Option<String>,
    /// Date or numeric column for the time panel. `None`: the column of the
    /// model's first date term, else the frame's first date column, else no
    /// time panel.
    pub time_column: Option<String>,
    /// Category column for the location panel. `None`: the column of the
    /// model's first category term, else no location panel.
    pub group_column: Option<String>,
    /// Most sales labelled in the influence panel ([`DEFAULT_LABELLED`]).
    pub labelled: usize,
    /// Size of the chart; the sheet's default (the library default size) is
    /// widened to 1200 × 860.
    pub size: PlotSize,
}

impl Default for ReviewOptions {
    fn default() -> Self {
        ReviewOptions {
            id_column: None,
            time_column: None,
            group_column: None,
            labelled: DEFAULT_LABELLED,
            size: PlotSize::default(),
        }
    }
}

impl ReviewOptions {
    /// Names the labelled sales by `column`.
    pub fn ids(mut self, column: impl Into<String>) -> Self {
        self.id_column = Some(column.into());
        self
    }

    /// Uses `column` (a date or a number) for the time panel.
    pub fn time(mut self, column: impl Into<String>) -> Self {
        self.time_column = Some(column.into());
        self
    }

    /// Uses `column` (a category) for the location panel.
    pub fn groups(mut self, column: impl Into<String>) -> Self {
        self.group_column = Some(column.into());
        self
    }

    /// Labels at most `count` sales in the influence panel.
    pub fn labelled(mut self, count: usize) -> Self {
        self.labelled = count;
        self
    }

    /// Draws at `size`.
    pub fn size(mut self, size: PlotSize) -> Self {
        self.size = size;
        self
    }
}

/// The time axis of the time panel.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct TimeAxis {
    /// The frame column.
    pub column: String,
    /// Per design row: days since 1970-01-01 for a date column, else the number.
    pub values: Vec<Option<f64>>,
    /// Whether `values` are days (tick labels show `YYYY-MM`).
    pub is_date: bool,
}

impl TimeAxis {
    /// The calendar quarter of a design row's date, as `(year, quarter)`.
    pub fn quarter(&self, i: usize) -> Option<(i32, u32)> {
        use chrono::Datelike;
        let days = self.values[i]?;
        let date = from_epoch_days(days as i32)?;
        Some((date.year(), date.month0() / 3 + 1))
    }
}

/// The location groups of the location panel.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct GroupAxis {
    /// The frame column.
    pub column: String,
    /// Per design row: the group's label.
    pub labels: Vec<Option<String>>,
}

/// Everything the review panels draw, one entry per design row.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct ReviewData {
    /// The model value on the target's own scale (`e^ŷ` for a log target).
    pub model_value: Vec<f64>,
    /// The miss: percent above the model value for a log target, `y − ŷ` otherwise.
    pub miss: Vec<f64>,
    /// Axis title for the miss.
    pub miss_title: String,
    /// Axis title for the model value.
    pub value_title: String,
    /// Externally studentized residual (`NaN` where undefined).
    pub studentized: Vec<f64>,
    /// Cook's distance (`NaN` where undefined).
    pub cooks: Vec<f64>,
    /// The Cook's distance line `4/n`.
    pub cooks_cutoff: f64,
    /// Design-row indices of the labelled sales, most influential first: those
    /// above `4/n`, in the order [`Fit::flagged_rows`] lists them (computed
    /// here from the Cook's distances already at hand; the review-sheet test
    /// checks the two agree).
    pub labelled: Vec<usize>,
    /// Each design row's name: its id, or `row N`.
    pub names: Vec<String>,
    /// The time axis, when there is one.
    pub time: Option<TimeAxis>,
    /// The location groups, when there are some.
    pub groups: Option<GroupAxis>,
}

impl ReviewData {
    /// What the fit alone tells: model values, misses, studentized residuals
    /// and Cook's distances; rows named `row N`, no labels, time or groups.
    pub fn of_fit(fit: &Fit) -> ReviewData {
        let rows = fit.design().rows_used();
        let log_target = fit.spec().target_transform() == TargetTransform::Log;
        let residuals = fit.solution().residuals();
        let fitted: Vec<f64> = fit.design().target().iter().zip(residuals).map(|(y, e)| y - e).collect();
        let model_value = if log_target { fitted.iter().map(|v| v.exp()).collect() } else { fitted };
        let miss = if log_target { residuals.iter().map(|e| 100.0 * e.exp_m1()).collect() } else { residuals.to_vec() };
        let target = fit.spec().target();
        let (miss_title, value_title) = if log_target {
            (format!("{target} above model value, %"), format!("model value of {target}"))
        } else {
            (format!("{target} − model value"), format!("model value of {target}"))
        };
        let influence = fit.influence();
        let studentized = influence.rows.iter().map(|r| r.studentized.unwrap_or(f64::NAN)).collect();
        let cooks: Vec<f64> = influence.rows.iter().map(|r| r.cooks_distance.unwrap_or(f64::NAN)).collect();
        let cooks_cutoff = cooks_cutoff(influence.rows.len());
        let names = rows.iter().map(|&r| format!("row {}", r + 1)).collect();
        ReviewData {
            model_value,
            miss,
            miss_title,
            value_title,
            studentized,
            cooks,
            cooks_cutoff,
            labelled: Vec::new(),
            names,
            time: None,
            groups: None,
        }
    }

    /// [`ReviewData::of_fit`] with what the data adds: sale names from the id
    /// column, the labelled sales, the time axis and the location groups.
    /// `frame` must be the frame the fit read.
    pub fn gather(fit: &Fit, frame: &Frame, options: &ReviewOptions) -> Result<ReviewData> {
        fit.require_fitting_frame(frame)?;
        let mut data = ReviewData::of_fit(fit);
        let rows = fit.design().rows_used();
        let id_column = options.id_column.as_deref();
        // The order of `Fit::flagged_rows`: Cook's distance descending, ties
        // by data row; only those above 4/n (NaN never is).
        let mut labelled: Vec<usize> = (0..data.cooks.len()).filter(|&i| data.cooks[i] > data.cooks_cutoff).collect();
        labelled.sort_by(|&a, &b| data.cooks[b].total_cmp(&data.cooks[a]).then(rows[a].cmp(&rows[b])));
        labelled.truncate(options.labelled);
        if let Some(c) = id_column {
            let ids = frame.label_column(c)?;
            for (name, &r) in data.names.iter_mut().zip(rows) {
                if let Some(id) = &ids[r] {
                    name.clone_from(id);
                }
            }
        }
        data.labelled = labelled;
        data.time = time_axis(fit, frame, options, rows)?;
        data.groups = group_axis(fit, frame, options, rows)?;
        Ok(data)
    }
}

/// Tick label for days since 1970-01-01: `2024-03`.
pub(crate) fn month_tick(days: f64) -> String {
    from_epoch_days(days.round() as i32).map(|d| d.format("%Y-%m").to_string()).unwrap_or_default()
}

fn time_axis(fit: &Fit, frame: &Frame, options: &ReviewOptions, rows: &[usize]) -> Result<Option<TimeAxis>> {
    let column = match &options.time_column {
        Some(c) => Some(c.clone()),
        None => fit
            .spec()
            .terms()
            .iter()
            .find_map(|t| match t {
                Term::Date { column, .. } => Some(column.clone()),
                _ => None,
            })
            .or_else(|| {
                frame.data().columns().iter().find(|c| c.dtype() == &DataType::Date).map(|c| c.name().to_string())
            }),
    };
    let Some(column) = column else { return Ok(None) };
    let is_date = matches!(frame.column_by_name(&column)?.dtype(), DataType::Date | DataType::String);
    let values: Vec<Option<f64>> = if is_date {
        let dates = frame.date_column(&column)?;
        rows.iter().map(|&r| dates[r].map(|d| f64::from(to_epoch_days(d)))).collect()
    } else {
        let numbers = frame.numeric_column(&column)?;
        rows.iter().map(|&r| numbers[r]).collect()
    };
    Ok(Some(TimeAxis { column, values, is_date }))
}

fn group_axis(fit: &Fit, frame: &Frame, options: &ReviewOptions, rows: &[usize]) -> Result<Option<GroupAxis>> {
    let column = match &options.group_column {
        Some(c) => Some(c.clone()),
        None => fit.spec().terms().iter().find_map(|t| match t {
            Term::Category { column, .. } => Some(column.clone()),
            _ => None,
        }),
    };
    let Some(column) = column else { return Ok(None) };
    let labels = frame.label_column(&column)?;
    Ok(Some(GroupAxis { labels: rows.iter().map(|&r| labels[r].clone()).collect(), column }))
}
