"""The appeal pages (`plumbline appeal --format json`) against numpy.

Reference: the least-squares fit of the same design with numpy's lstsq, and the
definitions the pages state (analysis/src/appeal):

* the value: exp(x0'b) times Duan's smearing factor mean(exp(r)) for a logged
  target (Duan 1983), x0'b otherwise, with the parcel's date set to the valuation date;
* the build-up from the typical home r (median of each numeric input, most common
  category level, the valuation date): each term moves the running value by
  exp(b_t'(x0_t - r_t)) (logged) or by b_t'(x0_t - r_t) (additive); the amounts sum
  to value(x0) - value(r);
* a comparable sale s: adjusted price = price * exp(b'(x0 - x_s)) (logged) or
  price + b'(x0 - x_s) (additive).

The data are invented: sales of an imaginary town with a price surface of our choosing.
"""
import json

import numpy as np
import pytest

from conftest import run_raw, write_csv

LEVELS = ["Ashgrove", "Brindle", "Copperlea"]


def make_town(tmp_path, n=260, seed=29):
    rng = np.random.default_rng(seed)
    area = np.round(np.exp(rng.normal(7.4, 0.25, n)))
    age = rng.integers(0, 90, n).astype(float)
    district = rng.choice(LEVELS, n, p=[0.45, 0.35, 0.20])
    month = rng.integers(0, 24, n)
    effect = {"Ashgrove": 0.0, "Brindle": 0.12, "Copperlea": -0.08}
    log_price = 5.9 + 0.7 * np.log(area) - 0.004 * age + np.array([effect[d] for d in district]) \
        + 0.005 * month + rng.normal(0, 0.09, n)
    price = np.round(np.exp(log_price), -2)
    dates = [f"{2023 + m // 12}-{m % 12 + 1:02d}-01" for m in month]
    ids = [f"AG-{i:04d}" for i in range(n)]
    sales = tmp_path / "sales.csv"
    write_csv(sales, {"parcel_id": ids, "sale_date": dates, "sale_price": price, "area": area, "age": age,
                      "district": list(district)})
    parcels = tmp_path / "parcels.csv"
    subjects = {"parcel_id": ["SUB-1", "SUB-2", "SUB-3"], "sale_date": ["2025-01-01"] * 3,
                "area": [1650.0, 2480.0, 1190.0], "age": [12.0, 64.0, 33.0],
                "district": ["Brindle", "Ashgrove", "Copperlea"]}
    write_csv(parcels, subjects)
    return sales, parcels, dict(ids=ids, dates=dates, month=month.astype(float), price=price, area=area, age=age,
                                district=district), subjects


def design(area, age, district, month, logged_area):
    district = np.asarray(district)
    a = np.log(area) if logged_area else np.asarray(area, float)
    cols = [np.ones(len(a)), a, np.asarray(age, float)]
    cols += [(district == level).astype(float) for level in LEVELS[1:]]  # reference: Ashgrove
    cols.append(np.asarray(month, float))
    return np.column_stack(cols)


# Design columns of each model term of the design above, by the term's label.
SPANS = {"area": (1, 2), "log(area)": (1, 2), "age": (2, 3), "district": (3, 5),
         "sale_date (months since 2023-01-01)": (5, 6)}


def appeal(sales, parcels, logged, *extra):
    flags = ["--target", "sale_price", "--category", "district",
             "--reference", "district=Ashgrove", "--date-term", "months:sale_date:2023-01-01"]
    flags += ["--log-target", "--log", "area", "--terms", "age"] if logged else ["--terms", "area,age"]
    r = run_raw("appeal", str(sales), *flags, "--id", "parcel_id", "--parcels", str(parcels),
                "--parcel", "SUB-1", "--parcel", "SUB-2", "--parcel", "SUB-3", "--valuation-date", "2025-01-01",
                "--format", "json", *extra)
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["schema"] == "plumbline.parcel-pages" and doc["schema_version"] == 1
    return doc


def close(a, b, rel=1e-9):
    return abs(a - b) <= rel * max(abs(b), 1.0)


@pytest.mark.parametrize("logged", [True, False], ids=["log model", "additive model"])
def test_values_build_ups_and_adjusted_prices_match_numpy(tmp_path, logged):
    sales, parcels, s, subjects = make_town(tmp_path)
    X = design(s["area"], s["age"], s["district"], s["month"], logged)
    y = np.log(s["price"]) if logged else s["price"]
    b, *_ = np.linalg.lstsq(X, y, rcond=None)
    smear = np.mean(np.exp(y - X @ b)) if logged else None

    def value(row):
        fitted = row @ b
        return np.exp(fitted) * smear if logged else fitted

    # The typical home: median area and age, the most common district, the valuation date (month 24).
    counts = {level: int(np.sum(s["district"] == level)) for level in LEVELS}
    common = max(LEVELS, key=lambda level: (counts[level], -LEVELS.index(level)))
    r = design([np.median(s["area"])], [np.median(s["age"])], [common], [24.0], logged)[0]

    doc = appeal(sales, parcels, logged)
    assert doc["multiplicative"] == logged
    for k, page in enumerate(doc["pages"]):
        x0 = design([subjects["area"][k]], [subjects["age"][k]], [subjects["district"][k]], [24.0], logged)[0]
        assert close(page["value"], value(x0)), (page["value"], value(x0))
        build = page["build_up"]
        assert close(build["reference"]["value"], value(r))
        running = value(r)
        assert sorted(step["term"] for step in build["steps"]) == sorted(
            ["log(area)" if logged else "area", "age", "district", "sale_date (months since 2023-01-01)"])
        for step in build["steps"]:
            lo, hi = SPANS[step["term"]]
            move = b[lo:hi] @ (x0[lo:hi] - r[lo:hi])
            assert close(step["model_move"], move, 1e-8), (step, move)
            nxt = running * np.exp(move) if logged else running + move
            assert close(step["amount"], nxt - running, 1e-8) and close(step["running_value"], nxt)
            running = nxt
        total = build["reference"]["value"] + sum(step["amount"] for step in build["steps"])
        assert close(total, page["value"]), "the amounts sum to the value"

        chosen = page["comparables"]["chosen"]
        assert chosen, "some sale qualifies"
        for sale in chosen:
            i = sale["row"] - 1
            xs = X[i]
            expected = s["price"][i] * np.exp(b @ (x0 - xs)) if logged else s["price"][i] + b @ (x0 - xs)
            assert close(sale["adjusted_price"], expected), (sale["adjusted_price"], expected)
            assert close(sale["price"] + sum(a["amount"] for a in sale["adjustments"]), sale["adjusted_price"])
            assert sale["adjustments"][0]["time_trend"], "the sale is moved to the valuation date first"
            gross = sum(abs(a["amount"]) for a in sale["adjustments"]) / sale["price"]
            assert close(sale["gross_share"], gross)
        grosses = [sale["gross_share"] for sale in chosen]
        assert grosses == sorted(grosses), "least adjusted first"


def test_an_unknown_parcel_and_a_missing_id_column_are_refused(tmp_path):
    sales, parcels, _, _ = make_town(tmp_path, n=60)
    r = run_raw("appeal", str(sales), "--target", "sale_price", "--terms", "area,age", "--id", "parcel_id",
                "--parcels", str(parcels), "--parcel", "SUB-9", "--valuation-date", "2025-01-01")
    assert r.returncode != 0 and "SUB-9" in r.stderr, r.stderr
    r = run_raw("appeal", str(sales), "--target", "sale_price", "--terms", "area,age",
                "--parcels", str(parcels), "--parcel", "SUB-1", "--valuation-date", "2025-01-01")
    assert r.returncode != 0 and "--id" in r.stderr, r.stderr
