"""Term coding and transforms against design matrices built directly in numpy.

Sources: indicator (treatment) coding and products of columns for interactions are
the textbook definitions (e.g. Weisberg, Applied Linear Regression, 4th ed., ch. 5);
orthogonal polynomials span the same column space as raw powers (Forsythe 1957),
so fitted values and R^2 must agree with a raw-power fit computed by numpy.
"""
import numpy as np

from conftest import run_fit, write_csv


def lstsq_fit(X, y):
    beta, *_ = np.linalg.lstsq(X, y, rcond=None)
    resid = y - X @ beta
    tss = ((y - y.mean()) ** 2).sum()
    return beta, 1 - resid @ resid / tss


def market(tmp_path, n=150, seed=11):
    rng = np.random.default_rng(seed)
    area = rng.uniform(700, 3500, n)
    age = rng.integers(0, 90, n).astype(float)
    district = rng.choice(["Ashby", "Brook", "Crest"], n, p=[0.5, 0.3, 0.2])
    effect = {"Ashby": 0.0, "Brook": 0.12, "Crest": -0.08}
    logp = 11 + 0.0003 * area - 0.003 * age + np.array([effect[d] for d in district]) + rng.normal(0, 0.1, n)
    path = write_csv(tmp_path / "m.csv", {"price": np.exp(logp), "area": area, "age": age, "district": list(district)})
    return path, area, age, district, logp


def test_category_and_interaction_coding(tmp_path):
    path, area, age, district, logp = market(tmp_path)
    doc = run_fit(path, "--target", "price", "--log-target", "--terms", "area", "--category", "district",
                  "--interact", "area*district")
    # Reference = most frequent level (Ashby); indicators for Brook and Crest in level order.
    brook = (district == "Brook").astype(float)
    crest = (district == "Crest").astype(float)
    X = np.column_stack([np.ones(len(area)), area, brook, crest, area * brook, area * crest])
    beta, r2 = lstsq_fit(X, logp)
    terms = [c["term"] for c in doc["coefficients"]]
    assert terms == ["intercept", "area", "district=Brook", "district=Crest", "area*district=Brook",
                     "area*district=Crest"]
    for c, b in zip(doc["coefficients"], beta):
        assert np.isclose(c["estimate"], b, rtol=1e-9, atol=1e-12)
    assert np.isclose(doc["r_squared"], r2, rtol=1e-12)


def test_no_intercept_codes_every_level(tmp_path):
    path, area, age, district, logp = market(tmp_path)
    doc = run_fit(path, "--target", "price", "--log-target", "--category", "district", "--terms", "area",
                  "--no-intercept")
    X = np.column_stack([area] + [(district == lv).astype(float) for lv in ["Ashby", "Brook", "Crest"]])
    beta, _ = lstsq_fit(X, logp)
    assert [c["term"] for c in doc["coefficients"]] == ["area", "district=Ashby", "district=Brook", "district=Crest"]
    for c, b in zip(doc["coefficients"], beta):
        assert np.isclose(c["estimate"], b, rtol=1e-9)


def test_orthogonal_and_raw_polynomials_span_the_same_space(tmp_path):
    path, area, age, district, logp = market(tmp_path)
    X = np.column_stack([np.ones(len(age)), age, age ** 2, age ** 3])
    _, r2 = lstsq_fit(X, logp)
    raw = run_fit(path, "--target", "price", "--log-target", "--poly", "age:3")
    orth = run_fit(path, "--target", "price", "--log-target", "--orthogonal-poly", "age:3")
    assert np.isclose(raw["r_squared"], r2, rtol=1e-12)
    assert np.isclose(orth["r_squared"], r2, rtol=1e-12)
    # Orthogonal columns are orthonormal and orthogonal to the constant, so their
    # estimates equal Q'y for the numpy QR of the centred powers (up to sign).
    Q, _ = np.linalg.qr(X)
    qty = Q.T @ logp
    for c, q in zip(orth["coefficients"][1:], qty[1:]):
        assert np.isclose(abs(c["estimate"]), abs(q), rtol=1e-9)


def test_log_center_and_standardize(tmp_path):
    path, area, age, district, logp = market(tmp_path)
    doc = run_fit(path, "--target", "price", "--log-target", "--log", "area", "--center", "age")
    X = np.column_stack([np.ones(len(area)), np.log(area), age - age.mean()])
    beta, _ = lstsq_fit(X, logp)
    assert [c["term"] for c in doc["coefficients"]] == ["intercept", "log(area)", "age (centred)"]
    for c, b in zip(doc["coefficients"], beta):
        assert np.isclose(c["estimate"], b, rtol=1e-10)
    std = run_fit(path, "--target", "price", "--log-target", "--standardize", "age")
    Xs = np.column_stack([np.ones(len(age)), (age - age.mean()) / age.std(ddof=1)])
    beta_s, _ = lstsq_fit(Xs, logp)
    assert np.isclose(std["coefficients"][1]["estimate"], beta_s[1], rtol=1e-10)


def test_dropped_rows_are_counted_per_column(tmp_path):
    p = tmp_path / "gaps.csv"
    p.write_text("y,a,b\n1,1,\n2,,5\n3,3,\n4,4,4\n5,5,6\n7,6,2\n8,8,1\n")
    doc = run_fit(p, "--target", "y", "--terms", "a,b")
    assert doc["n_obs"] == 4 and doc["n_dropped"] == 3
    assert doc["dropped_by_column"] == [["a", 1], ["b", 2]]
