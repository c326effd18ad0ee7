//! Influence measures of each row on the fit.
//!
//! With raw residual `eᵢ`, leverage `hᵢ`, `s² = RSS/(n − k)` and
//! `C = (XᵀX)⁻¹` (Belsley, Kuh & Welsch 1980, *Regression Diagnostics*, ch. 2;
//! Cook 1977, *Technometrics* 19, 15–18):
//!
//! * standardized (internally studentized) `rᵢ = eᵢ / (s √(1 − hᵢ))`;
//! * deleted variance `s₍ᵢ₎² = ((n − k)s² − eᵢ²/(1 − hᵢ)) / (n − k − 1)`;
//! * externally studentized `tᵢ = eᵢ / (s₍ᵢ₎ √(1 − hᵢ))`;
//! * Cook's distance `Dᵢ = rᵢ² hᵢ / (k (1 − hᵢ))`;
//! * `DFFITSᵢ = tᵢ √(hᵢ / (1 − hᵢ))`;
//! * `DFBETASᵢⱼ = (C xᵢ)ⱼ eᵢ / ((1 − hᵢ) s₍ᵢ₎ √Cⱼⱼ)`.
//!
//! A row with leverage 1 determines its own fitted value; its standardized
//! and studentized residuals and Cook's distance are reported as `None`.

use crate::fit::{leverages, Fit};
use serde::{Deserialize, Serialize};

/// Influence measures of one row.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct InfluenceRow {
    /// 1-based data row of the fitting frame.
    pub row: usize,
    /// Raw residual `y − ŷ` (times `√w` for weighted fits).
    pub residual: f64,
    /// Leverage (hat value) `hᵢ`.
    pub leverage: f64,
    /// Internally studentized residual.
    pub standardized: Option<f64>,
    /// Externally studentized residual.
    pub studentized: Option<f64>,
    /// Cook's distance.
    pub cooks_distance: Option<f64>,
    /// DFFITS.
    pub dffits: Option<f64>,
}

/// Influence measures of every row of a fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Influence {
    /// One entry per row used, in data order.
    pub rows: Vec<InfluenceRow>,
    /// Names of the estimated coefficients (the columns of `dfbetas`).
    pub terms: Vec<String>,
    /// `dfbetas[i][j]`: scaled change in coefficient `j` when row `i` is left out.
    pub dfbetas: Vec<Vec<Option<f64>>>,
}

impl Fit {
    /// Influence measures of every row (computed once per fit).
    pub fn influence(&self) -> Influence {
        (*self.derived().get_or_compute(|| self.compute_influence())).clone()
    }

    fn compute_influence(&self) -> Influence {
        let data = self.weighted_rows();
        let c = self.solution().unscaled_covariance();
        let h = leverages(&data.rows, c);
        let n = data.rows.len();
        let k = self.solution().kept().len();
        let df = (n - k) as f64;
        let s2 = self.solution().weighted_rss() / df;
        let s = s2.sqrt();
        let mut rows = Vec::with_capacity(n);
        let mut dfbetas = Vec::with_capacity(n);
        for i in 0..n {
            let e = data.residuals[i];
            let hi = h[i];
            let one_minus = 1.0 - hi;
            let defined = one_minus > 1e-10 && s > 0.0;
            let deleted_var =
                if defined && df > 1.0 { ((df * s2 - e * e / one_minus) / (df - 1.0)).max(0.0) } else { f64::NAN };
            let s_i = deleted_var.sqrt();
            let standardized = defined.then(|| e / (s * one_minus.sqrt()));
            let studentized = (defined && s_i > 0.0).then(|| e / (s_i * one_minus.sqrt()));
            let cooks_distance = standardized.map(|r| r * r * hi / (k as f64 * one_minus));
            let dffits = studentized.map(|t| t * (hi / one_minus).sqrt());
            let x = &data.rows[i];
            let row_dfbetas = (0..k)
                .map(|j| {
                    if !(defined && s_i > 0.0) {
                        return None;
                    }
                    let cx: f64 = (0..k).map(|l| c[j][l] * x[l]).sum();
                    Some(cx * e / (one_minus * s_i * c[j][j].sqrt()))
                })
                .collect();
            dfbetas.push(row_dfbetas);
            rows.push(InfluenceRow {
                row: self.design().rows_used()[i] + 1,
                residual: e,
                leverage: hi,
                standardized,
                studentized,
                cooks_distance,
                dffits,
            });
        }
        Influence { rows, terms: self.estimated_names().into_iter().map(str::to_string).collect(), dfbetas }
    }
}
