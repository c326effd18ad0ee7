"""Ratio statistics by price tier and value-accuracy figures against a direct
numpy implementation, and constructed cases whose answers are known.

Sources: tier statistics are the ratio-study formulas of the IAAO Standard on
Ratio Studies (2013) as summarised in shared/reference/ratio-study.md, applied
to quantile groups (numpy's array_split of a stable sort by the tier basis).
The share within +/-10 % and +/-20 % of price and the forecast standard
deviation (sample sd of ln(value/price)) are the AVM-testing figures described
in the IAAO Standard on Automated Valuation Models (2018) -- recalled from
memory; the bands are common practice.
"""
import json

import numpy as np

from conftest import run_raw, write_csv


def ratio(path, *args):
    r = run_raw("ratio", str(path), "--value", "value", "--price", "price", *args, "--format", "json")
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout)


def tier_reference(a, s, tiers, basis):
    r = a / s
    med = np.median(r)
    key = {"price": s, "value": a, "blend": 0.5 * s + 0.5 * a / med}[basis]
    out = []
    for members in np.array_split(np.argsort(key, kind="stable"), tiers):
        rt, at, st = r[members], a[members], s[members]
        m = np.median(rt)
        out.append({"lower": key[members].min(), "upper": key[members].max(), "count": len(members),
                    "median": m, "cod": 100 * np.abs(rt - m).mean() / m,
                    "prd": rt.mean() / (at.sum() / st.sum())})
    return out


def accuracy_reference(a, s):
    r = a / s
    logs = np.log(r)
    errors = 100 * (r - 1)
    edges = [-np.inf, -20, -10, -5, 5, 10, 20, np.inf]
    counts = []
    for lo, hi in zip(edges[:-1], edges[1:]):
        # Closed on the side nearer zero.
        above = errors >= lo if lo < 0 else errors > lo
        below = errors <= hi if hi > 0 else errors < hi
        counts.append(int((above & below).sum()))
    return {"within_10": np.mean(np.abs(r - 1) <= 0.10 + 1e-12), "within_20": np.mean(np.abs(r - 1) <= 0.20 + 1e-12),
            "fsd": logs.std(ddof=1), "mean_log_ratio": logs.mean(),
            "median_absolute_error": np.median(100 * np.abs(r - 1)), "buckets": counts}


def generated(tmp_path, n=503, seed=41):
    rng = np.random.default_rng(seed)
    s = np.round(np.exp(rng.normal(12.7, 0.4, n)), -2)
    # Regressive values: dear homes valued low against cheap ones.
    a = s * np.exp(rng.normal(0.0, 0.11, n)) * (s / np.median(s)) ** -0.06
    return write_csv(tmp_path / "values.csv", {"value": a, "price": s}), a, s


def test_tiers_match_numpy_for_every_basis(tmp_path):
    path, a, s = generated(tmp_path)
    for basis in ("price", "value", "blend"):
        doc = ratio(path, "--no-trim", "--tiers", "5", "--tier-by", basis)
        assert doc["schema_version"] == 2 and doc["tiers"]["basis"] == {"blend": "blend", "price": "sale-price",
                                                                         "value": "value"}[basis]
        ref = tier_reference(a, s, 5, basis)
        for got, want in zip(doc["tiers"]["tiers"], ref):
            assert got["statistics"]["count"] == want["count"]
            for field in ("median", "cod", "prd"):
                assert abs(got["statistics"][field] - want[field]) <= 1e-12 * abs(want[field]), (basis, field)
            assert abs(got["lower"] - want["lower"]) <= 1e-9 * want["lower"]
            assert abs(got["upper"] - want["upper"]) <= 1e-9 * want["upper"]
        spread = ref[-1]["median"] - ref[0]["median"]
        assert abs(doc["tiers"]["median_spread"] - spread) <= 1e-12
    # The regressive values show: the top price tier's median is below the bottom tier's.
    assert ratio(path, "--no-trim", "--tiers", "4", "--tier-by", "blend")["tiers"]["median_spread"] < 0


def test_accuracy_matches_numpy(tmp_path):
    path, a, s = generated(tmp_path, n=800, seed=7)
    doc = ratio(path, "--no-trim", "--accuracy")["accuracy"]
    ref = accuracy_reference(a, s)
    assert doc["count"] == len(a)
    for field in ("within_10", "within_20"):
        assert doc[field] == ref[field]
    for field in ("fsd", "mean_log_ratio", "median_absolute_error"):
        assert abs(doc[field] - ref[field]) <= 1e-12 * abs(ref[field]), field
    assert [b["count"] for b in doc["buckets"]] == ref["buckets"]
    assert sum(b["count"] for b in doc["buckets"]) == len(a)


def test_constructed_cases_with_known_answers(tmp_path):
    # Every value equals its price: all within 10 %, FSD 0, every tier's COD 0
    # and median 1, every sale in the "within 5 %" band.
    s = np.array([100000.0 + 2500 * i for i in range(40)])
    path = write_csv(tmp_path / "exact.csv", {"value": s, "price": s})
    doc = ratio(path, "--no-trim", "--accuracy", "--tiers", "4")
    acc = doc["accuracy"]
    assert acc["within_10"] == 1.0 and acc["within_20"] == 1.0
    assert acc["fsd"] == 0.0 and acc["mean_log_ratio"] == 0.0 and acc["median_absolute_error"] == 0.0
    assert [b["count"] for b in acc["buckets"]] == [0, 0, 0, 40, 0, 0, 0]
    assert all(t["statistics"]["median"] == 1.0 and t["statistics"]["cod"] == 0.0 for t in doc["tiers"]["tiers"])
    assert [t["statistics"]["count"] for t in doc["tiers"]["tiers"]] == [10, 10, 10, 10]

    # Values exactly 15 % over on half the sales and 15 % under on the other half:
    # none within 10 %, all within 20 %, FSD = sd of ln(1.15) and ln(0.85).
    a = np.where(np.arange(40) % 2 == 0, s * 1.15, s * 0.85)
    path = write_csv(tmp_path / "split.csv", {"value": a, "price": s})
    acc = ratio(path, "--no-trim", "--accuracy")["accuracy"]
    assert acc["within_10"] == 0.0 and acc["within_20"] == 1.0
    assert abs(acc["fsd"] - np.std(np.log(a / s), ddof=1)) < 1e-14
    assert [b["count"] for b in acc["buckets"]] == [0, 20, 0, 0, 0, 20, 0]


def test_too_many_tiers_is_refused(tmp_path):
    s = np.linspace(1e5, 2e5, 7)
    path = write_csv(tmp_path / "few.csv", {"value": s, "price": s})
    r = run_raw("ratio", str(path), "--value", "value", "--price", "price", "--no-trim", "--tiers", "4")
    assert r.returncode != 0 and "use fewer tiers" in r.stderr, r.stderr
