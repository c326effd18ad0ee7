"""Models by market area against numpy: each area's fit, the pooled models and the
F tests of equal coefficients, and valuing each parcel by its own area's model.

Source of the test: the F test of equal coefficients across groups, G. C. Chow
(1960), "Tests of equality between sets of coefficients in two linear
regressions", Econometrica 28(3), 591-605, for two groups; F. M. Fisher (1970),
Econometrica 38(2), 361-366, for several groups and the degrees of freedom by
rank (citations recalled from memory). It is the general linear hypothesis test
between nested least-squares fits:

    F = [(RSS_R - sum RSS_g) / (sum k_g - k_R)] / [sum RSS_g / (N - sum k_g)]

implemented here directly with numpy's least squares and scipy's F distribution,
on the demo sales of our documented generator (notebooks-demo/generator).
"""
import csv
import json

import numpy as np
from scipy import stats

from conftest import REPO, run_fit, run_raw

SALES = REPO / "notebooks-demo" / "data" / "sales.csv"
PARCELS = REPO / "notebooks-demo" / "data" / "parcels.csv"
FLAGS = ["--target", "sale_price", "--log-target", "--log", "living_area", "--terms", "age,quality,bathrooms"]


def rows(path):
    with open(path) as f:
        return list(csv.DictReader(f))


def design(records):
    """Intercept, then the terms in the order the fit lists them."""
    x = np.array([[1.0, float(r["age"]), float(r["quality"]), float(r["bathrooms"]),
                   np.log(float(r["living_area"]))] for r in records])
    return x


def lstsq(x, y):
    beta, _, rank, _ = np.linalg.lstsq(x, y, rcond=None)
    resid = y - x @ beta
    return beta, float(resid @ resid), int(rank)


def equality_f(rss_r, k_r, separate):
    rss_u = sum(r for r, _, _ in separate)
    k_u = sum(k for _, k, _ in separate)
    n = sum(m for _, _, m in separate)
    df1, df2 = k_u - k_r, n - k_u
    f = ((rss_r - rss_u) / df1) / (rss_u / df2)
    return f, df1, df2, stats.f.sf(f, df1, df2)


def test_per_area_fits_and_equality_tests_match_numpy():
    document = run_fit(SALES, *FLAGS, "--by", "district")
    assert document["schema"] == "plumbline.stratified-fit"
    records = rows(SALES)
    areas = sorted({r["district"] for r in records})
    separate = []
    for area, stratum in zip(areas, document["strata"]):
        assert stratum["group"] == area
        members = [r for r in records if r["district"] == area]
        x, y = design(members), np.log([float(r["sale_price"]) for r in members])
        beta, rss, rank = lstsq(x, y)
        fit = stratum["fit"]
        got = {c["term"]: c["estimate"] for c in fit["coefficients"]}
        for name, value in zip(["intercept", "age", "quality", "bathrooms", "log(living_area)"], beta):
            assert abs(got[name] - value) <= 1e-9 * max(1.0, abs(value)), (area, name, got[name], value)
        assert abs(fit["ss_residual"] - rss) <= 1e-9 * rss
        separate.append((rss, rank, len(members)))

    x_all = design(records)
    y_all = np.log([float(r["sale_price"]) for r in records])
    _, rss_pooled, k_pooled = lstsq(x_all, y_all)
    dummies = np.array([[1.0 if r["district"] == a else 0.0 for a in areas[1:]] for r in records])
    _, rss_levels, k_levels = lstsq(np.hstack([x_all, dummies]), y_all)

    tests = {t["hypothesis"]: t for t in document["tests"]}
    for hypothesis, (rss_r, k_r) in {"all_coefficients": (rss_pooled, k_pooled),
                                      "slopes_given_levels": (rss_levels, k_levels)}.items():
        f, df1, df2, p = equality_f(rss_r, k_r, separate)
        test = tests[hypothesis]
        assert (test["df_numerator"], test["df_denominator"]) == (df1, df2), hypothesis
        assert abs(test["f_statistic"] - f) <= 1e-7 * f, (hypothesis, test["f_statistic"], f)
        assert abs(test["p_value"] - p) <= 1e-7 * max(p, 1e-300) or (p < 1e-15 and test["p_value"] < 1e-15), \
            (hypothesis, test["p_value"], p)


def test_batches_give_the_same_document_numbers():
    memory = run_fit(SALES, *FLAGS, "--by", "district")
    batched = run_fit(SALES, *FLAGS, "--by", "district", "--batch-rows", "311")
    for a, b in zip(memory["strata"], batched["strata"]):
        for ca, cb in zip(a["fit"]["coefficients"], b["fit"]["coefficients"]):
            assert abs(ca["estimate"] - cb["estimate"]) <= 1e-12 * max(1.0, abs(ca["estimate"])), (a["group"], ca)
            assert abs(ca["std_error"] - cb["std_error"]) <= 1e-12 * abs(ca["std_error"]), (a["group"], ca)


def test_value_by_area_uses_each_area_model_and_flags_an_area_without_one(tmp_path):
    parcels = rows(PARCELS)
    extra = dict(parcels[0], parcel_id="WM-X1", district="Gallowmere")
    path = tmp_path / "parcels.csv"
    with open(path, "w", newline="") as f:
        writer = csv.DictWriter(f, fieldnames=list(parcels[0]))
        writer.writeheader()
        writer.writerows(parcels + [extra])
    out = tmp_path / "values.csv"
    result = run_raw("value", str(SALES), *FLAGS, "--by", "district", "--id", "parcel_id",
                     "--parcels", str(path), "--out", str(out), "--parcel-batch-rows", "700")
    assert result.returncode == 0, result.stderr
    assert "each by its own district's model" in result.stdout and "not appraisals" in result.stdout
    values = rows(out)
    assert len(values) == len(parcels) + 1
    records = rows(SALES)
    for area in sorted({r["district"] for r in records}):
        members = [r for r in records if r["district"] == area]
        beta, _, _ = lstsq(design(members), np.log([float(r["sale_price"]) for r in members]))
        idx = [i for i, p in enumerate(parcels) if p["district"] == area]
        expected = design([parcels[i] for i in idx]) @ beta
        got = np.array([float(values[i]["estimate"]) for i in idx])
        assert np.allclose(got, expected, rtol=1e-10, atol=0), area
        assert all(values[i]["group"] == area for i in idx)
    last = values[-1]
    assert last["id"] == "WM-X1" and last["estimate"] == "" and "no model for district `Gallowmere`" in last["not_valued"]
