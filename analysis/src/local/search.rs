//! The bandwidth of least AICc.
//!
//! AICc (Fotheringham et al. 2002, eq. 2.33) trades the fit against the
//! effective number of parameters; the bandwidth that minimises it is the
//! usual choice (ibid. §2.9). The curve is evaluated first on a grid of 16
//! bandwidths spaced evenly in the logarithm across the whole range —
//! adaptive: from `k + 2` nearest sales to all `n`; fixed: from half the
//! median distance to a sale's `k + 2`-th nearest neighbour to twice the
//! widest distance between sales — so that a curve with more than one dip
//! is not followed into the wrong one. Adaptive bandwidths: finer grids of
//! 16 counts inside the bracket around the least value (each grid scored in
//! one pass over the sales, `engine::adaptive_aicc`) until it holds at most
//! `EXHAUSTIVE_WIDTH` counts, every one of which is then scored
//! (the curve is jagged near its floor). Fixed bandwidths: a golden-section
//! search (Kiefer 1953) in the logarithm of the distance to a relative width
//! of 10⁻⁴. A bandwidth whose local designs are
//! singular somewhere counts as infinitely bad.

use super::engine::{adaptive_aicc, aicc, at_every_sale, totals, LocalData};
use super::kernel::{Bandwidth, Kernel};
use crate::error::{Error, Result};
use std::collections::BTreeMap;

/// Points of the first, coarse grid.
const GRID_POINTS: usize = 16;
/// Adaptive bandwidths: once the bracket holds at most this many counts,
/// every count in it is evaluated — the AICc curve is jagged on the scale of
/// a few sales near its floor, where golden section alone can settle on a
/// neighbouring dip.
const EXHAUSTIVE_WIDTH: usize = 64;
/// The golden ratio's conjugate, `(√5 − 1)/2`.
const GOLDEN: f64 = 0.618_033_988_749_894_8;

/// Refuses a bandwidth that cannot give a local fit: fewer than `k + 2`
/// nearest sales or more than `n`, or a distance that is not positive.
pub(crate) fn check_bandwidth(kernel: Kernel, bandwidth: Bandwidth, n: usize, k: usize) -> Result<()> {
    match (kernel, bandwidth) {
        (Kernel::AdaptiveBisquare, Bandwidth::Neighbours(count)) if count >= k + 2 && count <= n => Ok(()),
        (Kernel::AdaptiveBisquare, Bandwidth::Neighbours(count)) => Err(Error::OutOfRange {
            what: "the number of nearest sales of the adaptive kernel".into(),
            requirement: format!("between {} (coefficients + 2) and {n} (every sale)", k + 2),
            value: count.to_string(),
        }),
        (Kernel::FixedGaussian, Bandwidth::Distance(d)) if d > 0.0 && d.is_finite() => Ok(()),
        (Kernel::FixedGaussian, Bandwidth::Distance(d)) => Err(Error::OutOfRange {
            what: "the distance of the Gaussian kernel".into(),
            requirement: "a positive number".into(),
            value: d.to_string(),
        }),
        (kernel, bandwidth) => Err(Error::Specification(format!(
            "the {} kernel takes {}, not {}",
            kernel.describe(),
            match kernel {
                Kernel::AdaptiveBisquare => "a number of nearest sales",
                Kernel::FixedGaussian => "a distance",
            },
            bandwidth.describe()
        ))),
    }
}

/// AICc at one bandwidth (infinite where a local design is singular).
fn score(data: &LocalData, kernel: Kernel, bandwidth: Bandwidth) -> f64 {
    match at_every_sale(data, kernel, bandwidth, false) {
        Ok(points) => {
            let sums = totals(data, &points);
            aicc(data.target.len(), sums.rss, sums.trace_s)
        }
        Err(_) => f64::INFINITY,
    }
}

/// The bandwidth of least AICc and every bandwidth tried with its AICc.
pub(crate) fn least_aicc(data: &LocalData, kernel: Kernel, k: usize) -> Result<(Bandwidth, Vec<(Bandwidth, f64)>)> {
    let n = data.target.len();
    let mut tried: Vec<(Bandwidth, f64)> = Vec::new();
    let best = match kernel {
        Kernel::AdaptiveBisquare => {
            let (lo, hi) = (k + 2, n);
            if lo > hi {
                return Err(Error::TooFewRows { rows: n, columns: k + 2 });
            }
            let mut seen: BTreeMap<usize, f64> = BTreeMap::new();
            // Scores the counts not yet seen, all in one pass.
            let mut batch = |counts: &[usize], tried: &mut Vec<(Bandwidth, f64)>| {
                let mut fresh: Vec<usize> = counts.iter().copied().filter(|c| !seen.contains_key(c)).collect();
                fresh.sort_unstable();
                fresh.dedup();
                for (count, value) in fresh.iter().zip(adaptive_aicc(data, &fresh)) {
                    seen.insert(*count, value);
                    tried.push((Bandwidth::Neighbours(*count), value));
                }
                counts.iter().map(|c| seen[c]).collect::<Vec<f64>>()
            };
            let mut grid: Vec<usize> = (0..GRID_POINTS)
                .map(|g| {
                    let t = g as f64 / (GRID_POINTS - 1) as f64;
                    ((lo as f64).ln() + t * ((hi as f64).ln() - (lo as f64).ln())).exp().round() as usize
                })
                .map(|c| c.clamp(lo, hi))
                .collect();
            grid.dedup();
            let values = batch(&grid, &mut tried);
            let m = argmin(&values);
            let (mut a, mut b) = (grid[m.saturating_sub(1)], grid[(m + 1).min(grid.len() - 1)]);
            // Finer grids inside the bracket, each scored in one pass over
            // the sales (a pass costs about the same for 2 counts as for 16).
            while b - a > EXHAUSTIVE_WIDTH {
                let mut inner: Vec<usize> = (0..GRID_POINTS)
                    .map(|g| a + ((b - a) as f64 * g as f64 / (GRID_POINTS - 1) as f64).round() as usize)
                    .collect();
                inner.dedup();
                let values = batch(&inner, &mut tried);
                let m = argmin(&values);
                (a, b) = (inner[m.saturating_sub(1)], inner[(m + 1).min(inner.len() - 1)]);
            }
            batch(&(a..=b).collect::<Vec<_>>(), &mut tried);
            // The least over everything evaluated (the grid's dips included);
            // the smaller count on a tie.
            let (&count, _) = seen
                .iter()
                .min_by(|x, y| x.1.total_cmp(y.1).then(x.0.cmp(y.0)))
                .ok_or_else(|| Error::Specification("no bandwidth was evaluated".into()))?;
            Bandwidth::Neighbours(count)
        }
        Kernel::FixedGaussian => {
            let places = data.places;
            let mut reach: Vec<f64> = (0..n)
                .map(|i| {
                    let (x, y) = places.place(i);
                    places.nearest(x, y, (k + 2).min(n.saturating_sub(1)).max(1), Some(i)).last().map_or(0.0, |p| p.0)
                })
                .collect();
            reach.sort_by(f64::total_cmp);
            let lo = 0.5 * crate::stats::quantile_of_sorted(&reach, 0.5);
            let (x0, y0) = places.place(0);
            let far = (0..n).map(|j| places.distance(x0, y0, j)).fold(0.0, f64::max);
            let hi = 4.0 * far.max(lo);
            if !(lo > 0.0 && hi > lo) {
                return Err(Error::Specification(
                    "the sales' places do not spread out enough to search a Gaussian bandwidth (many sales share a place)"
                        .into(),
                ));
            }
            let eval = |d: f64, tried: &mut Vec<(Bandwidth, f64)>| {
                let value = score(data, kernel, Bandwidth::Distance(d));
                tried.push((Bandwidth::Distance(d), value));
                value
            };
            let grid: Vec<f64> = (0..GRID_POINTS)
                .map(|g| (lo.ln() + g as f64 / (GRID_POINTS - 1) as f64 * (hi.ln() - lo.ln())).exp())
                .collect();
            let values: Vec<f64> = grid.iter().map(|&d| eval(d, &mut tried)).collect();
            let m = argmin(&values);
            let (mut a, mut b) = (grid[m.saturating_sub(1)].ln(), grid[(m + 1).min(grid.len() - 1)].ln());
            let (mut c, mut d) = (b - GOLDEN * (b - a), a + GOLDEN * (b - a));
            let (mut fc, mut fd) = (eval(c.exp(), &mut tried), eval(d.exp(), &mut tried));
            while b - a > 1e-4 {
                if fc <= fd {
                    (b, d, fd) = (d, c, fc);
                    c = b - GOLDEN * (b - a);
                    fc = eval(c.exp(), &mut tried);
                } else {
                    (a, c, fc) = (c, d, fd);
                    d = a + GOLDEN * (b - a);
                    fd = eval(d.exp(), &mut tried);
                }
            }
            let &(best, _) = tried
                .iter()
                .min_by(|x, y| x.1.total_cmp(&y.1))
                .ok_or_else(|| Error::Specification("no bandwidth was evaluated".into()))?;
            best
        }
    };
    if tried.iter().all(|(_, v)| !v.is_finite()) {
        return Err(Error::Specification(
            "no bandwidth gave a local fit at every sale (local designs singular throughout); leave out terms that \
             do not vary within neighbourhoods, such as a district's levels"
                .into(),
        ));
    }
    Ok((best, tried))
}

/// The index of the least value (the first on a tie; NaN counts as largest).
fn argmin(values: &[f64]) -> usize {
    values
        .iter()
        .enumerate()
        .min_by(|a, b| {
            let key = |v: f64| if v.is_nan() { f64::INFINITY } else { v };
            key(*a.1).total_cmp(&key(*b.1)).then(a.0.cmp(&b.0))
        })
        .map_or(0, |(i, _)| i)
}
