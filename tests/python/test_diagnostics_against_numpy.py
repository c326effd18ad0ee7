"""Diagnostics against direct numpy/scipy implementations of the published formulas.

Sources (formula and where it is published):
- Leverage, standardized and studentized residuals, Cook's distance, DFFITS, DFBETAS:
  Belsley, Kuh & Welsch (1980), Regression Diagnostics, ch. 2; Cook (1977), Technometrics 19.
- Breusch & Pagan (1979), Econometrica 47; Koenker (1981), J. Econometrics 17; White (1980).
- Jarque & Bera (1980): checked against scipy.stats.jarque_bera.
- Durbin & Watson (1950, 1971): statistic, exact moments of d under independence; the
  p-value approximation (beta matched to the two moments) is also checked against a
  Monte Carlo estimate of the exact null distribution.
- Ramsey (1969) RESET with fitted-value powers 2 and 3.
- VIF = 1/(1 - R_j^2); GVIF = det(R11) det(R22) / det(R) (Fox & Monette 1992, JASA 87).
- Published worked example: VIFs of the Longley (1967) data, as widely reprinted in
  regression textbooks (values recalled from memory, hence the 1e-3 tolerance).
"""
import json
import pathlib

import numpy as np
import pytest
from scipy import stats

from conftest import require_nist, run_fit, write_csv



def diagnosed(path, *args):
    return run_fit(path, *args, "--diagnose", "--influence")


def ols_parts(X, y):
    C = np.linalg.inv(X.T @ X)
    b = C @ X.T @ y
    e = y - X @ b
    n, k = X.shape
    s2 = e @ e / (n - k)
    h = np.einsum("ij,jk,ik->i", X, C, X)
    return C, b, e, s2, h


@pytest.fixture
def data(tmp_path):
    rng = np.random.default_rng(99)
    n = 90
    x1 = rng.uniform(0, 10, n)
    x2 = rng.normal(0, 1, n) + 0.3 * x1
    g = rng.choice(["p", "q", "r"], n)
    y = 1 + 0.5 * x1 + 2 * x2 + (g == "q") * 0.7 + rng.normal(0, 0.2 + 0.1 * x1, n)
    y[7] += 6.0  # one gross error so that flags and influence have something to find
    path = write_csv(tmp_path / "d.csv", {"y": y, "x1": x1, "x2": x2, "g": list(g)})
    X = np.column_stack([np.ones(n), x1, x2])
    return path, X, y, g


def test_influence_measures(data):
    path, X, y, _ = data
    doc = diagnosed(path, "--target", "y", "--terms", "x1,x2")
    C, b, e, s2, h = ols_parts(X, y)
    n, k = X.shape
    r = e / np.sqrt(s2 * (1 - h))
    s2_del = ((n - k) * s2 - e ** 2 / (1 - h)) / (n - k - 1)
    t = e / np.sqrt(s2_del * (1 - h))
    cook = r ** 2 * h / (k * (1 - h))
    dffits = t * np.sqrt(h / (1 - h))
    dfbetas = (X @ C) * (e / (1 - h))[:, None] / (np.sqrt(s2_del)[:, None] * np.sqrt(np.diag(C))[None, :])
    rows = doc["influence"]["rows"]
    assert len(rows) == n
    for i, row in enumerate(rows):
        assert row["row"] == i + 1
        assert np.isclose(row["leverage"], h[i], rtol=1e-10)
        assert np.isclose(row["standardized"], r[i], rtol=1e-9)
        assert np.isclose(row["studentized"], t[i], rtol=1e-9)
        assert np.isclose(row["cooks_distance"], cook[i], rtol=1e-9)
        assert np.isclose(row["dffits"], dffits[i], rtol=1e-9)
    assert np.allclose(np.array(doc["influence"]["dfbetas"], dtype=float), dfbetas, rtol=1e-8, atol=1e-12)


def test_flagged_rows_use_the_common_practice_cutoffs(data):
    path, X, y, _ = data
    doc = diagnosed(path, "--target", "y", "--terms", "x1,x2")
    C, b, e, s2, h = ols_parts(X, y)
    n, k = X.shape
    s2_del = ((n - k) * s2 - e ** 2 / (1 - h)) / (n - k - 1)
    t = e / np.sqrt(s2_del * (1 - h))
    cook = (e / np.sqrt(s2 * (1 - h))) ** 2 * h / (k * (1 - h))
    expected = {i + 1 for i in range(n) if abs(t[i]) > 3 or h[i] > 2 * k / n or cook[i] > 4 / n}
    flagged = {r["row"] for r in doc["diagnostics"]["flagged_rows"]["rows"]}
    assert flagged == expected and 8 in flagged


def find(doc, name):
    return next(t for t in doc["diagnostics"]["tests"] if t["name"] == name)


def test_heteroskedasticity_tests(data):
    path, X, y, _ = data
    doc = diagnosed(path, "--target", "y", "--terms", "x1,x2")
    _, _, e, _, _ = ols_parts(X, y)
    n = len(y)

    def aux(Z, v):
        beta, *_ = np.linalg.lstsq(Z, v, rcond=None)
        fitted = Z @ beta
        return ((fitted - v.mean()) ** 2).sum(), 1 - ((v - fitted) ** 2).sum() / ((v - v.mean()) ** 2).sum()

    g = e ** 2 / (e @ e / n)
    ess, _ = aux(X, g)
    bp = find(doc, "Breusch–Pagan")
    assert np.isclose(bp["statistic"], ess / 2, rtol=1e-9)
    assert np.isclose(bp["p_value"], stats.chi2.sf(ess / 2, 2), rtol=1e-8)
    _, r2 = aux(X, e ** 2)
    koenker = find(doc, "Breusch–Pagan (studentized)")
    assert np.isclose(koenker["statistic"], n * r2, rtol=1e-9)
    x1, x2 = X[:, 1], X[:, 2]
    W = np.column_stack([X, x1 * x1, x1 * x2, x2 * x2])
    _, r2w = aux(W, e ** 2)
    white = find(doc, "White")
    assert np.isclose(white["statistic"], n * r2w, rtol=1e-9)
    assert white["df"] == [5.0]
    assert np.isclose(white["p_value"], stats.chi2.sf(n * r2w, 5), rtol=1e-8)


def test_jarque_bera_matches_scipy(data):
    path, X, y, _ = data
    doc = diagnosed(path, "--target", "y", "--terms", "x1,x2")
    _, _, e, _, _ = ols_parts(X, y)
    ref = stats.jarque_bera(e)
    jb = find(doc, "Jarque–Bera")
    assert np.isclose(jb["statistic"], ref.statistic, rtol=1e-9)
    assert np.isclose(jb["p_value"], ref.pvalue, rtol=1e-7, atol=1e-300)


def durbin_watson_moments(X):
    n, k = X.shape
    A = 2 * np.eye(n) - np.eye(n, k=1) - np.eye(n, k=-1)
    A[0, 0] = A[-1, -1] = 1
    M = np.eye(n) - X @ np.linalg.inv(X.T @ X) @ X.T
    MA = M @ A
    mean = np.trace(MA) / (n - k)
    var = 2 * (np.trace(MA @ MA) - np.trace(MA) ** 2 / (n - k)) / ((n - k) * (n - k + 2))
    return mean, var, M, A


def test_durbin_watson_statistic_and_p_value(data):
    path, X, y, _ = data
    doc = diagnosed(path, "--target", "y", "--terms", "x1,x2")
    _, _, e, _, _ = ols_parts(X, y)
    d = ((e[1:] - e[:-1]) ** 2).sum() / (e @ e)
    dw = find(doc, "Durbin–Watson")
    assert np.isclose(dw["statistic"], d, rtol=1e-10)
    mean, var, M, A = durbin_watson_moments(X)
    mu, v = mean / 4, var / 16
    common = mu * (1 - mu) / v - 1
    lower = stats.beta.cdf(d / 4, mu * common, (1 - mu) * common)
    assert np.isclose(dw["p_value"], 2 * min(lower, 1 - lower), rtol=1e-7)
    # The approximation against the exact null distribution, by simulation.
    rng = np.random.default_rng(5)
    eps = rng.normal(size=(20000, len(y))) @ M
    sims = ((eps[:, 1:] - eps[:, :-1]) ** 2).sum(axis=1) / (eps ** 2).sum(axis=1)
    lower_mc = (sims <= d).mean()
    assert abs(2 * min(lower_mc, 1 - lower_mc) - dw["p_value"]) < 0.03


def test_reset(data):
    path, X, y, _ = data
    doc = diagnosed(path, "--target", "y", "--terms", "x1,x2")
    _, b, e, _, _ = ols_parts(X, y)
    fitted = X @ b
    Xa = np.column_stack([X, fitted ** 2, fitted ** 3])
    _, _, ea, _, _ = ols_parts(Xa, y)
    n = len(y)
    F = ((e @ e - ea @ ea) / 2) / (ea @ ea / (n - 5))
    reset = find(doc, "RESET")
    assert np.isclose(reset["statistic"], F, rtol=1e-8)
    assert np.isclose(reset["p_value"], stats.f.sf(F, 2, n - 5), rtol=1e-7)


def test_vif_and_gvif(data):
    path, X, y, g = data
    doc = diagnosed(path, "--target", "y", "--terms", "x1,x2", "--category", "g")
    # Reference level = most frequent level.
    levels, counts = np.unique(g, return_counts=True)
    ref = levels[np.argmax(counts)]
    D = np.column_stack([(g == lv).astype(float) for lv in levels if lv != ref])
    Z = np.column_stack([X[:, 1:], D])
    R = np.corrcoef(Z, rowvar=False)
    terms = {t["term"]: t for t in doc["diagnostics"]["collinearity"]["terms"]}
    for j, name in enumerate(["x1", "x2"]):
        others = [i for i in range(Z.shape[1]) if i != j]
        gvif = np.linalg.det(R[[j]][:, [j]]) * np.linalg.det(R[np.ix_(others, others)]) / np.linalg.det(R)
        assert np.isclose(terms[name]["gvif"], gvif, rtol=1e-9)
        # One column: GVIF equals 1/(1 - R_j^2).
        beta, *_ = np.linalg.lstsq(np.column_stack([np.ones(len(y)), np.delete(Z, j, axis=1)]), Z[:, j], rcond=None)
        resid = Z[:, j] - np.column_stack([np.ones(len(y)), np.delete(Z, j, axis=1)]) @ beta
        r2 = 1 - resid @ resid / ((Z[:, j] - Z[:, j].mean()) ** 2).sum()
        assert np.isclose(terms[name]["gvif"], 1 / (1 - r2), rtol=1e-9)
    block = [2, 3]
    rest = [0, 1]
    gvif_g = np.linalg.det(R[np.ix_(block, block)]) * np.linalg.det(R[np.ix_(rest, rest)]) / np.linalg.det(R)
    assert terms["g"]["df"] == 2
    assert np.isclose(terms["g"]["gvif"], gvif_g, rtol=1e-9)
    assert np.isclose(terms["g"]["interval_widening"], gvif_g ** (1 / 4), rtol=1e-9)


def test_longley_vifs_match_published_values():
    LONGLEY = require_nist("Longley.csv")
    doc = diagnosed(LONGLEY, "--target", "y", "--terms", "x1,x2,x3,x4,x5,x6")
    published = [135.53, 1788.51, 33.62, 3.59, 399.15, 758.98]  # recalled from memory
    got = [t["gvif"] for t in doc["diagnostics"]["collinearity"]["terms"]]
    assert np.allclose(got, published, rtol=1e-3)
