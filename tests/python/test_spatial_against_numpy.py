"""Moran's I of regression residuals against a direct numpy implementation of
the published formulas.

Sources: A. D. Cliff and J. K. Ord, *Spatial Processes: Models and
Applications* (Pion, 1981): the statistic and its moments for a variable under
normality (eqs. 1.35-1.39), and for least-squares residuals under normal errors
(section 8.3), as restated by L. Anselin, *Spatial Econometrics* (Kluwer, 1988),
eqs. 8.3-8.4:

    I = (n/S0) e'We / e'e,  E I = (n/S0) tr(MW)/(n-k),
    Var I = (n/S0)^2 [tr(MWMW') + tr(MWMW) + tr(MW)^2] / ((n-k)(n-k+2)) - (E I)^2.

The reference below forms W and M = I - X(X'X)^-1 X' as dense n x n matrices,
which is the formula read literally; Plumbline never forms them. A small
example worked by hand (four parcels on a line) is in the Rust unit tests of
analysis/src/spatial/moran.rs.
"""
import numpy as np
from scipy import stats

from conftest import run_fit, run_raw, write_csv


def dense_knn(xy, k):
    n = len(xy)
    d = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    W = np.zeros((n, n))
    for i in range(n):
        W[i, np.argsort(d[i], kind="stable")[:k]] = 1.0
    return W


def dense_band(xy, distance):
    d = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1))
    W = (d <= distance).astype(float)
    np.fill_diagonal(W, 0.0)
    return W


def reference_residual_moran(X, y, W):
    n, k = X.shape
    M = np.eye(n) - X @ np.linalg.solve(X.T @ X, X.T)
    e = M @ y
    s0 = W.sum()
    statistic = n / s0 * (e @ W @ e) / (e @ e)
    MW = M @ W
    expected = n / s0 * np.trace(MW) / (n - k)
    # tr(MWMW') is the trace of M W M W' (not of MW (MW)' = M W W' M).
    variance = (n / s0) ** 2 * (np.trace(MW @ M @ W.T) + np.trace(MW @ MW) + np.trace(MW) ** 2) \
        / ((n - k) * (n - k + 2)) - expected ** 2
    z = (statistic - expected) / np.sqrt(variance)
    return statistic, expected, variance, z, 2 * stats.norm.sf(abs(z))


def reference_normality_moran(values, W):
    n = len(values)
    z = values - values.mean()
    s0 = W.sum()
    s1 = 0.5 * ((W + W.T) ** 2).sum()
    s2 = ((W.sum(1) + W.sum(0)) ** 2).sum()
    statistic = n / s0 * (z @ W @ z) / (z @ z)
    expected = -1 / (n - 1)
    variance = (n * n * s1 - n * s2 + 3 * s0 * s0) / ((n * n - 1) * s0 * s0) - expected ** 2
    return statistic, expected, variance


def spatial_data(tmp_path, n=260, seed=11):
    """Parcels on a unit square with a smooth surface the model leaves out."""
    rng = np.random.default_rng(seed)
    xy = rng.uniform(0, 1, (n, 2))
    a = rng.normal(0, 1, n)
    b = rng.uniform(1, 5, n)
    surface = 0.8 * np.sin(3 * xy[:, 0]) * np.cos(2 * xy[:, 1])
    y = 2 + 0.5 * a - 0.3 * b + surface + rng.normal(0, 0.3, n)
    path = write_csv(tmp_path / "spatial.csv", {"y": y, "a": a, "b": b, "x": xy[:, 0], "yc": xy[:, 1]})
    X = np.column_stack([np.ones(n), a, b])
    return path, xy, X, y


def check(doc_moran, reference):
    statistic, expected, variance, z, p = reference
    assert abs(doc_moran["statistic"] - statistic) <= 1e-10 * abs(statistic)
    assert abs(doc_moran["expected"] - expected) <= 1e-10 * abs(expected)
    assert abs(doc_moran["variance"] - variance) <= 1e-9 * variance
    assert abs(doc_moran["z_score"] - z) <= 1e-8 * abs(z)
    assert abs(doc_moran["p_value"] - p) <= 1e-8 * max(p, 1e-300) or (p < 1e-300 and doc_moran["p_value"] < 1e-290)


def test_nearest_neighbours_row_standardised(tmp_path):
    path, xy, X, y = spatial_data(tmp_path)
    doc = run_fit(path, "--target", "y", "--terms", "a,b", "--spatial-check", "x,yc", "--neighbours", "6")
    W = dense_knn(xy, 6)
    W = W / W.sum(1, keepdims=True)
    moran = doc["spatial"]["moran"]
    assert moran["assumption"] == "regression-residuals" and moran["n"] == len(y)
    check(moran, reference_residual_moran(X, y, W))
    assert moran["statistic"] > 0.2 and moran["p_value"] < 1e-6, "the left-out surface must show"


def test_distance_band_binary(tmp_path):
    path, xy, X, y = spatial_data(tmp_path, n=200, seed=5)
    doc = run_fit(path, "--target", "y", "--terms", "a,b", "--spatial-check", "x,yc", "--band", "0.16",
                  "--binary-weights")
    check(doc["spatial"]["moran"], reference_residual_moran(X, y, dense_band(xy, 0.16)))


def test_without_spatial_pattern_the_test_is_quiet(tmp_path):
    rng = np.random.default_rng(3)
    n = 300
    xy = rng.uniform(0, 1, (n, 2))
    a = rng.normal(0, 1, n)
    y = 1 + a + rng.normal(0, 1, n)
    path = write_csv(tmp_path / "flat.csv", {"y": y, "a": a, "x": xy[:, 0], "yc": xy[:, 1]})
    doc = run_fit(path, "--target", "y", "--terms", "a", "--spatial-check", "x,yc")
    W = dense_knn(xy, 8)
    W = W / W.sum(1, keepdims=True)
    check(doc["spatial"]["moran"], reference_residual_moran(np.column_stack([np.ones(n), a]), y, W))
    assert doc["spatial"]["moran"]["p_value"] > 0.01


def test_intercept_only_reduces_to_the_normality_moments(tmp_path):
    """With only a constant, the residuals are deviations from the mean and the
    regression moments equal the normality moments (Cliff & Ord 1981, 8.3)."""
    path, xy, _, y = spatial_data(tmp_path, n=150, seed=9)
    doc = run_fit(path, "--target", "y", "--spatial-check", "x,yc", "--neighbours", "4")
    W = dense_knn(xy, 4)
    W = W / W.sum(1, keepdims=True)
    statistic, expected, variance = reference_normality_moran(y, W)
    moran = doc["spatial"]["moran"]
    assert abs(moran["statistic"] - statistic) <= 1e-10 * abs(statistic)
    assert abs(moran["expected"] - expected) <= 1e-12
    assert abs(moran["variance"] - variance) <= 1e-9 * variance


def test_refusals_are_plain(tmp_path):
    path, *_ = spatial_data(tmp_path, n=40)
    r = run_raw("fit", str(path), "--target", "y", "--terms", "a", "--spatial-check", "x,yc", "--band", "0.01")
    assert r.returncode != 0 and "no neighbour within 0.01" in r.stderr, r.stderr
    r = run_raw("fit", str(path), "--target", "y", "--terms", "a", "--spatial-check", "x,nope")
    assert r.returncode != 0 and "nope" in r.stderr, r.stderr
    r = run_raw("fit", str(path), "--target", "y", "--terms", "a", "--neighbours", "5")
    assert r.returncode != 0 and "--spatial-check" in r.stderr, r.stderr
