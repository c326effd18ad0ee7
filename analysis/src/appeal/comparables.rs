//! Comparable sales chosen by a documented rule, adjusted to the subject by
//! the model, and reconciled (module documentation of [`super`]).
//!
//! **The rule (Plumbline's own).** A sale may serve when it is one of the
//! sales the model was fitted on, sold within [`ComparableRule::months_back`]
//! months before the valuation date (and not after it), lies in the
//! subject's market area and within [`ComparableRule::max_distance`] of it
//! (each when set), and is not a sale of the subject parcel itself. Of those,
//! the [`ComparableRule::count`] with the smallest *gross* adjustment are
//! chosen (ties: the nearer, then the earlier row): the sales that need the
//! model least. A chosen sale whose net or gross adjustment exceeds the
//! limits is shown, flagged, and left out of the reconciled figure; when
//! fewer than [`ComparableRule::minimum`] remain, no figure is reconciled
//! and the page says why — it is never filled with poor comparables
//! silently.
//!
//! **Reconciliation.** The reconciled figure is the weighted mean of the
//! qualifying adjusted prices with weights `1 / (w₀ + gross)`, `w₀` =
//! [`ComparableRule::weight_offset`]: a sale needing no adjustment weighs
//! `1/w₀` (20 at the default 0.05), one adjusted by 25 % gross weighs 3.3.

use super::build_up::step_through;
use super::inputs::{ModelRows, ModelledParcel};
use super::PageOptions;
use crate::data::{dates, Frame};
use crate::error::{Error, Result};
use crate::fit::Fit;
use crate::spatial::geodesy::geodesic_km;
use crate::spatial::Coordinates;
use chrono::{Months, NaiveDate};
use serde::{Deserialize, Serialize};

/// Net adjustment limit, as a share of the sale price: 15 % — common
/// practice (a long-standing lending guideline for adjusted comparables;
/// recalled from memory, not from a standard's text).
pub const NET_ADJUSTMENT_LIMIT: f64 = 0.15;
/// Gross adjustment limit, as a share of the sale price: 25 % — common
/// practice (as [`NET_ADJUSTMENT_LIMIT`]; recalled from memory).
pub const GROSS_ADJUSTMENT_LIMIT: f64 = 0.25;
/// The fewest qualifying comparables a reconciled figure is given for: 3 —
/// common practice (the usual minimum of closed sales in a sales comparison).
pub const MINIMUM_COMPARABLES: usize = 3;

/// Where parcels lie, for distances between the subject and its comparables.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Places {
    /// Column of the first coordinate (or the longitude).
    pub x_column: String,
    /// Column of the second coordinate (or the latitude).
    pub y_column: String,
    /// Planar (distances in the columns' units) or geographic (km on the WGS 84 ellipsoid).
    pub coordinates: Coordinates,
    /// The distances' unit as pages write it: `km` for geographic places;
    /// for planar ones what the analyst names (e.g. `km`, `m`, `ft`), else
    /// `coordinate units`.
    pub unit: String,
}

/// Which sales may serve as comparables, how many are shown, and the
/// limits that flag one (module documentation).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ComparableRule {
    /// Only sales of the subject's own group of this column (market area).
    pub market_area_column: Option<String>,
    /// Parcel places, for distances.
    pub places: Option<Places>,
    /// Only sales within this distance of the subject (places' units; km
    /// for geographic places).
    pub max_distance: Option<f64>,
    /// Only sales within this many months before the valuation date.
    pub months_back: u32,
    /// Comparables shown per subject.
    pub count: usize,
    /// Fewest qualifying comparables for a reconciled figure.
    pub minimum: usize,
    /// Net adjustment limit, share of price.
    pub net_limit: f64,
    /// Gross adjustment limit, share of price.
    pub gross_limit: f64,
    /// `w₀` of the weights `1 / (w₀ + gross)`.
    pub weight_offset: f64,
}

impl Default for ComparableRule {
    /// 24 months back, five shown, three needed, the common-practice limits,
    /// `w₀` = 0.05; no market area, no places.
    fn default() -> Self {
        Self {
            market_area_column: None,
            places: None,
            max_distance: None,
            months_back: 24,
            count: 5,
            minimum: MINIMUM_COMPARABLES,
            net_limit: NET_ADJUSTMENT_LIMIT,
            gross_limit: GROSS_ADJUSTMENT_LIMIT,
            weight_offset: 0.05,
        }
    }
}

/// One term's adjustment of a comparable's price.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Adjustment {
    /// The model term (the time trend first: the sale moved to the valuation date).
    pub term: String,
    /// What the term measures, in plain words.
    pub characteristic: String,
    /// Whether this is the time trend on the sale date (the market's change
    /// between the sale and the valuation date).
    pub time_trend: bool,
    /// The sale's inputs to the term.
    pub sale: String,
    /// The subject's inputs to the term.
    pub subject: String,
    /// For a logged target, the factor `exp(Δₜ)`.
    pub factor: Option<f64>,
    /// The change of the running price, currency.
    pub amount: f64,
}

/// A comparable sale adjusted to the subject.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct AdjustedSale {
    /// The parcel sold.
    pub parcel_id: String,
    /// 1-based data row of the sale in the study's sales.
    pub row: usize,
    /// Sale date, ISO 8601.
    pub sale_date: String,
    /// Sale price, currency.
    pub price: f64,
    /// Distance from the subject (places' units; km for geographic places).
    pub distance: Option<f64>,
    /// The sale's market area, when the rule has one.
    pub market_area: Option<String>,
    /// The adjustments, time first, then the model's terms in order.
    pub adjustments: Vec<Adjustment>,
    /// `(adjusted − price) / price`.
    pub net_share: f64,
    /// `Σ |amount| / price`.
    pub gross_share: f64,
    /// The price adjusted to the subject: `price · exp(Σ Δₜ)` or `price + Σ Δₜ`.
    pub adjusted_price: f64,
    /// Why the sale is left out of the reconciled figure (limits exceeded), if it is.
    pub flags: Vec<String>,
    /// Its share of the reconciled figure's weight, 0–1 (`None` when left out
    /// or when no figure is reconciled).
    pub weight: Option<f64>,
}

/// The reconciled figure from the qualifying comparables.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Reconciled {
    /// Weighted mean of the qualifying adjusted prices, currency.
    pub estimate: f64,
    /// Lowest and highest qualifying adjusted price.
    pub range: (f64, f64),
    /// Comparables it rests on.
    pub qualifying: usize,
    /// `estimate / model value − 1`.
    pub against_model: f64,
}

/// The comparables of one subject.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Comparables {
    /// Sales that met the window, area and distance conditions.
    pub eligible: usize,
    /// The chosen sales, least gross adjustment first.
    pub chosen: Vec<AdjustedSale>,
    /// The reconciled figure, when enough comparables qualify.
    pub reconciled: Option<Reconciled>,
    /// Why there is no reconciled figure, when there is none.
    pub shortfall: Option<String>,
}

/// The study's sales as comparables read them.
pub(super) struct Candidates<'a> {
    sales: &'a Frame,
    /// 0-based frame row of each design row.
    rows: &'a [usize],
    design: &'a crate::model::Design,
    ids: Vec<Option<String>>,
    dates: Vec<Option<NaiveDate>>,
    prices: Vec<Option<f64>>,
    areas: Option<Vec<Option<String>>>,
    places: Option<(Vec<f64>, Vec<f64>)>,
    window: (NaiveDate, NaiveDate),
}

impl<'a> Candidates<'a> {
    pub fn read(fit: &'a Fit, sales: &'a Frame, options: &PageOptions) -> Result<Self> {
        let design = fit.design();
        let rows = design.rows_used();
        let to = dates::require_iso_date("the valuation date", &options.valuation_date)?;
        let from = to.checked_sub_months(Months::new(options.rule.months_back)).ok_or_else(|| Error::OutOfRange {
            what: "the comparables' window".into(),
            requirement: "a number of months that stays within the calendar".into(),
            value: options.rule.months_back.to_string(),
        })?;
        let areas = match &options.rule.market_area_column {
            Some(column) => Some(sales.label_column(column)?),
            None => None,
        };
        let places = match &options.rule.places {
            Some(p) => Some((
                sales.numbers_at(&p.x_column, rows, "comparable sales (every sale needs its place)")?,
                sales.numbers_at(&p.y_column, rows, "comparable sales (every sale needs its place)")?,
            )),
            None => None,
        };
        Ok(Self {
            sales,
            rows,
            design,
            ids: sales.label_column(&options.id_column)?,
            dates: sales.date_column(&options.date_column)?,
            prices: sales.numeric_column(fit.spec().target())?,
            areas,
            places,
            window: (from, to),
        })
    }

    /// The sales adjusted to `subject`, chosen and reconciled by `rule`.
    pub fn adjusted_to(
        &self,
        model: &ModelRows<'_>,
        subject: &ModelledParcel,
        rule: &ComparableRule,
    ) -> Result<Comparables> {
        // Time first, then the model's terms in order.
        let mut order: Vec<usize> = (0..model.terms.len()).filter(|&t| model.terms[t].is_time).collect();
        order.extend((0..model.terms.len()).filter(|&t| !model.terms[t].is_time));
        let k = self.design.columns().len();
        let mut scored = Vec::new();
        for (i, &row) in self.rows.iter().enumerate() {
            let (Some(date), Some(price)) = (self.dates[row], self.prices[row]) else { continue };
            if date < self.window.0 || date > self.window.1 || self.ids[row].as_deref() == Some(subject.id.as_str()) {
                continue;
            }
            if let Some(areas) = &self.areas {
                if subject.area.is_none() || areas[row] != subject.area {
                    continue;
                }
            }
            let distance = self.distance(i, subject, rule);
            if let (Some(limit), Some(d)) = (rule.max_distance, distance) {
                if d > limit {
                    continue;
                }
            }
            let x: Vec<f64> = (0..k).map(|j| self.design.columns()[j].hi[i]).collect();
            let moves = model.term_moves(&subject.x, &x);
            let ordered: Vec<f64> = order.iter().map(|&t| moves[t]).collect();
            let steps = step_through(price, &ordered, model.multiplicative);
            let gross = steps.iter().map(|s| s.0.abs()).sum::<f64>() / price;
            scored.push((gross, distance.unwrap_or(0.0), i, row, price, distance, steps));
        }
        let eligible = scored.len();
        scored.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)).then(a.2.cmp(&b.2)));
        scored.truncate(rule.count);
        let mut chosen = Vec::with_capacity(scored.len());
        for (gross, _, _, row, price, distance, steps) in scored {
            let adjusted_price = steps.last().map_or(price, |s| s.2);
            let net = (adjusted_price - price) / price;
            let adjustments = order
                .iter()
                .zip(&steps)
                .map(|(&t, &(amount, factor, _))| {
                    let term = &model.terms[t];
                    let sale = term.inputs(self.sales, row)?;
                    Ok(Adjustment {
                        term: term.label.clone(),
                        characteristic: term.characteristic(),
                        time_trend: term.is_time,
                        sale,
                        subject: subject.inputs[t].clone(),
                        factor,
                        amount,
                    })
                })
                .collect::<Result<Vec<_>>>()?;
            let mut flags = Vec::new();
            if net.abs() > rule.net_limit {
                flags.push(format!(
                    "net adjustment {:+.1} % is beyond ±{:.0} % (common practice)",
                    100.0 * net,
                    100.0 * rule.net_limit
                ));
            }
            if gross > rule.gross_limit {
                flags.push(format!(
                    "gross adjustment {:.1} % is beyond {:.0} % (common practice)",
                    100.0 * gross,
                    100.0 * rule.gross_limit
                ));
            }
            chosen.push(AdjustedSale {
                parcel_id: self.ids[row].clone().unwrap_or_default(),
                row: row + 1,
                sale_date: self.dates[row].map(|d| d.to_string()).unwrap_or_default(),
                price,
                distance,
                market_area: self.areas.as_ref().and_then(|a| a[row].clone()),
                adjustments,
                net_share: net,
                gross_share: gross,
                adjusted_price,
                flags,
                weight: None,
            });
        }
        let (reconciled, shortfall) = reconcile(&mut chosen, subject.value, rule, eligible);
        Ok(Comparables { eligible, chosen, reconciled, shortfall })
    }

    fn distance(&self, i: usize, subject: &ModelledParcel, rule: &ComparableRule) -> Option<f64> {
        let (xs, ys) = self.places.as_ref()?;
        let (sx, sy) = subject.place?;
        Some(match rule.places.as_ref()?.coordinates {
            Coordinates::Planar => (xs[i] - sx).hypot(ys[i] - sy),
            Coordinates::Geographic => geodesic_km(sx, sy, xs[i], ys[i]),
        })
    }
}

/// Weights the qualifying comparables and gives the reconciled figure, or
/// says why there is none.
fn reconcile(
    chosen: &mut [AdjustedSale],
    model_value: f64,
    rule: &ComparableRule,
    eligible: usize,
) -> (Option<Reconciled>, Option<String>) {
    let qualifying: Vec<usize> = (0..chosen.len()).filter(|&i| chosen[i].flags.is_empty()).collect();
    if rule.count < rule.minimum {
        let reason = format!(
            "{} comparable(s) are shown and a reconciled figure needs at least {} (common practice); show more",
            rule.count, rule.minimum
        );
        return (None, Some(reason));
    }
    if qualifying.len() < rule.minimum {
        let reason = format!(
            "only {} of the {} sale(s) that met the window{} qualify within the adjustment limits; a reconciled figure \
             needs at least {} (common practice) — read this parcel's value from the model and review it by hand",
            qualifying.len(),
            eligible,
            if rule.market_area_column.is_some() { ", market-area and distance conditions" } else { " and distance conditions" },
            rule.minimum
        );
        return (None, Some(reason));
    }
    let weights: Vec<f64> = qualifying.iter().map(|&i| 1.0 / (rule.weight_offset + chosen[i].gross_share)).collect();
    let total: f64 = weights.iter().sum();
    let mut estimate = 0.0;
    let (mut low, mut high) = (f64::INFINITY, f64::NEG_INFINITY);
    for (&i, w) in qualifying.iter().zip(&weights) {
        let share = w / total;
        chosen[i].weight = Some(share);
        estimate += share * chosen[i].adjusted_price;
        low = low.min(chosen[i].adjusted_price);
        high = high.max(chosen[i].adjusted_price);
    }
    let reconciled = Reconciled {
        estimate,
        range: (low, high),
        qualifying: qualifying.len(),
        against_model: estimate / model_value - 1.0,
    };
    (Some(reconciled), None)
}
