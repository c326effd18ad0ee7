"""Robust covariance estimators against a direct numpy implementation of the formulas.

Sources:
- HC0: White (1980), Econometrica 48, 817-838.
- HC1-HC3: MacKinnon & White (1985), J. Econometrics 29, 305-325; Long & Ervin (2000),
  The American Statistician 54, 217-224.
- Cluster-robust with small-sample factor G/(G-1) * (n-1)/(n-k) and t on G-1 df:
  Cameron & Miller (2015), J. Human Resources 50, 317-372.
"""
import numpy as np
import pytest
from scipy import stats

from conftest import run_fit


def sandwich_parts(X, y):
    bread = np.linalg.inv(X.T @ X)
    beta = bread @ X.T @ y
    u = y - X @ beta
    h = np.einsum("ij,jk,ik->i", X, bread, X)
    return bread, beta, u, h


@pytest.mark.parametrize("kind", ["hc0", "hc1", "hc2", "hc3"])
def test_heteroskedasticity_consistent(heteroskedastic_data, kind):
    path, X, y, _, _ = heteroskedastic_data
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2", "--cov", kind)
    bread, beta, u, h = sandwich_parts(X, y)
    n, k = X.shape
    omega = {
        "hc0": u ** 2,
        "hc1": u ** 2 * n / (n - k),
        "hc2": u ** 2 / (1 - h),
        "hc3": u ** 2 / (1 - h) ** 2,
    }[kind]
    V = bread @ (X.T * omega) @ X @ bread
    se = np.sqrt(np.diag(V))
    assert doc["covariance"] == kind.upper()
    for j, c in enumerate(doc["coefficients"]):
        assert np.isclose(c["std_error"], se[j], rtol=1e-10), (kind, j)
        assert np.isclose(c["p_value"], 2 * stats.t.sf(abs(beta[j] / se[j]), n - k), rtol=1e-8)
    # Overall test under a robust covariance is the Wald F on the slopes.
    b2 = beta[1:]
    wald = b2 @ np.linalg.solve(V[1:, 1:], b2) / (k - 1)
    assert np.isclose(doc["f_statistic"], wald, rtol=1e-9)


def test_cluster_robust(heteroskedastic_data):
    path, X, y, _, cluster = heteroskedastic_data
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2", "--cluster", "g")
    bread, beta, u, _ = sandwich_parts(X, y)
    n, k = X.shape
    groups = np.unique(cluster)
    G = len(groups)
    meat = np.zeros((k, k))
    for g in groups:
        s = X[cluster == g].T @ u[cluster == g]
        meat += np.outer(s, s)
    V = G / (G - 1) * (n - 1) / (n - k) * bread @ meat @ bread
    se = np.sqrt(np.diag(V))
    assert doc["clusters"] == G
    crit = stats.t.ppf(0.975, G - 1)
    for j, c in enumerate(doc["coefficients"]):
        assert np.isclose(c["std_error"], se[j], rtol=1e-10)
        assert np.isclose(c["p_value"], 2 * stats.t.sf(abs(beta[j] / se[j]), G - 1), rtol=1e-8)
        assert np.isclose(c["ci_high"], beta[j] + crit * se[j], rtol=1e-10)


def test_weighted_hc1(heteroskedastic_data):
    """Robust errors of a weighted fit apply the formulas to the sqrt(w)-scaled rows."""
    path, X, y, w, _ = heteroskedastic_data
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2", "--weights", "w", "--cov", "hc1")
    sw = np.sqrt(w)
    Xw, yw = X * sw[:, None], y * sw
    bread, beta, u, _ = sandwich_parts(Xw, yw)
    n, k = X.shape
    V = n / (n - k) * bread @ (Xw.T * u ** 2) @ Xw @ bread
    for j, c in enumerate(doc["coefficients"]):
        assert np.isclose(c["std_error"], np.sqrt(V[j, j]), rtol=1e-10)
