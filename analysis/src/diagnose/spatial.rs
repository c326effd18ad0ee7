//! Whether a fit's misses cluster in space: Moran's I of the residuals over
//! the parcels' coordinates, and the residuals by location group.
//!
//! A hedonic model that codes location only as district indicators prices
//! every parcel of a district alike. Where value also varies smoothly inside
//! districts (nearness to a park, a shore, a busy road), neighbours' residuals
//! share a sign and Moran's I of the residuals is well above its expectation.
//! The test uses the exact moments for least-squares residuals
//! ([`crate::spatial::moran_test_of_residuals`], Cliff & Ord 1981 §8.3), so
//! the fitted columns' own pull on the residuals is allowed for.
//!
//! Weighted fits are checked on `√w e` with columns `√w X`, as every other
//! diagnostic here.
//!
//! Places are planar (projected) coordinates, or longitude and latitude in
//! degrees declared with [`SpatialOptions::geographic`]; columns that read as
//! degrees but are declared planar are refused ([`crate::spatial::geodesy`]).

use crate::data::Frame;
use crate::error::Result;
use crate::fit::Fit;
use crate::spatial::{moran_test_of_residuals, Coordinates, MoranTest, Neighbourhood, SpatialWeights, WeightStyle};
use crate::stats::median_of_sorted;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Where to find the parcels and how to pair them.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct SpatialOptions {
    /// Column of the first coordinate (projected, e.g. km east; or the longitude).
    pub x_column: String,
    /// Column of the second coordinate (e.g. km north; or the latitude).
    pub y_column: String,
    /// Whether the columns are projected coordinates or longitude and
    /// latitude in degrees (spatial-check document version 2; planar when
    /// absent).
    #[serde(default)]
    pub coordinates: Coordinates,
    /// How neighbours are chosen; 8 nearest by default.
    pub neighbourhood: Neighbourhood,
    /// How the weights are scaled; row-standardised by default.
    pub style: WeightStyle,
    /// A location column (district, neighbourhood) to summarise residuals by.
    pub group_column: Option<String>,
}

/// The default number of nearest neighbours: 8, a common practice for
/// parcel data (enough to span a street block in most layouts).
pub const DEFAULT_NEIGHBOURS: usize = 8;

impl SpatialOptions {
    /// Coordinates in `x_column`, `y_column`; 8 nearest neighbours,
    /// row-standardised, no groups.
    pub fn new(x_column: impl Into<String>, y_column: impl Into<String>) -> Self {
        Self {
            x_column: x_column.into(),
            y_column: y_column.into(),
            coordinates: Coordinates::Planar,
            neighbourhood: Neighbourhood::Nearest { k: DEFAULT_NEIGHBOURS },
            style: WeightStyle::RowStandardised,
            group_column: None,
        }
    }

    /// The columns are longitude and latitude in degrees (WGS 84), longitude
    /// first: neighbours by geodesic distance, a band's distance in km.
    pub fn geographic(mut self) -> Self {
        self.coordinates = Coordinates::Geographic;
        self
    }

    /// The `k` nearest parcels are neighbours.
    pub fn nearest(mut self, k: usize) -> Self {
        self.neighbourhood = Neighbourhood::Nearest { k };
        self
    }

    /// Every parcel within `distance` (coordinate units; km for geographic
    /// coordinates) is a neighbour.
    pub fn within(mut self, distance: f64) -> Self {
        self.neighbourhood = Neighbourhood::Within { distance };
        self
    }

    /// Binary weights instead of row-standardised ones.
    pub fn binary(mut self) -> Self {
        self.style = WeightStyle::Binary;
        self
    }

    /// Also summarise residuals by this location column.
    pub fn grouped_by(mut self, column: impl Into<String>) -> Self {
        self.group_column = Some(column.into());
        self
    }
}

/// The residuals of one location group.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct GroupResiduals {
    /// The group's label.
    pub group: String,
    /// Sales in the fit from the group.
    pub count: usize,
    /// Mean residual (on the model's scale: log points for a log target).
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub mean: f64,
    /// Median residual.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub median: f64,
    /// Share of residuals above zero (the model values too low), 0–1.
    #[serde(deserialize_with = "crate::schema::number_or_null")]
    pub share_above: f64,
}

/// The spatial check of one fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct SpatialCheck {
    /// The fitted model in words: target and terms.
    pub model: String,
    /// How the check was made.
    pub options: SpatialOptions,
    /// Moran's I of the residuals.
    pub moran: MoranTest,
    /// Residuals by location group, in label order (empty without a group column).
    pub by_group: Vec<GroupResiduals>,
}

/// The coordinates (and groups) of the rows a fit used, in design row order.
pub(crate) struct FitPlaces {
    pub xs: Vec<f64>,
    pub ys: Vec<f64>,
    pub groups: Option<Vec<String>>,
}

impl Fit {
    /// Reads the coordinates and groups of the fitting rows from `frame`,
    /// which must be the frame the fit read ([`Fit::require_fitting_frame`]).
    /// A fitting row without coordinates is an error naming it, since
    /// leaving it out would change the weights.
    pub(crate) fn places(&self, frame: &Frame, options: &SpatialOptions) -> Result<FitPlaces> {
        self.require_fitting_frame(frame)?;
        let rows = self.design().rows_used();
        let (xs, ys) = frame.places_at(
            (&options.x_column, &options.y_column),
            rows,
            options.coordinates,
            "the spatial check (every fitted sale needs its place)",
            "`--coordinates geographic` (in code, `SpatialOptions::geographic()`)",
        )?;
        let groups = match &options.group_column {
            None => None,
            Some(column) => {
                let labels = frame.label_column(column)?;
                Some(rows.iter().map(|&r| labels[r].clone().unwrap_or_else(|| "(missing)".into())).collect())
            }
        };
        Ok(FitPlaces { xs, ys, groups })
    }

    /// Moran's I of this fit's residuals over the parcels' coordinates, and
    /// the residuals by location group. `frame` must be the frame the model
    /// was fitted on (its rows are matched by position).
    pub fn spatial_check(&self, frame: &Frame, options: &SpatialOptions) -> Result<SpatialCheck> {
        let places = self.places(frame, options)?;
        let weights = SpatialWeights::build_in(
            options.coordinates,
            &places.xs,
            &places.ys,
            options.neighbourhood,
            options.style,
        )?;
        let rows = self.weighted_rows();
        let k = self.solution().kept().len();
        let columns: Vec<Vec<f64>> = (0..k).map(|a| rows.rows.iter().map(|r| r[a]).collect()).collect();
        let moran =
            moran_test_of_residuals(&rows.residuals, &columns, self.solution().unscaled_covariance(), &weights)?;
        let by_group = match &places.groups {
            None => Vec::new(),
            Some(groups) => {
                let mut members: BTreeMap<&str, Vec<f64>> = BTreeMap::new();
                for (g, r) in groups.iter().zip(self.solution().residuals()) {
                    members.entry(g.as_str()).or_default().push(*r);
                }
                members
                    .into_iter()
                    .map(|(group, mut residuals)| {
                        residuals.sort_by(f64::total_cmp);
                        let count = residuals.len();
                        GroupResiduals {
                            group: group.to_string(),
                            count,
                            mean: residuals.iter().sum::<f64>() / count as f64,
                            median: median_of_sorted(&residuals).unwrap_or(f64::NAN),
                            share_above: residuals.iter().filter(|r| **r > 0.0).count() as f64 / count as f64,
                        }
                    })
                    .collect()
            }
        };
        Ok(SpatialCheck { model: self.spec().describe(), options: options.clone(), moran, by_group })
    }
}
