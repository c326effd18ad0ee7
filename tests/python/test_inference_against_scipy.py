"""Coefficient tests, intervals and fit statistics against scipy.stats and numpy.

Sources:
- t and F distributions: scipy.stats.t / scipy.stats.f (independent implementations
  of the incomplete beta function; ours comes from the Rust statrs crate).
- OLS estimates: numpy.linalg.lstsq; classical covariance s^2 (X'X)^-1.
- R^2, adjusted R^2, Gaussian log-likelihood, AIC = -2l + 2(k+1), BIC = -2l + ln(n)(k+1):
  Akaike (1974), Schwarz (1978); the +1 counts the error variance.
"""
import numpy as np
from scipy import stats

from conftest import run_fit


def ols(X, y):
    beta, *_ = np.linalg.lstsq(X, y, rcond=None)
    resid = y - X @ beta
    n, k = X.shape
    s2 = resid @ resid / (n - k)
    cov = s2 * np.linalg.inv(X.T @ X)
    return beta, resid, cov, s2


def test_coefficients_p_values_and_intervals_match_scipy(heteroskedastic_data):
    path, X, y, _, _ = heteroskedastic_data
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2", "--level", "0.9")
    beta, resid, cov, s2 = ols(X, y)
    n, k = X.shape
    se = np.sqrt(np.diag(cov))
    tstat = beta / se
    p = 2 * stats.t.sf(np.abs(tstat), n - k)
    crit = stats.t.ppf(0.95, n - k)
    coefs = doc["coefficients"]
    assert [c["term"] for c in coefs] == ["intercept", "x1", "x2"]
    for j, c in enumerate(coefs):
        assert np.isclose(c["estimate"], beta[j], rtol=1e-12)
        assert np.isclose(c["std_error"], se[j], rtol=1e-10)
        assert np.isclose(c["t"], tstat[j], rtol=1e-10)
        assert np.isclose(c["p_value"], p[j], rtol=1e-8, atol=1e-300)
        assert np.isclose(c["ci_low"], beta[j] - crit * se[j], rtol=1e-10)
        assert np.isclose(c["ci_high"], beta[j] + crit * se[j], rtol=1e-10)


def test_fit_statistics_match_direct_formulas(heteroskedastic_data):
    path, X, y, _, _ = heteroskedastic_data
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2")
    beta, resid, cov, s2 = ols(X, y)
    n, k = X.shape
    rss = resid @ resid
    tss = ((y - y.mean()) ** 2).sum()
    r2 = 1 - rss / tss
    adj = 1 - (1 - r2) * (n - 1) / (n - k)
    f = ((tss - rss) / (k - 1)) / s2
    loglik = -0.5 * n * (np.log(2 * np.pi) + np.log(rss / n) + 1)
    assert np.isclose(doc["r_squared"], r2, rtol=1e-12)
    assert np.isclose(doc["adj_r_squared"], adj, rtol=1e-12)
    assert np.isclose(doc["residual_std_error"], np.sqrt(s2), rtol=1e-12)
    assert np.isclose(doc["f_statistic"], f, rtol=1e-10)
    assert np.isclose(doc["f_p_value"], stats.f.sf(f, k - 1, n - k), rtol=1e-8, atol=1e-300)
    assert np.isclose(doc["log_likelihood"], loglik, rtol=1e-12)
    assert np.isclose(doc["aic"], -2 * loglik + 2 * (k + 1), rtol=1e-12)
    assert np.isclose(doc["bic"], -2 * loglik + np.log(n) * (k + 1), rtol=1e-12)
    assert np.isclose(doc["ss_residual"], rss, rtol=1e-12)
    assert np.isclose(doc["ss_regression"], tss - rss, rtol=1e-12)
    assert doc["model_df"] == k - 1 and doc["residual_df"] == n - k and doc["n_obs"] == n
    # Condition number of the unit-length-scaled design (Belsley, Kuh & Welsch 1980).
    Xs = X / np.linalg.norm(X, axis=0)
    assert np.isclose(doc["condition_number"], np.linalg.cond(Xs), rtol=1e-8)


def test_quantiles_in_the_tails_match_scipy(tmp_path):
    """Tiny residual df stresses the t quantile and tail p-values."""
    from conftest import write_csv
    x = np.array([1.0, 2.0, 3.0, 4.0])
    y = np.array([1.1, 1.9, 3.2, 3.9])
    path = write_csv(tmp_path / "tiny.csv", {"y": y, "x": x})
    doc = run_fit(path, "--target", "y", "--terms", "x", "--level", "0.999")
    X = np.column_stack([np.ones(4), x])
    beta, resid, cov, s2 = ols(X, y)
    crit = stats.t.ppf(0.9995, 2)
    se = np.sqrt(np.diag(cov))
    for j, c in enumerate(doc["coefficients"]):
        assert np.isclose(c["ci_high"] - c["estimate"], crit * se[j], rtol=1e-9)
        assert np.isclose(c["p_value"], 2 * stats.t.sf(abs(beta[j] / se[j]), 2), rtol=1e-9)


def test_weighted_least_squares_matches_numpy(heteroskedastic_data):
    """WLS = OLS on rows scaled by sqrt(w); log-likelihood adds 1/2 sum ln w."""
    path, X, y, w, _ = heteroskedastic_data
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2", "--weights", "w")
    sw = np.sqrt(w)
    beta, resid_w, cov, s2 = ols(X * sw[:, None], y * sw)
    n, k = X.shape
    rss = resid_w @ resid_w
    ybar = (w * y).sum() / w.sum()
    tss = (w * (y - ybar) ** 2).sum()
    for j, c in enumerate(doc["coefficients"]):
        assert np.isclose(c["estimate"], beta[j], rtol=1e-12)
        assert np.isclose(c["std_error"], np.sqrt(cov[j, j]), rtol=1e-10)
    assert np.isclose(doc["r_squared"], 1 - rss / tss, rtol=1e-12)
    loglik = -0.5 * n * (np.log(2 * np.pi) + np.log(rss / n) + 1) + 0.5 * np.log(w).sum()
    assert np.isclose(doc["log_likelihood"], loglik, rtol=1e-12)


def test_no_intercept_r_squared_is_uncentered(heteroskedastic_data):
    """NIST StRD's definition for models without intercept: R^2 = 1 - RSS / sum(y^2)."""
    path, X, y, _, _ = heteroskedastic_data
    doc = run_fit(path, "--target", "y", "--terms", "x1,x2", "--no-intercept")
    beta, resid, cov, s2 = ols(X[:, 1:], y)
    assert np.isclose(doc["r_squared"], 1 - resid @ resid / (y @ y), rtol=1e-12)
    assert doc["model_df"] == 2 and doc["intercept"] is False
