//! The round plan: what every accumulator of a fit is told.
//!
//! An aggregate function of a query cannot be handed Rust values: on a
//! Ballista cluster it is named in a plan and rebuilt on another machine. So
//! each round's function takes the plan as its first argument, a constant:
//! this document, as JSON text (document `plumbline.engine-round`, versioned
//! here). It carries the model, the columns that follow it in the call, and
//! for rounds one and two every group's merged state from the round before.
//! The driver wraps it in a one-value dictionary so that the engine does not
//! copy it into every row of a batch.

use crate::error::{EngineError, Result};
use plumbline::data::NonFinite;
use plumbline::model::ModelSpec;
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet};

/// The document name of a round plan.
pub const PLAN_FORMAT: &str = "plumbline.engine-round";
/// The version of the round plan; bump it when a field changes meaning.
pub const PLAN_VERSION: u32 = 2;
/// The key of the one "group" of a fit without groups.
pub const WHOLE_DATA: &str = "";

/// Which of the three passes a function runs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Round {
    /// Learn the coding: category levels, value ranges, dropped rows.
    Coding,
    /// Round one: the TSQR factor of `[X | y]` (learning the coding in the
    /// same pass when the plan says [`RoundPlan::learning`]).
    Factor,
    /// Round two: residual sums given the first solution.
    Residuals,
}

impl Round {
    /// The SQL name of the round's aggregate function.
    pub fn function_name(self) -> &'static str {
        match self {
            Round::Coding => "plumbline_coding",
            Round::Factor => "plumbline_factor",
            Round::Residuals => "plumbline_residuals",
        }
    }
}

/// What every accumulator of one round is told (see the module docs).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RoundPlan {
    /// Always [`PLAN_FORMAT`].
    pub format: String,
    /// Always [`PLAN_VERSION`].
    pub version: u32,
    /// The round this plan is for.
    pub round: Round,
    /// The model.
    pub spec: ModelSpec,
    /// Whether the argument after the plan is the group's label (a fit by group).
    pub grouped: bool,
    /// The numeric columns, in argument order after the plan (and group).
    pub numbers: Vec<String>,
    /// The text columns (dates as ISO 8601 text), after the numbers.
    pub labels: Vec<String>,
    /// What to do with values that are not finite numbers.
    pub non_finite: NonFinite,
    /// Whether round two gathers the HC0/HC1 middle matrix.
    pub robust: bool,
    /// The numerical-rank tolerance (`None`: the default for the design's size).
    pub rank_tolerance: Option<f64>,
    /// Round one also learns the coding (version 2): for a model that reads
    /// no text or date column, whose design needs no level learned first
    /// (`RecipeLearner::codes_without_levels`), the coding round is folded
    /// into round one and a piece is the learner's state then the factor's.
    pub learning: bool,
    /// The groups whose round one runs in double-double: small designs, and
    /// designs too ill-conditioned for a factor in double (the automatic
    /// rule of the in-memory fit; see `FactorAggregate::for_rows`).
    pub extended: BTreeSet<String>,
    /// Every group's merged coding state, hex (rounds one and two).
    pub codings: BTreeMap<String, String>,
    /// Every group's merged factor state, hex (round two).
    pub factors: BTreeMap<String, String>,
}

impl RoundPlan {
    /// The plan as the JSON text the functions are given.
    pub fn to_text(&self) -> Result<String> {
        serde_json::to_string(self).map_err(|e| EngineError::Data(format!("the round plan cannot be written: {e}")))
    }

    /// Reads a plan, refusing another document or version.
    pub fn from_text(text: &str) -> Result<Self> {
        let plan: RoundPlan = serde_json::from_str(text).map_err(|e| {
            EngineError::Data(format!(
                "the first argument of a Plumbline aggregate must be its round plan ({PLAN_FORMAT}): {e}"
            ))
        })?;
        if plan.format != PLAN_FORMAT || plan.version != PLAN_VERSION {
            return Err(EngineError::Data(format!(
                "the round plan is `{}` version {}, this build reads `{PLAN_FORMAT}` version {PLAN_VERSION}; run \
                 the client and every executor from the same build",
                plan.format, plan.version
            )));
        }
        Ok(plan)
    }

    /// The number of data arguments after the plan.
    pub fn data_arguments(&self) -> usize {
        usize::from(self.grouped) + self.numbers.len() + self.labels.len()
    }
}

/// Bytes as lowercase hex (states travel inside the JSON plan).
pub fn to_hex(bytes: &[u8]) -> String {
    const DIGITS: &[u8; 16] = b"0123456789abcdef";
    let mut text = String::with_capacity(bytes.len() * 2);
    for &b in bytes {
        text.push(DIGITS[usize::from(b >> 4)] as char);
        text.push(DIGITS[usize::from(b & 15)] as char);
    }
    text
}

/// Hex back to bytes; `None` if it is not hex.
pub fn from_hex(text: &str) -> Option<Vec<u8>> {
    fn digit(c: u8) -> Option<u8> {
        match c {
            b'0'..=b'9' => Some(c - b'0'),
            b'a'..=b'f' => Some(c - b'a' + 10),
            _ => None,
        }
    }
    let bytes = text.as_bytes();
    if !bytes.len().is_multiple_of(2) {
        return None;
    }
    bytes.chunks(2).map(|pair| Some(digit(pair[0])? << 4 | digit(pair[1])?)).collect()
}
