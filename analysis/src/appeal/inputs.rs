//! The model's coefficients by term, and a parcel read as the model reads
//! it: its design row, its value and interval, and each term's inputs as
//! text for a lay reader.

use super::{PageOptions, Reference};
use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::Fit;
use crate::model::design::term_columns_read;
use crate::model::{DesignRecipe, TargetTransform, Term};
use polars::prelude::DataType;

/// One model term: its label, its design columns and whether it is the
/// time trend on the sale date.
#[derive(Debug, Clone)]
pub(super) struct TermColumns {
    pub term: Term,
    pub label: String,
    pub columns: std::ops::Range<usize>,
    pub frame_columns: Vec<String>,
    pub is_time: bool,
}

/// The fitted model as the pages use it.
pub(super) struct ModelRows<'a> {
    pub fit: &'a Fit,
    pub recipe: &'a DesignRecipe,
    /// Every design column's coefficient (all are estimated: aliased models are refused).
    pub coefficients: Vec<f64>,
    pub terms: Vec<TermColumns>,
    pub multiplicative: bool,
    pub retransform: crate::value::Retransform,
    pub level: f64,
}

/// A parcel as the model reads it.
#[derive(Debug, Clone)]
pub(super) struct ModelledParcel {
    pub id: String,
    /// Its design row.
    pub x: Vec<f64>,
    /// Its value (currency) and prediction interval.
    pub value: f64,
    pub interval: (f64, f64),
    /// Each term's inputs as `column = value` text, in term order.
    pub inputs: Vec<String>,
    /// Its place, when the rule has places.
    pub place: Option<(f64, f64)>,
    /// Its market area, when the rule has one.
    pub area: Option<String>,
}

impl<'a> ModelRows<'a> {
    pub fn new(fit: &'a Fit, parcels: &Frame, options: &PageOptions) -> Result<Self> {
        let aliased = fit.aliased_names();
        if !aliased.is_empty() {
            return Err(Error::Specification(format!(
                "the model has aliased columns ({}); a page must state every coefficient — refit without them",
                aliased.join(", ")
            )));
        }
        let (numbers, labels) = term_columns_read(fit.spec());
        for column in numbers.iter().chain(&labels).chain(std::iter::once(&options.id_column)) {
            parcels.require_column(column)?;
        }
        let solution = fit.solution();
        let recipe = fit.design().recipe();
        let mut coefficients = vec![0.0; recipe.column_names.len()];
        for (&j, &b) in solution.kept().iter().zip(solution.coefficients()) {
            coefficients[j] = b;
        }
        let terms = fit
            .spec()
            .terms()
            .iter()
            .zip(&recipe.term_spans)
            .map(|(term, span)| TermColumns {
                term: term.clone(),
                label: span.label.clone(),
                columns: span.columns.clone(),
                frame_columns: term.columns().into_iter().map(str::to_string).collect(),
                is_time: matches!(term, Term::Date { column, part, .. }
                    if *column == options.date_column && part.is_numeric()),
            })
            .collect();
        Ok(Self {
            fit,
            recipe,
            coefficients,
            terms,
            multiplicative: fit.spec().target_transform() == TargetTransform::Log,
            retransform: options.retransform,
            level: options.level,
        })
    }

    /// `Σⱼ∈ₜ bⱼ (toⱼ − fromⱼ)` for every term, in term order.
    pub fn term_moves(&self, to: &[f64], from: &[f64]) -> Vec<f64> {
        self.terms.iter().map(|t| t.columns.clone().map(|j| self.coefficients[j] * (to[j] - from[j])).sum()).collect()
    }

    /// The parcel with id `id` of `parcels`, valued as of the valuation date.
    pub fn subject(&self, parcels: &Frame, id: &str, options: &PageOptions) -> Result<ModelledParcel> {
        let ids = parcels.label_column(&options.id_column)?;
        let rows: Vec<usize> =
            ids.iter().enumerate().filter(|(_, v)| v.as_deref() == Some(id)).map(|(i, _)| i).collect();
        let row = match rows.as_slice() {
            [row] => *row,
            [] => {
                return Err(Error::Specification(format!(
                    "parcel `{id}` is not in {} (column `{}`)",
                    parcels.provenance().path,
                    options.id_column
                )))
            }
            _ => {
                return Err(Error::Specification(format!(
                    "parcel `{id}` appears {} times in {} (column `{}`); ids must be unique",
                    rows.len(),
                    parcels.provenance().path,
                    options.id_column
                )))
            }
        };
        let one = parcels.subset(&[row], &format!("parcel {id}"))?;
        let dated =
            if self.has_time_term() { one.with_date(&options.date_column, &options.valuation_date)? } else { one };
        self.modelled(&dated, id, options)
    }

    /// The reference home of `options.reference`, valued as of the valuation date.
    pub fn reference_home(&self, sales: &Frame, parcels: &Frame, options: &PageOptions) -> Result<ModelledParcel> {
        match &options.reference {
            Reference::Parcel(id) => self.subject(parcels, id, options),
            Reference::Typical => {
                let rows = self.fit.design().rows_used();
                let (numbers, labels) = term_columns_read(self.fit.spec());
                let mut home = sales.subset(&rows[..1], "the typical home of the sales")?;
                for column in numbers {
                    let mut values = sales.numbers_at(&column, rows, "the typical home")?;
                    values.sort_by(f64::total_cmp);
                    let median = crate::stats::median_of_sorted(&values).unwrap_or(f64::NAN);
                    home = home.with_number(&column, median)?;
                }
                for column in labels.iter().filter(|c| **c != options.date_column) {
                    let all = sales.label_column(column)?;
                    let level = most_common(rows.iter().filter_map(|&r| all[r].as_deref())).ok_or_else(|| {
                        Error::Specification(format!("no sale has a value of `{column}` for the typical home"))
                    })?;
                    home = home.with_text(column, &level)?;
                }
                if self.has_time_term() {
                    home = home.with_date(&options.date_column, &options.valuation_date)?;
                }
                self.modelled(&home, "the typical home", options)
            }
        }
    }

    fn has_time_term(&self) -> bool {
        self.terms.iter().any(|t| t.is_time)
    }

    /// One row of `frame` read by the model.
    fn modelled(&self, frame: &Frame, id: &str, options: &PageOptions) -> Result<ModelledParcel> {
        let applied = self.recipe.apply(frame)?;
        if applied.rows.is_empty() {
            return Err(Error::Specification(format!(
                "parcel `{id}` lacks a value the model needs (one of: {}); it cannot be valued or explained",
                self.terms.iter().flat_map(|t| t.frame_columns.iter().cloned()).collect::<Vec<_>>().join(", ")
            )));
        }
        let x: Vec<f64> = applied.columns.iter().map(|c| c.hi[0]).collect();
        let prediction = self.fit.predict(frame, self.level)?;
        let p = prediction.rows.first().ok_or_else(|| Error::Specification(format!("parcel `{id}` was not valued")))?;
        let value = self.retransform.value_of(p.estimate, p.median_original, p.mean_original);
        let interval = if self.multiplicative { (p.pi_low.exp(), p.pi_high.exp()) } else { (p.pi_low, p.pi_high) };
        let inputs = self.terms.iter().map(|t| t.inputs(frame, 0)).collect::<Result<Vec<_>>>()?;
        let place = match &options.rule.places {
            Some(places) => {
                let xs = frame.numbers_at(&places.x_column, &[0], "the parcel's place")?;
                let ys = frame.numbers_at(&places.y_column, &[0], "the parcel's place")?;
                Some((xs[0], ys[0]))
            }
            None => None,
        };
        let area = match &options.rule.market_area_column {
            Some(column) => frame.label_column(column)?.into_iter().next().flatten(),
            None => None,
        };
        Ok(ModelledParcel { id: id.to_string(), x, value, interval, inputs, place, area })
    }
}

impl TermColumns {
    /// The characteristic the term measures, in plain words for a lay
    /// reader: the column's name without transforms (`log(living_area)` →
    /// `living area`), the place a distance is measured from, and for the
    /// time trend the market's change between a sale and the valuation date.
    pub fn characteristic(&self) -> String {
        fn words(term: &Term, is_time: bool) -> String {
            match term {
                Term::Numeric { column, .. } | Term::Category { column, .. } => column.replace('_', " "),
                Term::Date { .. } if is_time => "the market's change since the sale".to_string(),
                Term::Date { column, .. } => column.replace('_', " "),
                Term::Distance { point, .. } => format!("distance from {}", point.name),
                Term::Interaction(a, b) => format!("{} × {}", words(a, false), words(b, false)),
            }
        }
        words(&self.term, self.is_time)
    }

    /// The term's inputs at row `row` of `frame` as a lay reader checks them:
    /// a distance term's distance from its place (it reads two coordinate
    /// columns; km for a geographic place, the coordinates' units otherwise),
    /// otherwise each column read as `column = value`.
    pub fn inputs(&self, frame: &Frame, row: usize) -> Result<String> {
        if let Term::Distance { x, y, point, .. } = &self.term {
            let (xs, ys) = (frame.numeric_column(x)?, frame.numeric_column(y)?);
            return Ok(match (xs[row], ys[row]) {
                (Some(xv), Some(yv)) => match point.coordinates {
                    crate::spatial::Coordinates::Geographic => format!("{:.3} km", point.distance(xv, yv)),
                    crate::spatial::Coordinates::Planar => format!("{:.3}", point.distance(xv, yv)),
                },
                _ => "—".to_string(),
            });
        }
        Ok(self.frame_columns.iter().map(|c| value_text(frame, c, row)).collect::<Result<Vec<_>>>()?.join(", "))
    }
}

/// The most common of `levels`, ties broken by level order (as a category's
/// reference level is chosen).
fn most_common<'s>(levels: impl Iterator<Item = &'s str>) -> Option<String> {
    let mut counts: std::collections::BTreeMap<&str, usize> = std::collections::BTreeMap::new();
    for level in levels {
        *counts.entry(level).or_default() += 1;
    }
    let best = counts.values().copied().max()?;
    counts.into_iter().find(|(_, n)| *n == best).map(|(level, _)| level.to_string())
}

/// `column = value` for row `row` of `frame`: dates as ISO 8601, numbers in
/// their shortest exact form, text as it stands.
pub(super) fn value_text(frame: &Frame, column: &str, row: usize) -> Result<String> {
    let dtype = frame.column_by_name(column)?.dtype().clone();
    let shown = if dtype == DataType::Date {
        frame.date_column(column)?[row].map_or_else(|| "—".to_string(), |d| d.to_string())
    } else if dtype.is_primitive_numeric() {
        frame.numeric_column(column)?[row].map_or_else(|| "—".to_string(), |v| format!("{v}"))
    } else {
        frame.label_column(column)?[row].clone().unwrap_or_else(|| "—".to_string())
    };
    Ok(format!("{column} = {shown}"))
}
