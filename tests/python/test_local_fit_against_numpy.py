"""Geographically weighted regression against a numpy implementation of the published
formulas: A. S. Fotheringham, C. Brunsdon and M. Charlton, Geographically Weighted
Regression (Wiley, 2002), ch. 2 —

* beta_i = (X' W_i X)^-1 X' W_i y (eq. 2.7), W_i from the adaptive bisquare kernel
  w_ij = (1 - (d_ij/b_i)^2)^2 for d_ij < b_i, b_i the distance to the N-th nearest sale
  counting sale i itself (eq. 2.10), or the fixed Gaussian exp(-(d_ij/b)^2 / 2) (eq. 2.9);
* the hat matrix S (row i: x_i' (X'W_iX)^-1 X'W_i), tr(S), tr(S'S);
* sigma^2 = RSS / (n - 2 tr S + tr S'S); Var beta_i = sigma^2 C_i C_i', C_i = (X'W_iX)^-1 X'W_i;
* AICc = 2n ln(sigma_ML) + n ln(2 pi) + n (n + tr S) / (n - 2 - tr S), sigma_ML = sqrt(RSS/n)
  (eq. 2.33; Hurvich, Simonoff & Tsai 1998);
* local R^2 = 1 - sum_j w_ij (y_j - x_j' beta_i)^2 / sum_j w_ij (y_j - ybar_i)^2.

The full n x n hat matrix is formed here on purpose (the library never forms it). The data
are invented: a price surface whose living-area coefficient rises from west to east.
"""
import json

import numpy as np
import pytest

from conftest import run_raw, write_csv


def make_sales(tmp_path, n=240, seed=8):
    rng = np.random.default_rng(seed)
    x, y = 10 * rng.random(n), 6 * rng.random(n)
    area = rng.normal(7.5, 0.3, n)
    age = rng.integers(0, 80, n).astype(float)
    slope = 0.45 + 0.04 * x  # the varying coefficient, about the town's typical log area 7.5
    price = 8.5 + slope * (area - 7.5) - 0.004 * age + rng.normal(0, 0.08, n)
    path = tmp_path / "sales.csv"
    write_csv(path, {"log_price": price, "log_area": area, "age": age, "x": x, "y": y})
    return path, np.column_stack([np.ones(n), area, age]), price, x, y


def gwr(X, y, px, py, kernel, bandwidth):
    n, k = X.shape
    d = np.hypot(px[:, None] - px[None, :], py[:, None] - py[None, :])
    W = np.zeros((n, n))
    for i in range(n):
        if kernel == "adaptive":
            reach = np.sort(d[i])[bandwidth - 1]
            W[i] = np.where(d[i] < reach, (1 - (d[i] / reach) ** 2) ** 2, 0.0)
        else:
            W[i] = np.exp(-0.5 * (d[i] / bandwidth) ** 2)
    betas, S, cov_unscaled, local_r2 = np.zeros((n, k)), np.zeros((n, n)), np.zeros((n, k)), np.zeros(n)
    for i in range(n):
        A = X.T @ (W[i][:, None] * X)
        C = np.linalg.solve(A, X.T * W[i])
        betas[i] = C @ y
        S[i] = X[i] @ C
        cov_unscaled[i] = np.diag(C @ C.T)
        e = y - X @ betas[i]
        ybar = (W[i] @ y) / W[i].sum()
        local_r2[i] = 1 - (W[i] @ e ** 2) / (W[i] @ (y - ybar) ** 2)
    resid = y - S @ y
    rss = resid @ resid
    tr_s, tr_sts = np.trace(S), np.trace(S.T @ S)
    sigma2 = rss / (n - 2 * tr_s + tr_sts)
    aicc = 2 * n * np.log(np.sqrt(rss / n)) + n * np.log(2 * np.pi) + n * (n + tr_s) / (n - 2 - tr_s)
    return dict(betas=betas, se=np.sqrt(sigma2 * cov_unscaled), tr_s=tr_s, tr_sts=tr_sts, rss=rss, aicc=aicc,
                local_r2=local_r2)


def local_fit(path, *args):
    r = run_raw("fit", str(path), "--target", "log_price", "--terms", "log_area,age", "--local", "x,y", *args,
                "--format", "json")
    assert r.returncode == 0, r.stderr
    doc = json.loads(r.stdout)
    assert doc["schema"] == "plumbline.local-fit"
    return doc


def close(a, b, rel=1e-8):
    a, b = np.asarray(a, float), np.asarray(b, float)
    return np.all(np.abs(a - b) <= rel * np.maximum(np.abs(b), 1e-300))


@pytest.mark.parametrize("kernel,bandwidth,flags", [
    ("adaptive", 45, ["--kernel", "adaptive-bisquare", "--bandwidth", "45"]),
    ("gaussian", 1.7, ["--kernel", "fixed-gaussian", "--bandwidth", "1.7"]),
])
def test_local_fit_at_a_given_bandwidth_matches_the_formulas(tmp_path, kernel, bandwidth, flags):
    path, X, y, px, py = make_sales(tmp_path)
    ref = gwr(X, y, px, py, kernel, bandwidth)
    doc = local_fit(path, *flags)
    got_b = np.array([r["coefficients"] for r in doc["rows"]])
    got_se = np.array([r["std_errors"] for r in doc["rows"]])
    assert doc["terms"] == ["intercept", "log_area", "age"]
    assert close(got_b, ref["betas"]), np.max(np.abs(got_b / ref["betas"] - 1))
    assert close(got_se, ref["se"]), np.max(np.abs(got_se / ref["se"] - 1))
    assert close(doc["effective_parameters"], ref["tr_s"]) and close(doc["trace_sts"], ref["tr_sts"])
    assert close(doc["rss"], ref["rss"]) and close(doc["aicc"], ref["aicc"])
    assert close([r["local_r_squared"] for r in doc["rows"]], ref["local_r2"])


def test_the_bandwidth_search_finds_the_least_aicc_of_a_brute_force_grid(tmp_path):
    path, X, y, px, py = make_sales(tmp_path, n=150, seed=9)
    grid = {count: gwr(X, y, px, py, "adaptive", count)["aicc"] for count in range(5, 151)}
    best = min(grid, key=lambda c: (grid[c], c))
    doc = local_fit(path)
    assert doc["bandwidth"] == {"neighbours": best}, (doc["bandwidth"], best, grid[best])
    assert close(doc["aicc"], grid[best])


def test_the_varying_coefficient_is_recovered(tmp_path):
    """The invented surface: the living-area coefficient is 0.45 + 0.04 x. West of x = 3 its local
    estimates must lie below those east of x = 7 (the truth differs by at least 0.16 there)."""
    path, X, y, px, py = make_sales(tmp_path, n=400, seed=10)
    doc = local_fit(path)
    west = [r["coefficients"][1] for r in doc["rows"] if r["place"][0] < 3]
    east = [r["coefficients"][1] for r in doc["rows"] if r["place"][0] > 7]
    assert np.median(east) - np.median(west) > 0.1, (np.median(west), np.median(east))
    assert doc["aicc"] < doc["global"]["aicc"]


def test_the_variation_test_finds_the_coefficient_that_varies(tmp_path):
    """Shuffling places (Fotheringham et al. 2002, §4.5): the invented living-area coefficient
    varies from west to east, the age coefficient does not. With 19 shuffles the smallest
    p-value is 0.05."""
    path, X, y, px, py = make_sales(tmp_path, n=400, seed=10)
    doc = local_fit(path, "--bandwidth", "80", "--variation-test", "19")
    p = {t["term"]: t["p_value"] for t in doc["variation"]}
    assert p["log_area"] == 0.05, p
    assert p["age"] > 0.05, p


def test_value_with_the_local_model_matches_the_local_estimates(tmp_path):
    """Valuing the sales themselves with `plumbline value --local` gives each sale's local fitted
    value (the same local regression at the same place)."""
    path, X, y, px, py = make_sales(tmp_path, n=200, seed=12)
    doc = local_fit(path, "--bandwidth", "40")
    out = tmp_path / "values.csv"
    r = run_raw("value", str(path), "--target", "log_price", "--terms", "log_area,age", "--local", "x,y",
                "--bandwidth", "40", "--parcels", str(path), "--out", str(out))
    assert r.returncode == 0, r.stderr
    import csv
    with open(out) as f:
        values = list(csv.DictReader(f))
    got = np.array([float(v["estimate"]) for v in values])
    expected = np.array([row["fitted"] for row in doc["rows"]])
    assert close(got, expected, 1e-10)
    ref = gwr(X, y, px, py, "adaptive", 40)
    assert close(got, np.sum(X * ref["betas"], axis=1), 1e-8)
    assert all(float(v["pi_low"]) < float(v["estimate"]) < float(v["pi_high"]) for v in values)


def test_a_singular_local_design_is_refused_naming_the_data_row(tmp_path):
    """A category that does not vary among a sale's neighbours makes its local design singular:
    refused with the data row and what to change, never a number from a singular system."""
    path, X, y, px, py = make_sales(tmp_path, n=120, seed=13)
    text = path.read_text().splitlines()
    # A zone that is constant within each half of the map: near any sale every neighbour shares it.
    body = [text[0] + ",zone"] + [line + ("," + ("west" if float(line.split(",")[3]) < 5 else "east"))
                                  for line in text[1:]]
    path.write_text("\n".join(body) + "\n")
    r = run_raw("fit", str(path), "--target", "log_price", "--terms", "log_area,age", "--category", "zone",
                "--local", "x,y", "--bandwidth", "12")
    assert r.returncode != 0
    assert "the local design at the place of data row" in r.stderr and "widen the bandwidth" in r.stderr, r.stderr
