"""Prediction and confidence intervals against numpy, and the log-target retransformation.

Sources:
- Mean and prediction intervals: x0'b +- t * sqrt(x0' s^2 (X'X)^-1 x0) and
  +- t * sqrt(s^2 + x0' s^2 (X'X)^-1 x0), e.g. Weisberg, Applied Linear Regression, 4th ed., sec. 3.7.
- Smearing estimate: Duan (1983), JASA 78, 605-610: exp(x0'b) * mean(exp(residuals)).
"""
import numpy as np
from scipy import stats

from conftest import run_fit, write_csv


def test_intervals_match_numpy(heteroskedastic_data, tmp_path):
    path, X, y, _, _ = heteroskedastic_data
    new = write_csv(tmp_path / "new.csv", {"x1": [2.0, 5.5, 9.0], "x2": [0.0, -1.0, 3.0]})
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2", "--predict", str(new), "--level", "0.95")
    n, k = X.shape
    beta, *_ = np.linalg.lstsq(X, y, rcond=None)
    resid = y - X @ beta
    s2 = resid @ resid / (n - k)
    cov = s2 * np.linalg.inv(X.T @ X)
    X0 = np.array([[1, 2.0, 0.0], [1, 5.5, -1.0], [1, 9.0, 3.0]])
    est = X0 @ beta
    se = np.sqrt(np.einsum("ij,jk,ik->i", X0, cov, X0))
    crit = stats.t.ppf(0.975, n - k)
    rows = doc["predictions"]["rows"]
    assert [r["row"] for r in rows] == [1, 2, 3]
    for i, r in enumerate(rows):
        assert np.isclose(r["estimate"], est[i], rtol=1e-12)
        assert np.isclose(r["se_fit"], se[i], rtol=1e-10)
        assert np.isclose(r["ci_low"], est[i] - crit * se[i], rtol=1e-10)
        assert np.isclose(r["pi_high"], est[i] + crit * np.sqrt(s2 + se[i] ** 2), rtol=1e-10)
        assert r["median_original"] is None


def test_log_target_median_and_smearing_mean(tmp_path):
    rng = np.random.default_rng(7)
    n = 80
    area = rng.uniform(800, 3000, n)
    price = np.exp(10 + 0.0004 * area + rng.normal(0, 0.2, n))
    path = write_csv(tmp_path / "s.csv", {"price": price, "area": area})
    new = write_csv(tmp_path / "n.csv", {"area": [1000.0, 2500.0]})
    doc = run_fit(path, "--target", "price", "--log-target", "--terms", "area", "--predict", str(new))
    X = np.column_stack([np.ones(n), area])
    beta, *_ = np.linalg.lstsq(X, np.log(price), rcond=None)
    resid = np.log(price) - X @ beta
    smear = np.exp(resid).mean()
    for r, a in zip(doc["predictions"]["rows"], [1000.0, 2500.0]):
        eta = beta[0] + beta[1] * a
        assert np.isclose(r["median_original"], np.exp(eta), rtol=1e-11)
        assert np.isclose(r["mean_original"], np.exp(eta) * smear, rtol=1e-11)


def test_rows_with_missing_terms_are_reported_not_predicted(heteroskedastic_data, tmp_path):
    path, *_ = heteroskedastic_data
    new = tmp_path / "gap.csv"
    new.write_text("x1,x2\n2.0,0.5\n,1.0\n4.0,2.0\n")
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2", "--predict", str(new))
    assert [r["row"] for r in doc["predictions"]["rows"]] == [1, 3]
    assert doc["predictions"]["skipped_rows"] == [2]
