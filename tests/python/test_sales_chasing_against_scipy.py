"""The sales-chasing check of `plumbline diff` against scipy and numpy.

Two runs' value rolls are written as `plumbline.value-roll` documents. The
check compares value changes ln(later/earlier) of parcels sold between the runs
with those of unsold parcels by the Mann-Whitney rank-sum test (Mann & Whitney
1947; tie correction as in Conover, Practical Nonparametric Statistics, 3rd
ed., 5.1), checked here against scipy.stats.mannwhitneyu (asymptotic method,
continuity correction), and reports the sold parcels' COD before and after
(IAAO Standard on Ratio Studies 2013 formula; the standard's description of
the sold/unsold comparison is recalled from memory).
"""
import json

import numpy as np
from scipy import stats

from conftest import run_raw


def roll(path, date, values, sales):
    parcels = [{"id": f"P-{i:04d}", "value": float(v), "sale": sales.get(i)} for i, v in enumerate(values)]
    doc = {"schema": "plumbline.value-roll", "schema_version": 1, "valuation_date": date,
           "model": "log(sale_price) on test terms", "parcels_source": "test roll", "sales_source": "test sales",
           "parcels": parcels}
    path.write_text(json.dumps(doc))
    return path


def two_runs(tmp_path, chase):
    rng = np.random.default_rng(2026)
    n = 900
    earlier = np.exp(rng.normal(12.6, 0.35, n))
    sold = rng.choice(n, 120, replace=False)
    # The market rose 6 % since the earlier values were set.
    price = earlier[sold] * np.exp(rng.normal(0.06, 0.12, len(sold)))
    if chase:
        # Only the sold parcels were revalued, each to its own price; the
        # unsold parcels kept last year's values.
        later = earlier * np.exp(rng.normal(0, 0.005, n))
        later[sold] = price
    else:
        # Every parcel revalued with the market, sold or not.
        later = earlier * np.exp(0.06 + rng.normal(0, 0.03, n))
    sales = {int(i): {"date": "2026-02-15", "price": float(p)} for i, p in zip(sold, price)}
    a = roll(tmp_path / "q1.json", "2026-01-01", earlier, {})
    b = roll(tmp_path / "q2.json", "2026-04-01", later, sales)
    return a, b, earlier, later, sold, price


def cod(r):
    m = np.median(r)
    return 100 * np.abs(r - m).mean() / m


def diff(a, b):
    r = run_raw("diff", str(a), str(b), "--format", "json")
    assert r.returncode == 0, r.stderr
    return json.loads(r.stdout)


def check_against_references(report, earlier, later, sold):
    check = report["sales_chasing"]
    changes = np.log(later / earlier)
    mask = np.zeros(len(earlier), bool)
    mask[sold] = True
    ref = stats.mannwhitneyu(changes[mask], changes[~mask], alternative="two-sided", method="asymptotic",
                             use_continuity=True)
    assert check["rank_sum"]["u"] == ref.statistic
    assert abs(check["rank_sum"]["p_value"] - ref.pvalue) <= 1e-10 * max(ref.pvalue, 1e-300) or ref.pvalue < 1e-300
    assert check["sold"]["count"] == mask.sum() and check["unsold"]["count"] == (~mask).sum()
    assert abs(check["sold"]["median_log_change"] - np.median(changes[mask])) < 1e-14
    assert abs(check["unsold"]["mean_log_change"] - changes[~mask].mean()) < 1e-14
    return check


def test_chased_values_are_caught(tmp_path):
    a, b, earlier, later, sold, price = two_runs(tmp_path, chase=True)
    report = diff(a, b)
    assert report["schema_version"] == 3
    check = check_against_references(report, earlier, later, sold)
    assert check["rank_sum"]["p_value"] < 1e-6
    assert abs(check["sold_ratios_earlier"]["cod"] - cod(earlier[sold] / price)) < 1e-10
    assert check["sold_ratios_later"]["cod"] == 0.0
    text = run_raw("diff", str(a), str(b)).stdout
    assert "sign of sales chasing" in text, text


def test_honest_revaluation_passes(tmp_path):
    a, b, earlier, later, sold, price = two_runs(tmp_path, chase=False)
    check = check_against_references(diff(a, b), earlier, later, sold)
    assert check["rank_sum"]["p_value"] > 0.01
    assert abs(check["sold_ratios_later"]["cod"] - cod(later[sold] / price)) < 1e-10
    assert "No sign of sales chasing" in run_raw("diff", str(a), str(b)).stdout


def test_no_sales_between_the_runs_is_said_plainly(tmp_path):
    rng = np.random.default_rng(1)
    values = np.exp(rng.normal(12, 0.3, 50))
    a = roll(tmp_path / "a.json", "2026-01-01", values, {})
    b = roll(tmp_path / "b.json", "2026-04-01", values * 1.01, {})
    report = diff(a, b)
    assert report["sales_chasing"] is None
    assert "found 0 sold" in report["sales_chasing_not_run"]
