//! Where parcels lie: spatial weights between them and Moran's I, the test of
//! whether nearby values (residuals, ratios) resemble one another more than
//! chance allows.
//!
//! * [`SpatialWeights`] — who neighbours whom: the `k` nearest parcels or
//!   every parcel within a distance band, binary or row-standardised, on the
//!   plane or (longitude, latitude) on the WGS 84 ellipsoid ([`geodesy`]).
//! * [`group_labels`] — where a map writes each location group's name.
//! * [`moran_test`] — Moran's I of any variable, with its moments under the
//!   normality or the randomisation assumption (Cliff & Ord 1981).
//! * [`moran_test_of_residuals`] — Moran's I of least-squares residuals, with
//!   the exact moments under normal errors that account for the fitted
//!   columns (Cliff & Ord 1981, §8.3).
//!
//! Reference: A. D. Cliff and J. K. Ord, *Spatial Processes: Models and
//! Applications*, Pion, London, 1981, ch. 1–2 (the statistic and its moments
//! for a variable) and §8.3 (regression residuals). The residual moments are
//! restated in L. Anselin, *Spatial Econometrics: Methods and Models*, Kluwer,
//! 1988, §8.1.

pub mod geodesy;
mod labels;
mod moran;
mod places;
mod weights;

pub use geodesy::Coordinates;
pub use labels::{group_labels, PlaceLabel};
pub use moran::{moran_test, moran_test_of_residuals, MoranAssumption, MoranTest};
pub use places::PlaceIndex;
pub use weights::{Neighbourhood, SpatialWeights, WeightStyle};
