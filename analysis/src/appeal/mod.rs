//! When an owner appeals: one parcel's value explained, and the study's
//! sales adjusted to it by the model — the content of a printable page per
//! parcel (rendered by `render::appeal_page`).
//!
//! Every figure comes from the fitted model and the sales it was fitted on,
//! so the page agrees with the study to the last digit:
//!
//! * **The value built up** ([`BuildUp`]): from a *reference home* — the
//!   median of every numeric characteristic of the study's sales and the most
//!   common level of every category, valued as of the valuation date; or a
//!   parcel the analyst names — to the parcel, one model term at a time, in
//!   the model's term order. Each term moves the value by its coefficients
//!   times the difference in its design columns, `Δₜ = Σⱼ∈ₜ bⱼ (x₀ⱼ − rⱼ)`: for
//!   a logged target by the factor `exp(Δₜ)` applied to the running value
//!   (the amount is the change of the running value), otherwise by `Δₜ`
//!   itself. The amounts therefore sum exactly (to rounding) to the parcel's
//!   value minus the reference home's, whatever the order.
//! * **Comparable sales adjusted by the model** ([`Comparables`]): the sales
//!   comparison approach with adjustments derived by regression, as
//!   mass-appraisal texts describe it (e.g. the IAAO's *Property Appraisal
//!   and Assessment Administration* and Gloudemans & Almy, *Fundamentals of
//!   Mass Appraisal*, 2011, on model-derived adjustments — recalled from
//!   memory; verify the chapters before citing). Each sale's price is moved
//!   to the subject: first to the valuation date along the model's time
//!   trend, then term by term to the subject's characteristics and location,
//!   each step as above (multiplicative for a logged target, additive
//!   otherwise), so the adjusted price is `price · exp(Σ Δₜ)` or
//!   `price + Σ Δₜ`. The sales chosen, the limits that flag a comparable and
//!   the weights of the reconciled figure are Plumbline's own documented rule
//!   ([`ComparableRule`]).
//!
//! The result is a typed, versioned document ([`ParcelPages`], schema
//! `plumbline.parcel-pages`).

mod build_up;
mod comparables;
mod inputs;

pub use build_up::{BuildUp, BuildUpStep, ReferenceHome};
pub use comparables::{
    AdjustedSale, Adjustment, ComparableRule, Comparables, Places, Reconciled, GROSS_ADJUSTMENT_LIMIT,
    MINIMUM_COMPARABLES, NET_ADJUSTMENT_LIMIT,
};

use crate::data::Frame;
use crate::error::{Error, Result};
use crate::fit::Fit;
use crate::spatial::Coordinates;
use crate::value::Retransform;
use inputs::ModelRows;
use serde::{Deserialize, Serialize};

/// Which home the value is built up from.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum Reference {
    /// The median numeric characteristics and the most common category
    /// levels of the sales the model was fitted on.
    Typical,
    /// A parcel of the parcel file, by its id.
    Parcel(String),
}

/// What the pages need to know beyond the model: the columns, the valuation
/// date and the comparable-sales rule.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct PageOptions {
    /// Parcel id column, in the sales and the parcels.
    pub id_column: String,
    /// Sale date column of the sales (the model's time term reads it); the
    /// parcels are valued with it set to the valuation date.
    pub date_column: String,
    /// The date every value is estimated for, `YYYY-MM-DD`.
    pub valuation_date: String,
    /// How a logged model's estimate becomes a price.
    pub retransform: Retransform,
    /// Level of the value's interval, e.g. 0.95.
    pub level: f64,
    /// The home the value is built up from.
    pub reference: Reference,
    /// Which sales may serve as comparables, and the limits that flag them.
    pub rule: ComparableRule,
}

impl PageOptions {
    /// Pages for parcels identified by `id_column`, sales dated by
    /// `date_column`, values as of `valuation_date`; smearing-mean values,
    /// 95 % intervals, the typical home as reference and the default rule.
    pub fn new(
        id_column: impl Into<String>,
        date_column: impl Into<String>,
        valuation_date: impl Into<String>,
    ) -> Self {
        Self {
            id_column: id_column.into(),
            date_column: date_column.into(),
            valuation_date: valuation_date.into(),
            retransform: Retransform::SmearingMean,
            level: 0.95,
            reference: Reference::Typical,
            rule: ComparableRule::default(),
        }
    }

    /// Comparables only from the subject's own group of `column` (its market area).
    pub fn market_area(mut self, column: impl Into<String>) -> Self {
        self.rule.market_area_column = Some(column.into());
        self
    }

    /// Parcel places in `x_column`, `y_column` (planar units or, with
    /// `Coordinates::Geographic`, longitude and latitude): distances are shown
    /// and comparables lie within `rule.max_distance` when set.
    pub fn places(
        mut self,
        x_column: impl Into<String>,
        y_column: impl Into<String>,
        coordinates: Coordinates,
    ) -> Self {
        let unit = if coordinates == Coordinates::Geographic { "km" } else { "coordinate units" }.to_string();
        self.rule.places =
            Some(comparables::Places { x_column: x_column.into(), y_column: y_column.into(), coordinates, unit });
        self
    }

    /// Names the unit of planar places (e.g. `km`, `m`, `ft`) for the pages'
    /// distances; geographic places are always in km.
    pub fn distance_unit(mut self, unit: impl Into<String>) -> Self {
        if let Some(places) = &mut self.rule.places {
            if places.coordinates == Coordinates::Planar {
                places.unit = unit.into();
            }
        }
        self
    }

    /// Builds the value up from the parcel with this id instead of the typical home.
    pub fn reference_parcel(mut self, id: impl Into<String>) -> Self {
        self.reference = Reference::Parcel(id.into());
        self
    }
}

/// One parcel's page.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ParcelPage {
    /// The parcel's id.
    pub parcel_id: String,
    /// Its model value as of the valuation date (currency).
    pub value: f64,
    /// The interval of the price one sale of it would fetch, at `level`
    /// (for a logged target `exp` of the prediction interval: the median scale).
    pub interval: (f64, f64),
    /// The value built up from the reference home.
    pub build_up: BuildUp,
    /// Comparable sales adjusted to the parcel, and their reconciliation.
    pub comparables: Comparables,
}

/// The pages of one or more parcels from one study (document `plumbline.parcel-pages`).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ParcelPages {
    /// The model in words.
    pub model: String,
    /// Whether the target is logged (adjustments multiply) or not (they add).
    pub multiplicative: bool,
    /// The valuation date.
    pub valuation_date: String,
    /// Interval level.
    pub level: f64,
    /// How a logged estimate became a price.
    pub retransform: Retransform,
    /// The rule comparables were chosen and flagged by.
    pub rule: ComparableRule,
    /// Provenance of the sales the model was fitted on.
    pub sales: crate::data::Provenance,
    /// Provenance of the parcels.
    pub parcels: crate::data::Provenance,
    /// One page per parcel, in the order asked for.
    pub pages: Vec<ParcelPage>,
}

/// The pages of the parcels `ids` of `parcels`, valued by `fit` (fitted on
/// `sales`, the study's screened sales) as of `options.valuation_date`.
/// Refuses a `sales` frame other than the fit's, an id missing from or
/// repeated in the parcels, a parcel missing a term value, and a model with
/// aliased columns (a coefficient the page could not state).
pub fn parcel_pages<S: AsRef<str>>(
    fit: &Fit,
    sales: &Frame,
    parcels: &Frame,
    ids: &[S],
    options: &PageOptions,
) -> Result<ParcelPages> {
    fit.require_fitting_frame(sales)?;
    crate::stats::check_level(options.level)?;
    if ids.is_empty() {
        return Err(Error::Specification("no parcel ids were given for the pages".into()));
    }
    let model = ModelRows::new(fit, parcels, options)?;
    let reference = model.reference_home(sales, parcels, options)?;
    let candidates = comparables::Candidates::read(fit, sales, options)?;
    let mut pages = Vec::with_capacity(ids.len());
    for id in ids.iter().map(AsRef::as_ref) {
        let subject = model.subject(parcels, id, options)?;
        let build_up = build_up::build_up(&model, &reference, &subject)?;
        let comparables = candidates.adjusted_to(&model, &subject, &options.rule)?;
        pages.push(ParcelPage {
            parcel_id: id.to_string(),
            value: subject.value,
            interval: subject.interval,
            build_up,
            comparables,
        });
    }
    Ok(ParcelPages {
        model: fit.spec().describe(),
        multiplicative: model.multiplicative,
        valuation_date: options.valuation_date.clone(),
        level: options.level,
        retransform: options.retransform,
        rule: options.rule.clone(),
        sales: sales.provenance().clone(),
        parcels: parcels.provenance().clone(),
        pages,
    })
}
