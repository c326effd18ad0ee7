//! Tests of the assumptions behind classical standard errors.
//!
//! Notation: residuals `eᵢ` (times `√wᵢ` for weighted fits), `n` rows, `k`
//! estimated coefficients, `RSS = Σ eᵢ²`.
//!
//! | test | statistic | reference distribution | source |
//! |---|---|---|---|
//! | Breusch–Pagan | `½ ESS` of `eᵢ²/σ̂²` (`σ̂² = RSS/n`) on the model's columns | χ²(q) | Breusch & Pagan (1979), *Econometrica* 47, 1287–1294 |
//! | Breusch–Pagan, studentized | `n R²` of `eᵢ²` on the model's columns | χ²(q) | Koenker (1981), *J. Econometrics* 17, 107–112 |
//! | White | `n R²` of `eᵢ²` on the columns, their squares and cross-products | χ²(q) | White (1980), *Econometrica* 48, 817–838 |
//! | Jarque–Bera | `n/6 (S² + (K − 3)²/4)` from the residuals' moments | χ²(2) | Jarque & Bera (1980), *Econ. Letters* 6, 255–259 |
//! | Durbin–Watson | `d = Σ(eᵢ − eᵢ₋₁)² / Σ eᵢ²`, rows in data order | beta approximation | Durbin & Watson (1950, 1971), *Biometrika* 37, 58 |
//! | Ramsey RESET | F for adding `ŷ²`, `ŷ³` | F(q, n − k − q) | Ramsey (1969), *JRSS B* 31, 350–371 |
//!
//! `q` is the rank of the auxiliary design minus one (its constant).
//!
//! **Durbin–Watson p-value.** Under independent normal errors `d` is a ratio of
//! quadratic forms whose exact mean and variance follow from the design
//! (Durbin & Watson 1971, "Testing for serial correlation in least squares
//! regression III", *Biometrika* 58, 1–19):
//! `E d = tr(MA)/(n − k)` and `Var d = 2 (tr(MAMA) − (tr MA)²/(n − k)) / ((n − k)(n − k + 2))`,
//! with `M = I − H` and `A` the first-difference matrix. We match a beta
//! distribution on `[0, 4]` to these two moments — the approximation Durbin
//! and Watson recommend — and report the two-sided p-value
//! `2·min(P(d ≤ d_obs), P(d ≥ d_obs))`. It is only meaningful when the rows
//! are in time order (sort by sale date first).

use crate::fit::{auxiliary_regression, Fit};
use crate::model::DesignColumn;
use serde::{Deserialize, Serialize};
use statrs::distribution::{Beta, ChiSquared, ContinuousCDF};

/// The outcome of one hypothesis test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct TestResult {
    /// Test name.
    pub name: String,
    /// What a small p-value suggests, in plain words.
    pub alternative: String,
    /// Test statistic.
    pub statistic: f64,
    /// Degrees of freedom of the reference distribution (one or two numbers;
    /// empty when the reference is not a χ² or F distribution).
    pub df: Vec<f64>,
    /// p-value.
    pub p_value: f64,
    /// How the p-value was obtained, when that needs saying.
    pub note: Option<String>,
}

fn chi_square_p(statistic: f64, df: f64) -> f64 {
    ChiSquared::new(df).map(|d| d.sf(statistic.max(0.0))).unwrap_or(f64::NAN)
}

fn column(name: &str, values: Vec<f64>) -> DesignColumn {
    DesignColumn { name: name.to_string(), hi: values, lo: None }
}

/// Centered R² and explained sum of squares of an auxiliary regression.
fn aux_fit(columns: &[DesignColumn], y: &[f64]) -> (f64, f64, usize) {
    let solution = auxiliary_regression(columns, y);
    let mean = y.iter().sum::<f64>() / y.len() as f64;
    let tss: f64 = y.iter().map(|v| (v - mean).powi(2)).sum();
    let ess = tss - solution.weighted_rss();
    let r2 = if tss > 0.0 { ess / tss } else { 0.0 };
    (r2, ess, solution.kept().len())
}

impl Fit {
    /// The weighted kept design columns, with a constant added when the model has none.
    fn auxiliary_base(&self) -> Vec<DesignColumn> {
        let data = self.weighted_rows();
        let k = self.solution().kept().len();
        let mut columns: Vec<DesignColumn> = (0..k)
            .map(|a| {
                column(
                    self.design().columns()[self.solution().kept()[a]].name.as_str(),
                    data.rows.iter().map(|r| r[a]).collect(),
                )
            })
            .collect();
        let has_constant = columns.iter().any(|c| c.hi.iter().all(|v| *v == c.hi[0]) && c.hi[0] != 0.0);
        if !has_constant {
            columns.insert(0, column("constant", vec![1.0; data.rows.len()]));
        }
        columns
    }

    fn residuals_weighted(&self) -> Vec<f64> {
        self.weighted_rows().residuals.clone()
    }

    /// Breusch–Pagan test, original form (assumes normal errors).
    pub fn breusch_pagan(&self) -> TestResult {
        let e = self.residuals_weighted();
        let n = e.len() as f64;
        let sigma2 = e.iter().map(|v| v * v).sum::<f64>() / n;
        let g: Vec<f64> = e.iter().map(|v| v * v / sigma2).collect();
        let (_, ess, rank) = aux_fit(&self.auxiliary_base(), &g);
        let df = rank.saturating_sub(1) as f64;
        let statistic = ess / 2.0;
        TestResult {
            name: "Breusch–Pagan".into(),
            alternative: "error variance changes with the model's terms".into(),
            statistic,
            df: vec![df],
            p_value: chi_square_p(statistic, df),
            note: None,
        }
    }

    /// Breusch–Pagan test, Koenker's studentized form (robust to non-normal
    /// errors). Computed once per fit: the fit's warnings read it too.
    pub fn breusch_pagan_studentized(&self) -> TestResult {
        /// The cache key of this test's result.
        struct Studentized(TestResult);
        self.derived().get_or_compute(|| Studentized(self.compute_breusch_pagan_studentized())).0.clone()
    }

    fn compute_breusch_pagan_studentized(&self) -> TestResult {
        let e = self.residuals_weighted();
        let e2: Vec<f64> = e.iter().map(|v| v * v).collect();
        let (r2, _, rank) = aux_fit(&self.auxiliary_base(), &e2);
        let df = rank.saturating_sub(1) as f64;
        let statistic = e.len() as f64 * r2;
        TestResult {
            name: "Breusch–Pagan (studentized)".into(),
            alternative: "error variance changes with the model's terms".into(),
            statistic,
            df: vec![df],
            p_value: chi_square_p(statistic, df),
            note: None,
        }
    }

    /// White's general test of heteroskedasticity.
    pub fn white_test(&self) -> TestResult {
        let base = self.auxiliary_base();
        let slopes: Vec<&DesignColumn> = base.iter().filter(|c| !c.hi.iter().all(|v| *v == c.hi[0])).collect();
        let mut columns = base.clone();
        for a in 0..slopes.len() {
            for b in a..slopes.len() {
                let product = slopes[a].hi.iter().zip(&slopes[b].hi).map(|(x, y)| x * y).collect();
                columns.push(column(&format!("{}*{}", slopes[a].name, slopes[b].name), product));
            }
        }
        let e2: Vec<f64> = self.residuals_weighted().iter().map(|v| v * v).collect();
        let (r2, _, rank) = aux_fit(&columns, &e2);
        let df = rank.saturating_sub(1) as f64;
        let statistic = e2.len() as f64 * r2;
        TestResult {
            name: "White".into(),
            alternative: "error variance changes with the terms, their squares or products".into(),
            statistic,
            df: vec![df],
            p_value: chi_square_p(statistic, df),
            note: None,
        }
    }

    /// Jarque–Bera test of normal residuals.
    pub fn jarque_bera(&self) -> TestResult {
        let e = self.residuals_weighted();
        let n = e.len() as f64;
        let mean = e.iter().sum::<f64>() / n;
        let moment = |r: i32| e.iter().map(|v| (v - mean).powi(r)).sum::<f64>() / n;
        let (m2, m3, m4) = (moment(2), moment(3), moment(4));
        let skewness = m3 / m2.powf(1.5);
        let kurtosis = m4 / (m2 * m2);
        let statistic = n / 6.0 * (skewness * skewness + (kurtosis - 3.0).powi(2) / 4.0);
        TestResult {
            name: "Jarque–Bera".into(),
            alternative: "residuals are skewed or heavy-tailed (not normal)".into(),
            statistic,
            df: vec![2.0],
            p_value: chi_square_p(statistic, 2.0),
            note: None,
        }
    }

    /// Durbin–Watson test of first-order serial correlation in row order.
    pub fn durbin_watson(&self) -> TestResult {
        let data = self.weighted_rows();
        let e = &data.residuals;
        let n = e.len();
        let k = self.solution().kept().len();
        let d = e.windows(2).map(|w| (w[1] - w[0]).powi(2)).sum::<f64>() / e.iter().map(|v| v * v).sum::<f64>();
        let c = self.solution().unscaled_covariance();
        // B = XᵀAX = (ΔX)ᵀ(ΔX);  G = (AX)ᵀ(AX).
        let x = &data.rows;
        let mut b = vec![vec![0.0; k]; k];
        for t in 1..n {
            let diff: Vec<f64> = (0..k).map(|j| x[t][j] - x[t - 1][j]).collect();
            for p in 0..k {
                for q in 0..k {
                    b[p][q] += diff[p] * diff[q];
                }
            }
        }
        let ax = |t: usize, j: usize| {
            let left = if t > 0 { x[t][j] - x[t - 1][j] } else { 0.0 };
            let right = if t + 1 < n { x[t][j] - x[t + 1][j] } else { 0.0 };
            left + right
        };
        let mut g = vec![vec![0.0; k]; k];
        for t in 0..n {
            let row: Vec<f64> = (0..k).map(|j| ax(t, j)).collect();
            for p in 0..k {
                for q in 0..k {
                    g[p][q] += row[p] * row[q];
                }
            }
        }
        let product = |a: &[Vec<f64>], bm: &[Vec<f64>]| -> Vec<Vec<f64>> {
            (0..k).map(|i| (0..k).map(|j| (0..k).map(|l| a[i][l] * bm[l][j]).sum()).collect()).collect()
        };
        let trace = |m: &[Vec<f64>]| (0..k).map(|i| m[i][i]).sum::<f64>();
        let cb = product(c, &b);
        let cg = product(c, &g);
        let tr_a = 2.0 * (n as f64 - 1.0);
        let tr_a2 = 6.0 * n as f64 - 8.0;
        let tr_ma = tr_a - trace(&cb);
        let tr_mama = tr_a2 - 2.0 * trace(&cg) + trace(&product(&cb, &cb));
        let dof = (n - k) as f64;
        let mean = tr_ma / dof;
        let variance = 2.0 * (tr_mama - tr_ma * tr_ma / dof) / (dof * (dof + 2.0));
        let mu = mean / 4.0;
        let var = variance / 16.0;
        let common = mu * (1.0 - mu) / var - 1.0;
        let p_value = match Beta::new(mu * common, (1.0 - mu) * common) {
            Ok(beta) => {
                let lower = beta.cdf((d / 4.0).clamp(0.0, 1.0));
                (2.0 * lower.min(1.0 - lower)).min(1.0)
            }
            Err(_) => f64::NAN,
        };
        TestResult {
            name: "Durbin–Watson".into(),
            alternative: "neighbouring rows' errors are correlated (rows must be in time order)".into(),
            statistic: d,
            df: Vec::new(),
            p_value,
            note: Some(format!(
                "two-sided; beta approximation matched to the exact mean {mean:.4} and sd {:.4} of d under independence",
                variance.sqrt()
            )),
        }
    }

    /// Ramsey's RESET: do powers of the fitted values explain what the model missed?
    pub fn reset_test(&self) -> TestResult {
        let n = self.design().n_rows();
        let fitted: Vec<f64> = (0..n).map(|i| self.design().target()[i] - self.solution().residuals()[i]).collect();
        let mut columns: Vec<DesignColumn> =
            self.solution().kept().iter().map(|&j| self.design().columns()[j].clone()).collect();
        columns.push(column("fitted^2", fitted.iter().map(|v| v * v).collect()));
        columns.push(column("fitted^3", fitted.iter().map(|v| v * v * v).collect()));
        let tolerance = crate::fit::default_rank_tolerance(n, columns.len());
        let augmented = crate::fit::solver::solve(
            &columns,
            self.design().target(),
            self.design().weights(),
            crate::fit::Precision::Auto,
            tolerance,
        );
        let q = augmented.kept().len() - self.solution().kept().len();
        let df2 = (n - augmented.kept().len()) as f64;
        let rss_r = self.solution().weighted_rss();
        let rss_u = augmented.weighted_rss();
        let statistic = if q > 0 && rss_u > 0.0 { ((rss_r - rss_u) / q as f64) / (rss_u / df2) } else { 0.0 };
        TestResult {
            name: "RESET".into(),
            alternative: "the model misses curvature or interactions".into(),
            statistic,
            df: vec![q as f64, df2],
            p_value: crate::stats::f_upper_p(statistic, q as f64, df2).unwrap_or(f64::NAN),
            note: None,
        }
    }

    /// Every assumption test, in a fixed order (computed once per fit).
    pub fn assumption_tests(&self) -> Vec<TestResult> {
        /// The cache key of the whole set.
        struct AllTests(Vec<TestResult>);
        self.derived().get_or_compute(|| AllTests(self.compute_assumption_tests())).0.clone()
    }

    fn compute_assumption_tests(&self) -> Vec<TestResult> {
        vec![
            self.breusch_pagan(),
            self.breusch_pagan_studentized(),
            self.white_test(),
            self.jarque_bera(),
            self.durbin_watson(),
            self.reset_test(),
        ]
    }
}
