//! Kernels and bandwidths of a local fit.
//!
//! * **Adaptive bisquare** (Fotheringham et al. 2002, eq. 2.10): at each
//!   regression point the `N` nearest sales (the point's own sale counted)
//!   set the reach `b_i`, the distance to the `N`-th, and
//!   `w_ij = (1 − (d_ij/b_i)²)²` for `d_ij < b_i`, 0 beyond — so the `N`-th
//!   itself weighs nothing. Dense and sparse parts of a town get the same
//!   number of sales; the default.
//! * **Fixed Gaussian** (eq. 2.9): `w_ij = exp(−½ (d_ij/b)²)` for every sale,
//!   one distance `b` everywhere (in coordinate units, km for geographic
//!   places). Every sale weighs in every local fit: `O(n²)` work per fit.

use serde::{Deserialize, Serialize};

/// The kernel that turns distances into weights.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum Kernel {
    /// Bisquare over the `N` nearest sales.
    #[default]
    AdaptiveBisquare,
    /// Gaussian over a fixed distance.
    FixedGaussian,
}

impl Kernel {
    /// In words, for reports.
    pub fn describe(self) -> &'static str {
        match self {
            Kernel::AdaptiveBisquare => "adaptive bisquare",
            Kernel::FixedGaussian => "fixed Gaussian",
        }
    }
}

/// A bandwidth: a count of nearest sales (adaptive) or a distance (fixed).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum Bandwidth {
    /// The `N` nearest sales, the point's own counted.
    Neighbours(usize),
    /// A distance in coordinate units (km for geographic places).
    Distance(f64),
}

impl Bandwidth {
    /// In words: `120 nearest sales`, `a distance of 1.5`.
    pub fn describe(self) -> String {
        match self {
            Bandwidth::Neighbours(n) => format!("the {n} nearest sales"),
            Bandwidth::Distance(d) => format!("a distance of {d}"),
        }
    }
}
