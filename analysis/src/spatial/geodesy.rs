//! Planar and geographic coordinates, and distances on the ellipsoid.
//!
//! Offices hold parcel places in two ways: *planar* — projected coordinates
//! (metres or kilometres east and north on a map projection), where the
//! straight-line distance is right — and *geographic* — longitude and
//! latitude in degrees (WGS 84), where it is wrong: a degree of longitude is
//! `cos(latitude)` of a degree of latitude (0.74 at 42° N), so neighbours,
//! distance bands and distances from a place computed in degrees are all
//! distorted. Geographic distances here are geodesics on the WGS 84
//! ellipsoid, by C. F. F. Karney's algorithms ("Algorithms for geodesics",
//! *J. Geodesy* 87, 43–55, 2013) through the `geographiclib-rs` port of
//! GeographicLib, accurate to about 15 nanometres — reported in kilometres.
//!
//! [`refuse_degrees_as_planar`] stops the silent mistake: columns named like
//! longitude and latitude whose values all lie within ±180 and ±90 are
//! refused as planar coordinates, with the option that reads them as degrees.

use crate::error::{Error, Result};
use geographiclib_rs::{Geodesic, InverseGeodesic};
use serde::{Deserialize, Serialize};

/// How a pair of coordinate columns locates a parcel.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum Coordinates {
    /// Projected coordinates (e.g. metres or kilometres east and north):
    /// distances are straight lines in the columns' units.
    #[default]
    Planar,
    /// Longitude and latitude in degrees on WGS 84 (the first column is the
    /// longitude): distances are geodesics on the ellipsoid, in kilometres.
    Geographic,
}

impl Coordinates {
    /// The unit distances are in, for messages and reports.
    pub fn distance_unit(self) -> &'static str {
        match self {
            Coordinates::Planar => "coordinate units",
            Coordinates::Geographic => "km",
        }
    }
}

/// The mean radius of the WGS 84 ellipsoid, `R₁ = (2a + b)/3`, in km — the
/// sphere used only to *find* candidate neighbours (geodesic distances on the
/// ellipsoid decide), and for the residual map's local projection.
pub const MEAN_EARTH_RADIUS_KM: f64 = 6371.0088;

/// The geodesic distance in km between two points given as (longitude,
/// latitude) in degrees on WGS 84 (Karney 2013).
pub fn geodesic_km(lon1: f64, lat1: f64, lon2: f64, lat2: f64) -> f64 {
    let metres: f64 = Geodesic::wgs84().inverse(lat1, lon1, lat2, lon2);
    metres / 1000.0
}

/// Checks one geographic place: a finite longitude within ±180 and a
/// latitude within ±90 degrees. `what` names the place in the error.
pub fn check_lon_lat(lon: f64, lat: f64, what: &dyn Fn() -> String) -> Result<()> {
    if !(lon.is_finite() && (-180.0..=180.0).contains(&lon) && lat.is_finite() && (-90.0..=90.0).contains(&lat)) {
        return Err(Error::OutOfRange {
            what: what(),
            requirement: "a longitude within ±180 and a latitude within ±90 degrees (longitude first)".into(),
            value: format!("({lon}, {lat})"),
        });
    }
    Ok(())
}

/// The point on the unit sphere of (longitude, latitude) in degrees: chord
/// distances between such points order pairs as great-circle distances do.
pub(crate) fn unit_vector(lon: f64, lat: f64) -> [f64; 3] {
    let (lon, lat) = (lon.to_radians(), lat.to_radians());
    [lat.cos() * lon.cos(), lat.cos() * lon.sin(), lat.sin()]
}

/// The chord on the unit sphere of a great-circle distance of `km`.
pub(crate) fn chord_of_km(km: f64) -> f64 {
    let angle = (km / MEAN_EARTH_RADIUS_KM).min(std::f64::consts::PI);
    2.0 * (angle / 2.0).sin()
}

/// The largest ratio of a geodesic on WGS 84 to the great-circle distance on
/// the mean sphere between the same points, with a margin: the two differ by
/// at most about 0.56 % (the flattening, 1/298.257), so a sphere search widened
/// by 1 % finds every point the ellipsoid puts within a distance.
pub(crate) const SPHERE_SEARCH_MARGIN: f64 = 1.01;

/// Whether a column name reads like a longitude (`first`) or a latitude:
/// `lon`, `lng`, `long`, `longitude`, `x_lon`, `Longitude`, … (whole words
/// of the name split at `_`, `-`, spaces and case changes).
fn names_a(name: &str, longitude: bool) -> bool {
    let words: &[&str] = if longitude { &["lon", "lng", "long", "longitude"] } else { &["lat", "latitude"] };
    let lower = name.to_ascii_lowercase();
    lower.split(|c: char| !c.is_ascii_alphanumeric()).any(|word| words.contains(&word))
}

/// Refuses columns that hold longitude and latitude in degrees where planar
/// coordinates are expected: the names read like longitude and latitude (in
/// either order) and every value lies within ±180 and ±90. `option` names how
/// to declare them geographic (`--coordinates geographic`, `.geographic()`,
/// `geodist:`), for the message.
pub fn refuse_degrees_as_planar(x: &str, y: &str, xs: &[f64], ys: &[f64], option: &str) -> Result<()> {
    let named = (names_a(x, true) && names_a(y, false)) || (names_a(x, false) && names_a(y, true));
    let finite = |v: &&f64| v.is_finite();
    let within = |values: &[f64], limit: f64| values.iter().filter(finite).all(|v| v.abs() <= limit);
    let any = xs.iter().any(|v| v.is_finite()) && ys.iter().any(|v| v.is_finite());
    if named && any && within(xs, 180.0) && within(ys, 180.0) && (within(ys, 90.0) || within(xs, 90.0)) {
        return Err(Error::Specification(format!(
            "`{x}` and `{y}` look like longitude and latitude in degrees (named so, every value within ±180/±90), \
             but they are used as planar coordinates, where a straight-line distance in degrees is wrong (a degree \
             of longitude is cos(latitude) of a degree of latitude). Declare them geographic with {option}: \
             distances are then geodesics on the WGS 84 ellipsoid, in km. If they really are projected \
             coordinates, rename the columns"
        )));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn longitude_and_latitude_names_are_recognised() {
        assert!(names_a("Longitude", true) && names_a("parcel_lon", true) && names_a("LNG", true));
        assert!(names_a("Latitude", false) && names_a("lat", false));
        assert!(!names_a("lateral_area", false) && !names_a("longest_side", true) && !names_a("x", true));
    }

    #[test]
    fn degree_columns_used_as_planar_are_refused_and_kilometres_are_not() {
        let (lon, lat) = ([-93.62, -93.65], [42.03, 42.05]);
        let message = refuse_degrees_as_planar("Longitude", "Latitude", &lon, &lat, "`--coordinates geographic`")
            .expect_err("degrees")
            .to_string();
        assert!(message.contains("--coordinates geographic"), "{message}");
        assert!(refuse_degrees_as_planar("x", "y", &lon, &lat, "o").is_ok(), "unnamed columns pass");
        assert!(refuse_degrees_as_planar("lon_m", "lat_m", &[512_300.0], &[4_652_100.0], "o").is_ok());
    }

    /// The length of one degree on WGS 84, recalled from memory (standard
    /// geodesy tables): of latitude, 110.574 km at the equator and 111.694 km
    /// at the poles; of longitude, 111.320 km on the equator. The independent
    /// check to the metre is `tests/python/test_geodesy_against_geographiclib.py`.
    #[test]
    fn one_degree_has_its_known_length() {
        assert!((geodesic_km(0.0, 0.0, 0.0, 1.0) - 110.574).abs() < 0.001);
        assert!((geodesic_km(0.0, 89.0, 0.0, 90.0) - 111.694).abs() < 0.001);
        assert!((geodesic_km(0.0, 0.0, 1.0, 0.0) - 111.320).abs() < 0.001);
    }
}
