"""Nested-model F and likelihood-ratio tests against high-precision references.

Source: NIST StRD Longley data (certified for the full model); the restricted
model (Year dropped) has no certified values, so both residual sums of squares
are recomputed with mpmath at 50 significant digits (Householder QR, mp.qr_solve),
and F = ((RSS_r - RSS_f)/q)/(RSS_f/(n - k_f)), LR = n ln(RSS_r/RSS_f)
(Seber & Lee, Linear Regression Analysis, 2nd ed., sec. 4.3; Wilks 1938).
"""
import csv
import json

import mpmath as mp
import numpy as np
import pytest
from scipy import stats

from conftest import require_nist, run_raw



def rss_mp(rows, columns):
    mp.mp.dps = 50
    X = mp.matrix([[mp.mpf(1)] + [mp.mpf(r[c]) for c in columns] for r in rows])
    y = mp.matrix([mp.mpf(r["y"]) for r in rows])
    b, _ = mp.qr_solve(X, y)
    resid = y - X * b
    return sum(v * v for v in resid)


def test_nested_f_on_longley_matches_mpmath():
    LONGLEY = require_nist("Longley.csv")
    rows = list(csv.DictReader(open(LONGLEY)))
    full = ["x1", "x2", "x3", "x4", "x5", "x6"]
    restricted = full[:-1]
    rss_f = rss_mp(rows, full)
    rss_r = rss_mp(rows, restricted)
    n, k_f, q = len(rows), 7, 1
    F = ((rss_r - rss_f) / q) / (rss_f / (n - k_f))
    LR = n * mp.log(rss_r / rss_f)
    r = run_raw("compare", str(LONGLEY), "--target", "y", "--model", ",".join(restricted),
                "--model", ",".join(full), "--format", "json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    test = doc["nested"][0]["test"]
    assert abs(test["f_statistic"] - float(F)) <= 1e-10 * float(F)
    assert abs(test["lr_statistic"] - float(LR)) <= 1e-10 * float(LR)
    assert abs(test["rss_full"] - float(rss_f)) <= 1e-10 * float(rss_f)
    assert np.isclose(test["f_p_value"], stats.f.sf(float(F), q, n - k_f), rtol=1e-8)
    assert np.isclose(test["lr_p_value"], stats.chi2.sf(float(LR), q), rtol=1e-8)


def test_non_nested_models_are_refused(tmp_path):
    LONGLEY = require_nist("Longley.csv")
    r = run_raw("compare", str(LONGLEY), "--target", "y", "--model", "x1,x2", "--model", "x3,x4,x5",
                "--format", "json")
    assert r.returncode == 0, r.stderr
    nested = json.loads(r.stdout)["nested"][0]
    assert "not nested" in nested["not_comparable"]


def test_cross_validation_matches_numpy_on_the_same_folds(tmp_path):
    """Errors per fold recomputed with numpy from the folds our JSON reports as sizes,
    using the same order-independent fold rule (SHA-256 of seed and row key)."""
    import hashlib
    rng = np.random.default_rng(3)
    n = 60
    x = rng.uniform(0, 5, n)
    y = 2 + 3 * x + rng.normal(0, 1, n)
    ids = [f"id{i:03d}" for i in range(n)]
    p = tmp_path / "cv.csv"
    with open(p, "w") as f:
        f.write("id,y,x\n")
        for i in range(n):
            f.write(f"{ids[i]},{float(y[i])!r},{float(x[i])!r}\n")
    seed, k = 11, 4
    r = run_raw("compare", str(p), "--target", "y", "--model", "x", "--folds", str(k), "--seed", str(seed),
                "--id", "id", "--format", "json")
    assert r.returncode == 0, r.stderr
    result = json.loads(r.stdout)["cross_validation"][0]["result"]
    keyed = sorted(range(n), key=lambda i: (hashlib.sha256(seed.to_bytes(8, "little") + ids[i].encode()).digest(), ids[i]))
    for fold in range(k):
        test = sorted(i for pos, i in enumerate(keyed) if pos % k == fold)
        train = sorted(set(range(n)) - set(test))
        X = np.column_stack([np.ones(len(train)), x[train]])
        b, *_ = np.linalg.lstsq(X, y[train], rcond=None)
        pred = b[0] + b[1] * x[test]
        err = y[test] - pred
        score = result["scores"][fold]
        assert score["n_test"] == len(test)
        assert np.isclose(score["rmse"], np.sqrt((err ** 2).mean()), rtol=1e-10)
        assert np.isclose(score["mae"], np.abs(err).mean(), rtol=1e-10)
        assert np.isclose(score["mape"], 100 * np.abs(err / y[test]).mean(), rtol=1e-10)
