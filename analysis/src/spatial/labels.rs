//! Where a map writes a location group's name: at the middle of its parcels.
//!
//! The middle is the coordinate-wise median of the group's places, which
//! stays inside a group of any shape better than the mean does when a few
//! parcels lie far out, and which commutes with the maps' projections (each
//! axis is projected by an increasing linear map, so the median of the
//! projected places is the projection of the median).

use crate::stats::median_of_sorted;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// A location group's name at the middle of its places, in the places'
/// own coordinates (planar units, or longitude and latitude in degrees).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct PlaceLabel {
    /// The group's name (e.g. a district).
    pub name: String,
    /// Median first coordinate of the group's places.
    pub x: f64,
    /// Median second coordinate of the group's places.
    pub y: f64,
}

/// One label per group, in name order, at the coordinate-wise median of the
/// places `(xs[i], ys[i])` whose `groups[i]` names it; places without a
/// group are left out. `groups`, `xs` and `ys` have one entry per place.
pub fn group_labels(groups: &[Option<String>], xs: &[f64], ys: &[f64]) -> Vec<PlaceLabel> {
    let mut members: BTreeMap<&str, (Vec<f64>, Vec<f64>)> = BTreeMap::new();
    for ((group, &x), &y) in groups.iter().zip(xs).zip(ys) {
        if let Some(group) = group {
            let entry = members.entry(group.as_str()).or_default();
            entry.0.push(x);
            entry.1.push(y);
        }
    }
    members
        .into_iter()
        .filter_map(|(name, (mut xs, mut ys))| {
            xs.sort_by(f64::total_cmp);
            ys.sort_by(f64::total_cmp);
            Some(PlaceLabel { name: name.to_string(), x: median_of_sorted(&xs)?, y: median_of_sorted(&ys)? })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn each_group_is_labelled_at_its_median_place() {
        let groups = [Some("North".to_string()), Some("North".into()), None, Some("North".into()), Some("East".into())];
        let labels = group_labels(&groups, &[0.0, 10.0, 99.0, 1.0, 5.0], &[4.0, 6.0, 99.0, 5.0, 2.0]);
        assert_eq!(
            labels,
            vec![
                PlaceLabel { name: "East".into(), x: 5.0, y: 2.0 },
                PlaceLabel { name: "North".into(), x: 1.0, y: 5.0 },
            ]
        );
    }
}
