//! The model specification: a builder of our own design.
//!
//! ```
//! use plumbline::prelude::*;
//! let spec = ModelSpec::new("sale_price")
//!     .log_target()
//!     .term(Term::numeric("living_area").log())
//!     .term(Term::numeric("age").polynomial(2))
//!     .term(Term::category("district").reference("Tidewright Quay"))
//!     .term(Term::numeric("living_area").times(Term::category("district")));
//! assert_eq!(spec.target(), "sale_price");
//! ```

use crate::data::dates;
use crate::spatial::geodesy::geodesic_km;
use crate::spatial::Coordinates;
use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

/// A transform of the target variable.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
pub enum TargetTransform {
    /// Fit the target as it is.
    #[default]
    None,
    /// Fit the natural log of the target (every value must be positive).
    Log,
}

/// A transform applied to a numeric term before it enters the design.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize, Default)]
pub enum Transform {
    /// The column as it is.
    #[default]
    Identity,
    /// Natural logarithm; every value must be positive.
    Log,
    /// `x^p`; for a non-integer `p` every value must be positive.
    Power(f64),
    /// `x − mean(x)` over the fitting rows.
    Center,
    /// `(x − mean(x)) / sd(x)` over the fitting rows (sample sd, divisor n − 1).
    Standardize,
    /// Raw polynomial `x, x², …, x^d`, each power formed in double-double
    /// arithmetic from the parsed value so no digit is lost before the solver.
    Polynomial(u32),
    /// Orthogonal polynomial of degree `d` over the fitting rows, from the
    /// three-term recurrence (Forsythe 1957, *J. SIAM* 5, 74–88); each column
    /// has unit length and is orthogonal to the constant and to the others.
    OrthogonalPolynomial(u32),
}

/// What a date term takes from a date column (see [`crate::data::dates`] for
/// the calendar arithmetic).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub enum DatePart {
    /// Months since a reference date (ISO 8601 `YYYY-MM-DD`): whole calendar
    /// months plus the day's fraction of its month; a numeric time trend.
    MonthsSince(String),
    /// Days since a reference date (ISO 8601); a numeric time trend.
    DaysSince(String),
    /// The calendar year, as a category (one indicator per sale year).
    Year,
    /// The calendar quarter, as a category labelled `2025 Q3`.
    Quarter,
    /// The month of the year, as a category labelled `03 Mar` (seasonality).
    MonthOfYear,
}

/// A calendar measure from a first date to a second (months or days).
pub(crate) type CalendarMeasure = fn(NaiveDate, NaiveDate) -> f64;

impl DatePart {
    /// Whether the part enters the design as a number (else as a category).
    pub fn is_numeric(&self) -> bool {
        matches!(self, DatePart::MonthsSince(_) | DatePart::DaysSince(_))
    }

    /// For a numeric part, its reference date as written and the calendar
    /// measure from a first date to a second (months or days, see
    /// [`crate::data::dates`]); `None` for categorical parts.
    pub(crate) fn trend_measure(&self) -> Option<(&str, CalendarMeasure)> {
        match self {
            DatePart::MonthsSince(reference) => Some((reference, dates::months_between)),
            DatePart::DaysSince(reference) => Some((reference, dates::days_between)),
            DatePart::Year | DatePart::Quarter | DatePart::MonthOfYear => None,
        }
    }

    /// The name of the values the part derives from `column`, used for its
    /// design column: `sale_date (months since 2023-01-01)`,
    /// `sale_date (quarter)`.
    pub fn derived_name(&self, column: &str) -> String {
        match self {
            DatePart::MonthsSince(reference) => format!("{column} (months since {reference})"),
            DatePart::DaysSince(reference) => format!("{column} (days since {reference})"),
            DatePart::Year => format!("{column} (year)"),
            DatePart::Quarter => format!("{column} (quarter)"),
            DatePart::MonthOfYear => format!("{column} (month of year)"),
        }
    }
}

/// A named place, such as a park, a waterfront or a town centre: the anchor
/// of a distance term.
///
/// On the plane ([`NamedPoint::new`]) its coordinates are in the units of
/// the frame's projected coordinate columns and distances are straight
/// lines. Geographic places ([`NamedPoint::geographic`]) are longitude and
/// latitude in degrees and distances are geodesics on the WGS 84 ellipsoid
/// in km ([`crate::spatial::geodesy`]); planar distances from columns that
/// read as degrees are refused when the design is built.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NamedPoint {
    /// What the place is called; it names the design column.
    pub name: String,
    /// Its first coordinate (the longitude of a geographic place).
    pub x: f64,
    /// Its second coordinate (the latitude of a geographic place).
    pub y: f64,
    /// Planar or geographic (planar when absent, as before it existed).
    #[serde(default)]
    pub coordinates: Coordinates,
}

impl NamedPoint {
    /// A place called `name` at `(x, y)` on the plane.
    pub fn new(name: impl Into<String>, x: f64, y: f64) -> Self {
        Self { name: name.into(), x, y, coordinates: Coordinates::Planar }
    }

    /// A place called `name` at longitude `lon` and latitude `lat` (degrees,
    /// WGS 84).
    pub fn geographic(name: impl Into<String>, lon: f64, lat: f64) -> Self {
        Self { name: name.into(), x: lon, y: lat, coordinates: Coordinates::Geographic }
    }

    /// The distance of `(x, y)` from the place: on the plane the Euclidean
    /// `√((x − x₀)² + (y − y₀)²)` by `f64::hypot` (no overflow or underflow
    /// in the squares); for a geographic place the geodesic on WGS 84 in km,
    /// `(x, y)` being (longitude, latitude) in degrees.
    pub fn distance(&self, x: f64, y: f64) -> f64 {
        match self.coordinates {
            Coordinates::Planar => (x - self.x).hypot(y - self.y),
            Coordinates::Geographic => geodesic_km(self.x, self.y, x, y),
        }
    }
}

/// One term of a model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum Term {
    /// A numeric column, possibly transformed.
    Numeric {
        /// Column name in the frame.
        column: String,
        /// Transform applied before fitting.
        transform: Transform,
    },
    /// A categorical column coded as 0/1 indicators against a reference level.
    Category {
        /// Column name in the frame.
        column: String,
        /// The level left out (absorbed by the intercept). `None` picks the most
        /// frequent level, ties broken by level order.
        reference: Option<String>,
    },
    /// A number or a category built from a date column (a sale date).
    Date {
        /// Column name in the frame (a date column, or ISO 8601 text).
        column: String,
        /// What the term takes from the date.
        part: DatePart,
        /// For a categorical part, the level left out (`None`: the most
        /// frequent one); unused for numeric parts.
        reference: Option<String>,
    },
    /// The straight-line distance of each row's coordinates from a named
    /// place, a number computed from two coordinate columns (the location
    /// term of a hedonic model: how value changes with distance from an
    /// amenity). The recipe keeps the place, so new rows are measured from
    /// the same point.
    Distance {
        /// The first coordinate column.
        x: String,
        /// The second coordinate column.
        y: String,
        /// The place distances are measured from.
        point: NamedPoint,
        /// Transform of the distance before fitting (log, polynomial, …).
        transform: Transform,
    },
    /// The product of two terms: every column of the left times every column
    /// of the right.
    Interaction(Box<Term>, Box<Term>),
}

impl Term {
    /// A numeric column used as it is.
    pub fn numeric(column: impl Into<String>) -> Self {
        Term::Numeric { column: column.into(), transform: Transform::Identity }
    }

    /// A categorical column with the most frequent level as reference.
    pub fn category(column: impl Into<String>) -> Self {
        Term::Category { column: column.into(), reference: None }
    }

    /// Months since `reference` (ISO 8601, e.g. `"2023-01-01"`) of a date
    /// column: a numeric time trend (whole months plus the day's fraction of
    /// its month, see [`crate::data::dates`]).
    pub fn months_since(column: impl Into<String>, reference: impl Into<String>) -> Self {
        Term::Date { column: column.into(), part: DatePart::MonthsSince(reference.into()), reference: None }
    }

    /// Days since `reference` (ISO 8601) of a date column: a numeric trend.
    pub fn days_since(column: impl Into<String>, reference: impl Into<String>) -> Self {
        Term::Date { column: column.into(), part: DatePart::DaysSince(reference.into()), reference: None }
    }

    /// The calendar year of a date column, as a category.
    pub fn sale_year(column: impl Into<String>) -> Self {
        Term::Date { column: column.into(), part: DatePart::Year, reference: None }
    }

    /// The calendar quarter (`2025 Q3`) of a date column, as a category.
    pub fn sale_quarter(column: impl Into<String>) -> Self {
        Term::Date { column: column.into(), part: DatePart::Quarter, reference: None }
    }

    /// The month of the year (`03 Mar`) of a date column, as a category.
    pub fn month_of_year(column: impl Into<String>) -> Self {
        Term::Date { column: column.into(), part: DatePart::MonthOfYear, reference: None }
    }

    /// The distance of the coordinates in columns `x`, `y` from `point`, a
    /// numeric term (see [`Term::Distance`]); transforms such as
    /// [`Term::log`] apply to it as to any number.
    pub fn distance_from(x: impl Into<String>, y: impl Into<String>, point: NamedPoint) -> Self {
        Term::Distance { x: x.into(), y: y.into(), point, transform: Transform::Identity }
    }

    /// Replaces a numeric or distance term's transform (no effect on other terms).
    pub fn transformed(mut self, transform: Transform) -> Self {
        if let Term::Numeric { transform: t, .. } | Term::Distance { transform: t, .. } = &mut self {
            *t = transform;
        }
        self
    }

    /// Natural log of a numeric term.
    pub fn log(self) -> Self {
        self.transformed(Transform::Log)
    }

    /// Power `x^p` of a numeric term.
    pub fn power(self, p: f64) -> Self {
        self.transformed(Transform::Power(p))
    }

    /// Raw polynomial of degree `d` of a numeric term.
    pub fn polynomial(self, degree: u32) -> Self {
        self.transformed(Transform::Polynomial(degree))
    }

    /// Orthogonal polynomial of degree `d` of a numeric term.
    pub fn orthogonal_polynomial(self, degree: u32) -> Self {
        self.transformed(Transform::OrthogonalPolynomial(degree))
    }

    /// Centre a numeric term on its mean.
    pub fn center(self) -> Self {
        self.transformed(Transform::Center)
    }

    /// Standardize a numeric term to mean 0, sd 1.
    pub fn standardize(self) -> Self {
        self.transformed(Transform::Standardize)
    }

    /// Sets the reference level of a categorical term (or of a categorical
    /// date term such as [`Term::sale_quarter`]).
    pub fn reference(mut self, level: impl Into<String>) -> Self {
        if let Term::Category { reference, .. } | Term::Date { reference, .. } = &mut self {
            *reference = Some(level.into());
        }
        self
    }

    /// The plain term a derived term (date part, distance) stands for, reading
    /// the values it derives under [`Term::derived_name`]; other terms are
    /// returned as they are.
    pub(crate) fn resolved(&self) -> Term {
        match self {
            Term::Date { column, part, reference } => {
                let derived = part.derived_name(column);
                if part.is_numeric() {
                    Term::numeric(derived)
                } else {
                    Term::Category { column: derived, reference: reference.clone() }
                }
            }
            Term::Distance { transform, .. } => {
                Term::Numeric { column: self.derived_name().unwrap_or_default(), transform: *transform }
            }
            other => other.clone(),
        }
    }

    /// The name of the values a derived term (date part, distance) reads:
    /// `sale_date (months since 2023-01-01)`, `distance from Lantern Green`;
    /// `None` for terms that read a frame column directly.
    pub fn derived_name(&self) -> Option<String> {
        match self {
            Term::Date { column, part, .. } => Some(part.derived_name(column)),
            Term::Distance { point, .. } => Some(match point.coordinates {
                Coordinates::Planar => format!("distance from {}", point.name),
                Coordinates::Geographic => format!("km from {}", point.name),
            }),
            Term::Numeric { .. } | Term::Category { .. } | Term::Interaction(..) => None,
        }
    }

    /// The interaction (product) of this term with another.
    pub fn times(self, other: Term) -> Self {
        Term::Interaction(Box::new(self), Box::new(other))
    }

    /// The term as a reader would say it: `area`, `log(area)`, `age^2`,
    /// `age (powers 1–3)`, `age (orthogonal, degree 3)`, `age (centred)`,
    /// `district`, `area*district`, `log(distance from Lantern Green)`.
    pub fn label(&self) -> String {
        match self {
            Term::Distance { transform, .. } => self.resolved().label_with(transform),
            Term::Numeric { transform, .. } => self.label_with(transform),
            Term::Category { column, .. } => column.clone(),
            Term::Date { column, part, .. } => part.derived_name(column),
            Term::Interaction(a, b) => format!("{}*{}", a.label(), b.label()),
        }
    }

    /// The label of a numeric term's column under `transform`.
    fn label_with(&self, transform: &Transform) -> String {
        let column = match self {
            Term::Numeric { column, .. } => column.clone(),
            other => other.derived_name().unwrap_or_default(),
        };
        match transform {
            Transform::Identity | Transform::Polynomial(1) => column,
            Transform::Log => format!("log({column})"),
            Transform::Power(p) => format!("{column}^{p}"),
            Transform::Center => format!("{column} (centred)"),
            Transform::Standardize => format!("{column} (standardized)"),
            Transform::Polynomial(d) => format!("{column} (powers 1–{d})"),
            Transform::OrthogonalPolynomial(d) => format!("{column} (orthogonal, degree {d})"),
        }
    }

    /// Every frame column this term reads.
    pub fn columns(&self) -> Vec<&str> {
        match self {
            Term::Numeric { column, .. } | Term::Category { column, .. } | Term::Date { column, .. } => {
                vec![column.as_str()]
            }
            Term::Distance { x, y, .. } => vec![x.as_str(), y.as_str()],
            Term::Interaction(a, b) => {
                let mut c = a.columns();
                c.extend(b.columns());
                c
            }
        }
    }
}

/// A complete model: target, terms, weights, intercept.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelSpec {
    target: String,
    target_transform: TargetTransform,
    terms: Vec<Term>,
    weights: Option<String>,
    intercept: bool,
}

impl ModelSpec {
    /// A model of `target` with an intercept and no terms yet.
    pub fn new(target: impl Into<String>) -> Self {
        Self {
            target: target.into(),
            target_transform: TargetTransform::None,
            terms: Vec::new(),
            weights: None,
            intercept: true,
        }
    }

    /// Fit the natural log of the target.
    pub fn log_target(mut self) -> Self {
        self.target_transform = TargetTransform::Log;
        self
    }

    /// Adds a term.
    pub fn term(mut self, term: Term) -> Self {
        self.terms.push(term);
        self
    }

    /// Adds a plain numeric term.
    pub fn numeric(self, column: impl Into<String>) -> Self {
        self.term(Term::numeric(column))
    }

    /// Adds a categorical term with the default reference level.
    pub fn category(self, column: impl Into<String>) -> Self {
        self.term(Term::category(column))
    }

    /// Weighted least squares with case weights from `column` (each weight
    /// must be positive; a weight acts like a count of identical rows for the
    /// coefficients and like an inverse variance for the errors).
    pub fn weights(mut self, column: impl Into<String>) -> Self {
        self.weights = Some(column.into());
        self
    }

    /// Fit through the origin (no intercept). R² is then uncentered.
    pub fn without_intercept(mut self) -> Self {
        self.intercept = false;
        self
    }

    /// The target column.
    pub fn target(&self) -> &str {
        &self.target
    }

    /// The target transform.
    pub fn target_transform(&self) -> TargetTransform {
        self.target_transform
    }

    /// The terms in order.
    pub fn terms(&self) -> &[Term] {
        &self.terms
    }

    /// The weight column, if any.
    pub fn weight_column(&self) -> Option<&str> {
        self.weights.as_deref()
    }

    /// Whether the model has an intercept.
    pub fn has_intercept(&self) -> bool {
        self.intercept
    }

    /// The model in words, as result documents name it: `log(sale_price) on
    /// log(living_area), age, district`.
    pub fn describe(&self) -> String {
        let terms: Vec<String> = self.terms.iter().map(Term::label).collect();
        format!("{} on {}", self.target_label(), terms.join(", "))
    }

    /// The target's display name (`log(price)` for a logged target).
    pub fn target_label(&self) -> String {
        match self.target_transform {
            TargetTransform::None => self.target.clone(),
            TargetTransform::Log => format!("log({})", self.target),
        }
    }
}
