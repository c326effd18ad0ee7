//! Spatial weight matrices, stored sparse by row.
//!
//! A weight `wᵢⱼ > 0` says parcel `j` is a neighbour of parcel `i`; a parcel
//! is never its own neighbour (`wᵢᵢ = 0`). Neighbours are found with an
//! R*-tree (the `rstar` crate), so building weights for `n` parcels costs
//! `O(n log n)` rather than the `O(n²)` of comparing every pair.
//!
//! Ties are broken by row order: of several parcels at exactly the `k`-th
//! nearest distance, the earliest rows are taken, so the same data always
//! give the same matrix.
//!
//! Geographic places (longitude, latitude in degrees) are ranked by their
//! geodesic distance on the WGS 84 ellipsoid in km ([`super::places`]), so
//! the neighbours are exactly the ellipsoid's.

use super::geodesy::Coordinates;
use super::places::PlaceIndex;
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// How neighbours are chosen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum Neighbourhood {
    /// The `k` nearest other parcels (asymmetric in general: `j` may be among
    /// `i`'s nearest without `i` being among `j`'s).
    Nearest {
        /// How many neighbours each parcel has.
        k: usize,
    },
    /// Every other parcel within `distance` (in the coordinates' units; km
    /// for geographic coordinates), inclusive; symmetric.
    Within {
        /// The band's radius.
        distance: f64,
    },
}

impl Neighbourhood {
    /// In words: `8 nearest parcels`, `parcels within 0.5`.
    pub fn describe(&self) -> String {
        match self {
            Neighbourhood::Nearest { k } => format!("{k} nearest parcels"),
            Neighbourhood::Within { distance } => format!("parcels within {distance}"),
        }
    }
}

/// How the weights of a row are scaled.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum WeightStyle {
    /// Each neighbour weighs `1 / (number of neighbours)`, so every row sums
    /// to 1 and `Wz` is the neighbours' average (the usual choice).
    #[default]
    RowStandardised,
    /// Each neighbour weighs 1.
    Binary,
}

/// A sparse spatial weight matrix `W` (`n × n`), row by row.
#[derive(Debug, Clone, PartialEq)]
pub struct SpatialWeights {
    /// `rows[i]` lists `(j, wᵢⱼ)` for the neighbours of `i`, by `j`.
    rows: Vec<Vec<(usize, f64)>>,
    neighbourhood: Neighbourhood,
    style: WeightStyle,
}

impl SpatialWeights {
    /// Builds `W` for parcels at `(xs[i], ys[i])`.
    ///
    /// Refuses non-finite coordinates, a `k` of 0 or not below `n`, a band
    /// that is not a positive finite number, and a band so narrow that some
    /// parcel has no neighbour (an island, for which Moran's I is undefined
    /// under row standardisation): the error names the first such row.
    pub fn build(xs: &[f64], ys: &[f64], neighbourhood: Neighbourhood, style: WeightStyle) -> Result<Self> {
        Self::build_in(Coordinates::Planar, xs, ys, neighbourhood, style)
    }

    /// Builds `W` for parcels at `(xs[i], ys[i])` read as `coordinates`: on
    /// the plane as [`SpatialWeights::build`], or as (longitude, latitude) in
    /// degrees with geodesic distances in km (a band's `distance` in km).
    pub fn build_in(
        coordinates: Coordinates,
        xs: &[f64],
        ys: &[f64],
        neighbourhood: Neighbourhood,
        style: WeightStyle,
    ) -> Result<Self> {
        let places = PlaceIndex::new(coordinates, xs, ys)?;
        let n = places.len();
        let unit = match coordinates {
            Coordinates::Planar => "",
            Coordinates::Geographic => " km",
        };
        let mut rows: Vec<Vec<usize>> = Vec::with_capacity(n);
        match neighbourhood {
            Neighbourhood::Nearest { k } => {
                if k == 0 || k >= n {
                    return Err(Error::OutOfRange {
                        what: "the number of nearest neighbours".into(),
                        requirement: format!("between 1 and {} (one fewer than the {n} parcels)", n.saturating_sub(1)),
                        value: k.to_string(),
                    });
                }
                for i in 0..n {
                    let (x, y) = places.place(i);
                    let mut row: Vec<usize> = places.nearest(x, y, k, Some(i)).into_iter().map(|(_, j)| j).collect();
                    row.sort_unstable();
                    rows.push(row);
                }
            }
            Neighbourhood::Within { distance } => {
                if !(distance > 0.0 && distance.is_finite()) {
                    return Err(Error::OutOfRange {
                        what: "the neighbourhood distance".into(),
                        requirement: "a positive number".into(),
                        value: distance.to_string(),
                    });
                }
                for i in 0..n {
                    let (x, y) = places.place(i);
                    let row: Vec<usize> = places.within(x, y, distance, Some(i)).into_iter().map(|(_, j)| j).collect();
                    if row.is_empty() {
                        return Err(Error::Specification(format!(
                            "parcel {} (row {}) has no neighbour within {distance}{unit}; widen the band or use nearest neighbours",
                            i + 1,
                            i + 1
                        )));
                    }
                    rows.push(row);
                }
            }
        }
        Ok(Self::weighted(rows, neighbourhood, style))
    }

    /// The matrix of neighbour lists `rows`, weighted by `style`.
    fn weighted(rows: Vec<Vec<usize>>, neighbourhood: Neighbourhood, style: WeightStyle) -> Self {
        let rows = rows
            .into_iter()
            .map(|row| {
                let w = match style {
                    WeightStyle::RowStandardised => 1.0 / row.len() as f64,
                    WeightStyle::Binary => 1.0,
                };
                row.into_iter().map(|j| (j, w)).collect()
            })
            .collect();
        Self { rows, neighbourhood, style }
    }

    /// The weights from explicit rows `(j, wᵢⱼ)` (for tests and for matrices
    /// built elsewhere). Refuses a self-neighbour, an index out of range and
    /// a weight that is not a non-negative finite number. Rows are sorted by
    /// neighbour index; a neighbour listed twice is refused.
    pub fn from_rows(
        mut rows: Vec<Vec<(usize, f64)>>,
        neighbourhood: Neighbourhood,
        style: WeightStyle,
    ) -> Result<Self> {
        let n = rows.len();
        for (i, row) in rows.iter_mut().enumerate() {
            row.sort_by_key(|p| p.0);
            if let Some(pair) = row.windows(2).find(|pair| pair[0].0 == pair[1].0) {
                return Err(Error::Specification(format!(
                    "weight row {}: neighbour {} is listed twice",
                    i + 1,
                    pair[0].0 + 1
                )));
            }
            for &(j, w) in row.iter() {
                if j == i || j >= n || !(w >= 0.0 && w.is_finite()) {
                    return Err(Error::Specification(format!(
                        "weight row {}: neighbour {} with weight {w} is not allowed (no self-neighbours, indices below {n}, finite non-negative weights)",
                        i + 1,
                        j + 1
                    )));
                }
            }
        }
        Ok(Self { rows, neighbourhood, style })
    }

    /// Number of parcels `n`.
    pub fn len(&self) -> usize {
        self.rows.len()
    }

    /// Whether there are no parcels.
    pub fn is_empty(&self) -> bool {
        self.rows.is_empty()
    }

    /// The neighbours of parcel `i` with their weights.
    pub fn row(&self, i: usize) -> &[(usize, f64)] {
        &self.rows[i]
    }

    /// How the neighbours were chosen.
    pub fn neighbourhood(&self) -> Neighbourhood {
        self.neighbourhood
    }

    /// How the rows were scaled.
    pub fn style(&self) -> WeightStyle {
        self.style
    }

    /// `W z`: each parcel's weighted sum of its neighbours' values (their
    /// average under row standardisation).
    pub fn lag(&self, z: &[f64]) -> Vec<f64> {
        self.rows.iter().map(|row| row.iter().map(|&(j, w)| w * z[j]).sum()).collect()
    }

    /// `Wᵀ z`.
    pub fn lag_transposed(&self, z: &[f64]) -> Vec<f64> {
        let mut out = vec![0.0; z.len()];
        for (i, row) in self.rows.iter().enumerate() {
            for &(j, w) in row {
                out[j] += w * z[i];
            }
        }
        out
    }

    /// The sums of Cliff & Ord (1981, eq. 1.38): `S₀ = Σᵢⱼ wᵢⱼ`,
    /// `S₁ = ½ Σᵢⱼ (wᵢⱼ + wⱼᵢ)²`, `S₂ = Σᵢ (wᵢ. + w.ᵢ)²`, and with them
    /// `tr(WᵀW) = Σᵢⱼ wᵢⱼ²` and `tr(W²) = Σᵢⱼ wᵢⱼ wⱼᵢ`.
    pub(crate) fn sums(&self) -> WeightSums {
        let n = self.rows.len();
        let mut column_sums = vec![0.0; n];
        let (mut s0, mut squares, mut cross) = (0.0, 0.0, 0.0);
        for (i, row) in self.rows.iter().enumerate() {
            for &(j, w) in row {
                s0 += w;
                squares += w * w;
                column_sums[j] += w;
                cross += w * self.weight(j, i);
            }
        }
        // ½ Σ (wᵢⱼ + wⱼᵢ)² = ½ (2 Σ wᵢⱼ² + 2 Σ wᵢⱼ wⱼᵢ) = Σ wᵢⱼ² + Σ wᵢⱼ wⱼᵢ.
        let s1 = squares + cross;
        let s2 =
            self.rows.iter().zip(&column_sums).map(|(row, c)| (row.iter().map(|p| p.1).sum::<f64>() + c).powi(2)).sum();
        WeightSums { s0, s1, s2, trace_wtw: squares, trace_ww: cross }
    }

    /// `wᵢⱼ` (0 when `j` is not a neighbour of `i`); rows are sorted by `j`.
    fn weight(&self, i: usize, j: usize) -> f64 {
        let row = &self.rows[i];
        row.binary_search_by(|p| p.0.cmp(&j)).map_or(0.0, |k| row[k].1)
    }
}

/// See [`SpatialWeights::sums`].
#[derive(Debug, Clone, Copy)]
pub(crate) struct WeightSums {
    pub s0: f64,
    pub s1: f64,
    pub s2: f64,
    pub trace_wtw: f64,
    pub trace_ww: f64,
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn nearest_neighbours_on_a_line_break_ties_by_row() {
        // Points at 0, 1, 2, 3 on a line: parcel 1's two nearest are 0 and 2
        // (tied at distance 1); parcel 0's single nearest is 1.
        let xs = [0.0, 1.0, 2.0, 3.0];
        let ys = [0.0; 4];
        let w = SpatialWeights::build(&xs, &ys, Neighbourhood::Nearest { k: 1 }, WeightStyle::Binary).unwrap();
        assert_eq!(w.row(0), &[(1, 1.0)]);
        assert_eq!(w.row(1), &[(0, 1.0)], "tie between rows 0 and 2 goes to the earlier row");
        let w = SpatialWeights::build(&xs, &ys, Neighbourhood::Nearest { k: 2 }, WeightStyle::RowStandardised).unwrap();
        assert_eq!(w.row(1), &[(0, 0.5), (2, 0.5)]);
        assert_eq!(w.row(3), &[(1, 0.5), (2, 0.5)]);
    }

    #[test]
    fn distance_band_is_symmetric_and_refuses_islands() {
        let xs = [0.0, 1.0, 2.0, 10.0];
        let ys = [0.0; 4];
        let e = SpatialWeights::build(&xs, &ys, Neighbourhood::Within { distance: 1.5 }, WeightStyle::Binary)
            .unwrap_err()
            .to_string();
        assert!(e.contains("parcel 4") && e.contains("no neighbour"), "{e}");
        let w = SpatialWeights::build(&xs[..3], &ys[..3], Neighbourhood::Within { distance: 1.0 }, WeightStyle::Binary)
            .unwrap();
        assert_eq!(w.row(1), &[(0, 1.0), (2, 1.0)], "the band is inclusive");
        let sums = w.sums();
        // Binary symmetric path 0–1–2: S0 = 4, S1 = ½·4·4 = 8, S2 = (2)²+(4)²+(2)² = 24.
        assert_eq!((sums.s0, sums.s1, sums.s2), (4.0, 8.0, 24.0));
    }

    #[test]
    fn refuses_bad_input() {
        let e =
            SpatialWeights::build(&[0.0, f64::NAN], &[0.0, 0.0], Neighbourhood::Nearest { k: 1 }, WeightStyle::Binary)
                .unwrap_err()
                .to_string();
        assert!(e.contains("parcel 2") && e.contains("finite"), "{e}");
        let e = SpatialWeights::build(&[0.0, 1.0], &[0.0, 0.0], Neighbourhood::Nearest { k: 2 }, WeightStyle::Binary)
            .unwrap_err()
            .to_string();
        assert!(e.contains("between 1 and 1"), "{e}");
        let e = SpatialWeights::from_rows(
            vec![vec![(1, 1.0), (1, 1.0)], vec![(0, 1.0)]],
            Neighbourhood::Nearest { k: 1 },
            WeightStyle::Binary,
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("listed twice"), "{e}");
    }

    #[test]
    fn explicit_rows_are_sorted_before_use() {
        // Row 0 lists its neighbours out of order; the sums read wᵢⱼ wⱼᵢ by search.
        let w = SpatialWeights::from_rows(
            vec![vec![(2, 1.0), (1, 1.0)], vec![(0, 1.0)], vec![(0, 1.0)]],
            Neighbourhood::Nearest { k: 1 },
            WeightStyle::Binary,
        )
        .unwrap();
        assert_eq!(w.row(0), &[(1, 1.0), (2, 1.0)]);
        // Symmetric binary star: Σ wᵢⱼ wⱼᵢ = 4.
        assert_eq!(w.sums().trace_ww, 4.0);
    }
}
