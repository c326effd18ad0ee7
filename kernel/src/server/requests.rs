//! Request contents, parsed into types (messaging protocol 5.3, "Messages on
//! the shell (ROUTER/DEALER) channel" and "control channel").
//!
//! Each request's `content` is deserialised into its struct before anything
//! acts on it. Fields the protocol marks optional have the protocol's
//! defaults; a field of the wrong type, or a missing required one, makes the
//! whole request a [`BadRequest`], answered with an error reply that names
//! the field — never a panic, never a silent guess.

use serde::de::DeserializeOwned;
use serde::Deserialize;
use serde_json::Value;
use std::collections::BTreeMap;

fn yes() -> bool {
    true
}

/// `execute_request`.
#[derive(Debug, Clone, Deserialize)]
pub struct ExecuteRequest {
    /// The cell's source.
    pub code: String,
    /// Run without broadcasting input or result, and without counting.
    #[serde(default)]
    pub silent: bool,
    /// Count the cell and keep it in history.
    #[serde(default = "yes")]
    pub store_history: bool,
    /// Expressions to evaluate after the cell, by name.
    #[serde(default)]
    pub user_expressions: BTreeMap<String, String>,
    /// Whether the cell may ask for input (ours never do).
    #[serde(default)]
    pub allow_stdin: bool,
    /// Abort the execute requests queued behind this cell if it fails.
    #[serde(default = "yes")]
    pub stop_on_error: bool,
}

/// `complete_request`.
#[derive(Debug, Clone, Deserialize)]
pub struct CompleteRequest {
    /// The cell's source.
    pub code: String,
    /// Cursor position in code points.
    pub cursor_pos: usize,
}

/// `inspect_request`.
#[derive(Debug, Clone, Deserialize)]
pub struct InspectRequest {
    /// The cell's source.
    pub code: String,
    /// Cursor position in code points.
    pub cursor_pos: usize,
    /// 0 for a summary, 1 for everything.
    #[serde(default)]
    pub detail_level: u8,
}

/// `is_complete_request`.
#[derive(Debug, Clone, Deserialize)]
pub struct IsCompleteRequest {
    /// The source typed so far.
    pub code: String,
}

/// How a `history_request` selects cells.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum HistoryAccess {
    /// The last `n` cells.
    #[default]
    Tail,
    /// Cells `start..stop` of a session.
    Range,
    /// Cells matching a glob pattern.
    Search,
}

/// `history_request`.
#[derive(Debug, Clone, Deserialize)]
pub struct HistoryRequest {
    /// Include each cell's output.
    #[serde(default)]
    pub output: bool,
    /// Raw input (we keep only raw input).
    #[serde(default)]
    pub raw: bool,
    /// Which cells.
    #[serde(default)]
    pub hist_access_type: HistoryAccess,
    /// How many cells (tail, search).
    #[serde(default)]
    pub n: Option<usize>,
    /// First cell (range).
    #[serde(default)]
    pub start: Option<i64>,
    /// Cell after the last (range).
    #[serde(default)]
    pub stop: Option<i64>,
    /// Glob pattern (search).
    #[serde(default)]
    pub pattern: Option<String>,
    /// Drop repeated inputs (search).
    #[serde(default)]
    pub unique: bool,
}

/// `shutdown_request`.
#[derive(Debug, Clone, Deserialize)]
pub struct ShutdownRequest {
    /// The front end will start a new kernel after this one exits.
    #[serde(default)]
    pub restart: bool,
}

/// A request whose content does not have the protocol's shape.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("the `{msg_type}` content is not valid: {reason}")]
pub struct BadRequest {
    /// The request's type.
    pub msg_type: String,
    /// What serde found wrong (names the field and the expected type).
    pub reason: String,
}

/// Parses `content` of a `msg_type` request into `T`.
/// The content must be a JSON object (a dict, as the protocol says): serde
/// would otherwise also accept an array of the fields in order, and `[]`
/// would read as a request with every default — a shutdown, say.
pub fn parse<T: DeserializeOwned>(msg_type: &str, content: &Value) -> Result<T, BadRequest> {
    if !content.is_object() {
        return Err(BadRequest { msg_type: msg_type.to_string(), reason: "the content is not a JSON object".into() });
    }
    T::deserialize(content).map_err(|e| BadRequest { msg_type: msg_type.to_string(), reason: e.to_string() })
}

#[cfg(test)]
mod tests {
    use super::*;
    use serde_json::json;

    // Defaults as the messaging protocol 5.3 specifies them.
    #[test]
    fn optional_fields_take_the_protocol_defaults() {
        let r: ExecuteRequest = parse("execute_request", &json!({ "code": "1" })).expect("valid");
        assert!(!r.silent && r.store_history && r.stop_on_error && r.user_expressions.is_empty());
    }

    #[test]
    fn wrong_types_name_the_field() {
        let e = parse::<ExecuteRequest>("execute_request", &json!({ "code": 5 })).expect_err("invalid");
        assert!(e.reason.contains("expected a string"), "{e}");
        let e = parse::<CompleteRequest>("complete_request", &json!({ "code": "x", "cursor_pos": -1 }))
            .expect_err("invalid");
        assert!(e.to_string().contains("complete_request"), "{e}");
        assert!(parse::<ShutdownRequest>("shutdown_request", &json!([1, 2])).is_err());
        // An empty array would otherwise be a shutdown with every default.
        assert!(parse::<ShutdownRequest>("shutdown_request", &json!([])).is_err());
    }
}
