//! Performance ranges for ratio studies.
//!
//! Source: IAAO *Standard on Ratio Studies* (International Association of
//! Assessing Officers, 2013), Table 1-3 and §9. **The numbers below were
//! recalled from memory**, not read from the standard (see
//! `shared/reference/ratio-study.md`); verify them against the standard before
//! relying on them. The standard is advisory: where it conflicts with local
//! law, the law governs.

use serde::{Deserialize, Serialize};

/// The property class a study's COD range depends on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
#[serde(rename_all = "kebab-case")]
pub enum PropertyClass {
    /// Single-family residential, newer or fairly homogeneous areas (COD 5–10).
    #[default]
    ResidentialHomogeneous,
    /// Single-family residential, older or heterogeneous areas (COD 5–15).
    ResidentialHeterogeneous,
    /// Income-producing, larger urban jurisdictions (COD 5–15).
    IncomeUrban,
    /// Income-producing, smaller or rural jurisdictions (COD 5–20).
    IncomeRural,
    /// Vacant land (COD 5–25).
    VacantLand,
    /// Other real and personal property (no fixed COD range).
    Other,
}

impl PropertyClass {
    /// The COD range for the class, if the standard gives one.
    pub fn cod_range(self) -> Option<(f64, f64)> {
        match self {
            PropertyClass::ResidentialHomogeneous => Some((5.0, 10.0)),
            PropertyClass::ResidentialHeterogeneous | PropertyClass::IncomeUrban => Some((5.0, 15.0)),
            PropertyClass::IncomeRural => Some((5.0, 20.0)),
            PropertyClass::VacantLand => Some((5.0, 25.0)),
            PropertyClass::Other => None,
        }
    }

    /// Our label for the class.
    pub fn label(self) -> &'static str {
        match self {
            PropertyClass::ResidentialHomogeneous => "single-family residential, newer or homogeneous areas",
            PropertyClass::ResidentialHeterogeneous => "single-family residential, older or heterogeneous areas",
            PropertyClass::IncomeUrban => "income-producing, larger urban jurisdictions",
            PropertyClass::IncomeRural => "income-producing, smaller or rural jurisdictions",
            PropertyClass::VacantLand => "vacant land",
            PropertyClass::Other => "other real and personal property",
        }
    }
}

impl std::str::FromStr for PropertyClass {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        Ok(match s {
            "residential-homogeneous" => PropertyClass::ResidentialHomogeneous,
            "residential-heterogeneous" => PropertyClass::ResidentialHeterogeneous,
            "income-urban" => PropertyClass::IncomeUrban,
            "income-rural" => PropertyClass::IncomeRural,
            "vacant-land" => PropertyClass::VacantLand,
            "other" => PropertyClass::Other,
            other => {
                return Err(format!(
                    "unknown property class `{other}`; use residential-homogeneous, residential-heterogeneous, income-urban, income-rural, vacant-land or other"
                ))
            }
        })
    }
}

/// Median ratio range for the level of appraisal (from memory).
pub const LEVEL_RANGE: (f64, f64) = (0.90, 1.10);
/// PRD range (from memory).
pub const PRD_RANGE: (f64, f64) = (0.98, 1.03);
/// PRB range (from memory); outside ±0.10 the standard calls it unacceptable.
pub const PRB_RANGE: (f64, f64) = (-0.05, 0.05);
/// The standard the ranges come from, as shown beside every judgement.
pub const STANDARD: &str = "IAAO Standard on Ratio Studies (2013) — ranges recalled from memory; verify before use";

/// A statistic set beside its range.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Judgement {
    /// The statistic.
    pub statistic: String,
    /// Its value.
    pub value: f64,
    /// The range, when the standard gives one.
    pub range: Option<(f64, f64)>,
    /// `Some(true)` inside, `Some(false)` outside, `None` without a range.
    pub inside: Option<bool>,
}

impl Judgement {
    /// Judges `value` against `range`.
    pub fn new(statistic: &str, value: f64, range: Option<(f64, f64)>) -> Self {
        let inside = range.map(|(lo, hi)| value >= lo && value <= hi);
        Self { statistic: statistic.to_string(), value, range, inside }
    }
}
