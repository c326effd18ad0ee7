//! The trend lines of our residual charts: medians over tiers, not a local
//! regression.
//!
//! A valuation reviewer reads a residual chart by tier: are the cheapest
//! tenth of sales over-valued, did the last quarter's sales sell above the
//! model? So the line through a residual cloud is the **median residual of
//! each tier**, drawn at the tier's median position:
//!
//! * [`tier_medians`] splits the sales, ordered by `x`, into `g` tiers of
//!   (nearly) equal count with `g = clamp(⌊n / 30⌋, 3, 10)`: at most ten tiers
//!   (the tenths a ratio study reads price tiers by) and at least 30 sales per
//!   tier while `n ≥ 90`, so that each median is steady — for normal errors
//!   the median of 30 has a standard error of about `1.25 σ / √30 ≈ 0.23 σ`
//!   (the asymptotic `√(π/2) σ/√m`). Medians rather than means, so one
//!   keying error does not bend the line.
//! * [`group_medians`] does the same over groups given by a key (a calendar
//!   quarter, a district), for the time and location panels.
//!
//! Written here because it is a few lines over [`median_of_sorted`], which
//! the ratio study shares.

use crate::stats::median_of_sorted;
use std::collections::BTreeMap;

/// Fewest sales a tier should hold before more tiers are added.
pub const SALES_PER_TIER: usize = 30;
/// Most tiers drawn (tenths).
pub const MAX_TIERS: usize = 10;
/// Fewest tiers drawn.
pub const MIN_TIERS: usize = 3;

/// Number of tiers for `n` sales: `clamp(⌊n / 30⌋, 3, 10)`, never more than `n`.
pub fn tier_count(n: usize) -> usize {
    (n / SALES_PER_TIER).clamp(MIN_TIERS, MAX_TIERS).min(n)
}

/// Median `(x, y)` of each tier of (nearly) equal count along ascending `x`,
/// over the pairs where both are finite; empty when there are fewer than
/// three such pairs. Tier `j` of `g` holds sorted positions
/// `⌊j n / g⌋ .. ⌊(j + 1) n / g⌋`.
pub fn tier_medians(x: &[f64], y: &[f64]) -> Vec<(f64, f64)> {
    let mut points: Vec<(f64, f64)> =
        x.iter().zip(y).filter(|(a, b)| a.is_finite() && b.is_finite()).map(|(a, b)| (*a, *b)).collect();
    let n = points.len();
    if n < 3 {
        return Vec::new();
    }
    points.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
    let g = tier_count(n);
    (0..g)
        .filter_map(|j| {
            let tier = &points[j * n / g..(j + 1) * n / g];
            medians(tier.iter().map(|p| p.0).collect(), tier.iter().map(|p| p.1).collect())
        })
        .collect()
}

/// Median `(x, y)` of the finite pairs sharing each key, in key order; keys
/// with fewer than `min_count` pairs are left out.
pub fn group_medians<K: Ord + Clone>(keys: &[Option<K>], x: &[f64], y: &[f64], min_count: usize) -> Vec<(K, f64, f64)> {
    let mut groups: BTreeMap<K, (Vec<f64>, Vec<f64>)> = BTreeMap::new();
    for ((key, a), b) in keys.iter().zip(x).zip(y) {
        if let (Some(key), true) = (key, a.is_finite() && b.is_finite()) {
            let entry = groups.entry(key.clone()).or_default();
            entry.0.push(*a);
            entry.1.push(*b);
        }
    }
    groups
        .into_iter()
        .filter(|(_, (xs, _))| xs.len() >= min_count.max(1))
        .filter_map(|(key, (xs, ys))| medians(xs, ys).map(|(a, b)| (key, a, b)))
        .collect()
}

fn medians(mut xs: Vec<f64>, mut ys: Vec<f64>) -> Option<(f64, f64)> {
    xs.sort_by(f64::total_cmp);
    ys.sort_by(f64::total_cmp);
    Some((median_of_sorted(&xs)?, median_of_sorted(&ys)?))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tiers_follow_the_rule() {
        assert_eq!(tier_count(2), 2);
        assert_eq!(tier_count(16), 3);
        assert_eq!(tier_count(150), 5);
        assert_eq!(tier_count(3000), 10);
    }

    #[test]
    fn tier_medians_are_medians_of_equal_count_tiers() {
        // 100 points, x = 0..99, y = x mod 7: ⌊100/30⌋ = 3 tiers; the first
        // holds sorted positions 0..33 (x = 0..=32, median 16).
        let x: Vec<f64> = (0..100).map(f64::from).collect();
        let y: Vec<f64> = (0..100).map(|i| f64::from(i % 7)).collect();
        let m = tier_medians(&x, &y);
        assert_eq!(m.len(), 3);
        assert_eq!(m[0].0, 16.0);
        let mut first: Vec<f64> = (0..33).map(|i| f64::from(i % 7)).collect();
        first.sort_by(f64::total_cmp);
        assert_eq!(m[0].1, first[16]);
    }

    #[test]
    fn one_gross_error_does_not_bend_the_line() {
        let x: Vec<f64> = (0..300).map(f64::from).collect();
        let mut y = vec![0.0; 300];
        y[150] = 1e6;
        assert!(tier_medians(&x, &y).iter().all(|(_, m)| *m == 0.0));
    }

    #[test]
    fn groups_are_keyed_and_thin_ones_left_out() {
        let keys = [Some("b"), Some("a"), Some("a"), None, Some("b"), Some("c")];
        let x = [1.0, 2.0, 3.0, 4.0, 5.0, 6.0];
        let y = [10.0, 20.0, 40.0, 0.0, 30.0, 1.0];
        let m = group_medians(&keys, &x, &y, 2);
        assert_eq!(m, vec![("a", 2.5, 30.0), ("b", 3.0, 20.0)]);
    }
}
