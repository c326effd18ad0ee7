//! LOWESS scatterplot smoothing (Cleveland 1979, "Robust locally weighted
//! regression and smoothing scatterplots", *JASA* 74, 829–836): at each point a
//! straight line is fitted to the nearest `⌈f·n⌉` points with tricube weights,
//! then refitted `iterations` times with bisquare robustness weights from the
//! residuals (`6 × median |residual|` as the scale).
//!
//! Written here because the smoother is a few dozen lines and the plotting
//! crates offer none. Above 2,000 points we smooth an evenly spaced subsample
//! in x order (every ⌈n/2000⌉-th point), which is all a chart can show.

/// Smoothed `(x, ŷ)` pairs in ascending `x`, with span `f` (e.g. 2/3).
pub fn lowess(x: &[f64], y: &[f64], f: f64, iterations: usize) -> Vec<(f64, f64)> {
    let mut points: Vec<(f64, f64)> = x.iter().zip(y).filter(|(a, b)| a.is_finite() && b.is_finite()).map(|(a, b)| (*a, *b)).collect();
    points.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
    if points.len() > 2000 {
        let step = points.len().div_ceil(2000);
        points = points.into_iter().step_by(step).collect();
    }
    let n = points.len();
    if n < 3 {
        return points;
    }
    let window = ((f * n as f64).ceil() as usize).clamp(2, n);
    let mut robustness = vec![1.0; n];
    let mut fitted = vec![0.0; n];
    for iteration in 0..=iterations {
        for i in 0..n {
            let xi = points[i].0;
            // The `window` nearest neighbours form a contiguous run in sorted order.
            let (mut lo, mut hi) = (i, i);
            while hi - lo + 1 < window {
                let take_left = if lo == 0 {
                    false
                } else if hi == n - 1 {
                    true
                } else {
                    xi - points[lo - 1].0 <= points[hi + 1].0 - xi
                };
                if take_left {
                    lo -= 1;
                } else {
                    hi += 1;
                }
            }
            let radius = (xi - points[lo].0).max(points[hi].0 - xi).max(f64::MIN_POSITIVE);
            let (mut sw, mut swx, mut swy, mut swxx, mut swxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
            for j in lo..=hi {
                let u = ((points[j].0 - xi) / radius).abs();
                let w = if u < 1.0 { (1.0 - u * u * u).powi(3) } else { 0.0 } * robustness[j];
                sw += w;
                swx += w * points[j].0;
                swy += w * points[j].1;
                swxx += w * points[j].0 * points[j].0;
                swxy += w * points[j].0 * points[j].1;
            }
            fitted[i] = if sw <= 0.0 {
                points[i].1
            } else {
                let mean_x = swx / sw;
                let mean_y = swy / sw;
                let var = swxx / sw - mean_x * mean_x;
                let slope = if var > 1e-12 * (mean_x * mean_x).max(1.0) { (swxy / sw - mean_x * mean_y) / var } else { 0.0 };
                mean_y + slope * (xi - mean_x)
            };
        }
        if iteration == iterations {
            break;
        }
        let mut residuals: Vec<f64> = (0..n).map(|i| (points[i].1 - fitted[i]).abs()).collect();
        let mut sorted = residuals.clone();
        sorted.sort_by(f64::total_cmp);
        let scale = 6.0 * sorted[n / 2];
        if scale <= 0.0 {
            break;
        }
        for (r, weight) in residuals.iter_mut().zip(robustness.iter_mut()) {
            let u = *r / scale;
            *weight = if u < 1.0 { (1.0 - u * u).powi(2) } else { 0.0 };
        }
    }
    points.iter().zip(fitted).map(|(p, f)| (p.0, f)).collect()
}

#[cfg(test)]
mod tests {
    use super::lowess;

    #[test]
    fn a_straight_line_is_reproduced() {
        let x: Vec<f64> = (0..50).map(f64::from).collect();
        let y: Vec<f64> = x.iter().map(|v| 3.0 + 0.5 * v).collect();
        for (a, b) in lowess(&x, &y, 2.0 / 3.0, 3) {
            assert!((b - (3.0 + 0.5 * a)).abs() < 1e-9);
        }
    }

    #[test]
    fn an_outlier_is_resisted() {
        let x: Vec<f64> = (0..40).map(f64::from).collect();
        // A noisy line (deterministic wobble) with one gross outlier.
        let mut y: Vec<f64> = x.iter().map(|v| 2.0 * v + (v * 1.7).sin()).collect();
        y[20] = 500.0;
        let smooth = lowess(&x, &y, 0.5, 3);
        assert!((smooth[20].1 - 40.0).abs() < 2.0, "{}", smooth[20].1);
    }
}
