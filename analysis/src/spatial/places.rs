//! An index of parcel places for neighbour searches, on the plane or on the
//! ellipsoid — shared by the spatial weights and by the local (geographically
//! weighted) fits.
//!
//! Planar places sit in a 2-D R*-tree and distances are straight lines.
//! Geographic places (longitude, latitude in degrees) sit in a 3-D R*-tree of
//! unit-sphere points: chord order equals great-circle order, and the search
//! is widened by [`SPHERE_SEARCH_MARGIN`] so that every place the WGS 84
//! geodesic puts within reach is seen; the geodesic distance in km then
//! decides. Either way a search costs `O(log n + m)` for `m` results, never a
//! pass over every place.
//!
//! Ties are broken by index: of several places at exactly the `k`-th nearest
//! distance, the lowest indices are kept, so the same data always give the
//! same neighbours.

use super::geodesy::SPHERE_SEARCH_MARGIN;
use super::geodesy::{check_lon_lat, chord_of_km, geodesic_km, unit_vector, Coordinates, MEAN_EARTH_RADIUS_KM};
use crate::error::{Error, Result};
use rstar::primitives::GeomWithData;
use rstar::RTree;

/// The tree of one kind of coordinates.
#[derive(Debug, Clone)]
enum Tree {
    Plane(RTree<GeomWithData<[f64; 2], usize>>),
    Sphere(RTree<GeomWithData<[f64; 3], usize>>),
}

/// Places indexed for nearest-neighbour and distance-band searches.
#[derive(Debug, Clone)]
pub struct PlaceIndex {
    coordinates: Coordinates,
    xs: Vec<f64>,
    ys: Vec<f64>,
    tree: Tree,
}

impl PlaceIndex {
    /// Indexes the places `(xs[i], ys[i])` read as `coordinates`. Refuses
    /// columns of different lengths, non-finite coordinates and (geographic)
    /// longitudes beyond ±180 or latitudes beyond ±90, naming the row.
    pub fn new(coordinates: Coordinates, xs: &[f64], ys: &[f64]) -> Result<Self> {
        if xs.len() != ys.len() {
            return Err(Error::Specification("the two coordinate columns must have one value per parcel".into()));
        }
        let n = xs.len();
        let tree = match coordinates {
            Coordinates::Planar => {
                if let Some(i) = (0..n).find(|&i| !(xs[i].is_finite() && ys[i].is_finite())) {
                    return Err(Error::OutOfRange {
                        what: format!("the coordinates of parcel {} (row {})", i + 1, i + 1),
                        requirement: "finite numbers".into(),
                        value: format!("({}, {})", xs[i], ys[i]),
                    });
                }
                Tree::Plane(RTree::bulk_load((0..n).map(|i| GeomWithData::new([xs[i], ys[i]], i)).collect()))
            }
            Coordinates::Geographic => {
                for i in 0..n {
                    check_lon_lat(xs[i], ys[i], &|| format!("the place of parcel {} (row {})", i + 1, i + 1))?;
                }
                Tree::Sphere(RTree::bulk_load(
                    (0..n).map(|i| GeomWithData::new(unit_vector(xs[i], ys[i]), i)).collect(),
                ))
            }
        };
        Ok(Self { coordinates, xs: xs.to_vec(), ys: ys.to_vec(), tree })
    }

    /// Number of places.
    pub fn len(&self) -> usize {
        self.xs.len()
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.xs.is_empty()
    }

    /// How the places are read.
    pub fn coordinates(&self) -> Coordinates {
        self.coordinates
    }

    /// Place `i` as `(x, y)` (longitude, latitude for geographic places).
    pub fn place(&self, i: usize) -> (f64, f64) {
        (self.xs[i], self.ys[i])
    }

    /// The distance from `(x, y)` to place `j`: straight-line in coordinate
    /// units, or geodesic km.
    pub fn distance(&self, x: f64, y: f64, j: usize) -> f64 {
        match self.coordinates {
            Coordinates::Planar => (x - self.xs[j]).hypot(y - self.ys[j]),
            Coordinates::Geographic => geodesic_km(x, y, self.xs[j], self.ys[j]),
        }
    }

    /// The `k` places nearest to `(x, y)` as `(distance, index)`, nearest
    /// first (ties by index), leaving out the place `skip` (a place's own
    /// index, when its neighbours are sought).
    pub fn nearest(&self, x: f64, y: f64, k: usize, skip: Option<usize>) -> Vec<(f64, usize)> {
        let order = |a: &(f64, usize), b: &(f64, usize)| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1));
        if k.saturating_mul(4) > self.len() {
            // A large share of all places: measuring every one and sorting
            // is cheaper than walking the tree that far.
            let mut all: Vec<(f64, usize)> =
                (0..self.len()).filter(|&j| Some(j) != skip).map(|j| (self.distance(x, y, j), j)).collect();
            all.sort_unstable_by(order);
            all.truncate(k);
            return all;
        }
        let mut found: Vec<(f64, usize)> = Vec::with_capacity(k + 8);
        match &self.tree {
            Tree::Plane(tree) => {
                // Walk outwards until the k-th distance is passed, so that
                // every place tied at that distance is seen.
                let mut kth = f64::INFINITY;
                for (point, d2) in tree.nearest_neighbor_iter_with_distance_2(&[x, y]) {
                    if Some(point.data) == skip {
                        continue;
                    }
                    let d = d2.sqrt();
                    if found.len() >= k && d > kth {
                        break;
                    }
                    found.push((self.distance(x, y, point.data), point.data));
                    if found.len() == k {
                        kth = d;
                    }
                }
            }
            Tree::Sphere(tree) => {
                // Sphere order, then the ellipsoid decides: once the sphere
                // distance passes the k-th geodesic by the margin, no later
                // candidate can be nearer on the ellipsoid.
                let mut kth = f64::INFINITY;
                for (point, chord2) in tree.nearest_neighbor_iter_with_distance_2(&unit_vector(x, y)) {
                    if Some(point.data) == skip {
                        continue;
                    }
                    let sphere_km = 2.0 * (chord2.sqrt() / 2.0).min(1.0).asin() * MEAN_EARTH_RADIUS_KM;
                    if found.len() >= k && sphere_km > kth * SPHERE_SEARCH_MARGIN {
                        break;
                    }
                    found.push((self.distance(x, y, point.data), point.data));
                    if found.len() >= k {
                        found.sort_by(order);
                        kth = found[k - 1].0;
                    }
                }
            }
        }
        found.sort_by(order);
        found.truncate(k);
        found
    }

    /// Every place within `distance` of `(x, y)` (inclusive) as `(distance,
    /// index)`, by index, leaving out `skip`.
    pub fn within(&self, x: f64, y: f64, distance: f64, skip: Option<usize>) -> Vec<(f64, usize)> {
        let mut found: Vec<(f64, usize)> = match &self.tree {
            Tree::Plane(tree) => tree
                .locate_within_distance([x, y], distance * distance)
                .map(|p| (self.distance(x, y, p.data), p.data))
                .collect(),
            Tree::Sphere(tree) => {
                let chord = chord_of_km(distance * SPHERE_SEARCH_MARGIN);
                tree.locate_within_distance(unit_vector(x, y), chord * chord)
                    .map(|p| (self.distance(x, y, p.data), p.data))
                    .filter(|(d, _)| *d <= distance)
                    .collect()
            }
        };
        found.retain(|&(_, j)| Some(j) != skip);
        found.sort_by_key(|&(_, j)| j);
        found
    }
}
