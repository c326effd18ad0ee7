//! The run record: what `plumbline run` writes into an executed notebook's
//! metadata (`metadata.plumbline.run`), as a type that is written and read
//! back the same way.
//!
//! A reviewer opening the notebook months later sees when it ran, with which
//! Plumbline, which inputs were changed for the run, how many cells ran and
//! whether it finished. Version 1 is the first versioned form; records
//! written before it have no `schema` field and read as version 1.

use super::document::Notebook;
use super::inputs::AppliedInput;
use serde::{Deserialize, Serialize};
use serde_json::Value;

/// `schema` of the run record.
pub const RUN_RECORD_SCHEMA: &str = "plumbline.run";
/// Version of [`RunRecord`].
pub const RUN_RECORD_SCHEMA_VERSION: u32 = 1;
/// The notebook metadata key the record sits under (`metadata.plumbline.run`).
pub const METADATA_KEY: &str = "plumbline";

/// How a run ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, schemars::JsonSchema)]
pub enum RunStatus {
    /// Every code cell ran without an error.
    #[serde(rename = "complete")]
    Complete,
    /// A cell failed and the cells after it were not run.
    #[serde(rename = "stopped at an error")]
    StoppedAtError,
}

/// The record of one headless run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, schemars::JsonSchema)]
pub struct RunRecord {
    /// Always [`RUN_RECORD_SCHEMA`].
    pub schema: String,
    /// [`RUN_RECORD_SCHEMA_VERSION`].
    pub schema_version: u32,
    /// When the run started (UTC, RFC 3339, whole seconds).
    pub started_at: String,
    /// Wall-clock duration, seconds, to a tenth.
    pub seconds: f64,
    /// The Plumbline version that ran it.
    pub plumbline_version: String,
    /// Inputs changed for this run (`--set NAME=VALUE`), old and new values.
    pub inputs_set: Vec<AppliedInput>,
    /// Code cells executed, a failed one included.
    pub cells_executed: usize,
    /// How the run ended.
    pub status: RunStatus,
}

/// Why a notebook's run record could not be read.
#[derive(Debug, thiserror::Error)]
pub enum RecordError {
    /// The record is there but is not a run record this build reads.
    #[error("the run record in the notebook's metadata cannot be read: {0}")]
    Malformed(String),
}

impl RunRecord {
    /// Writes the record into `notebook`'s metadata.
    pub fn write_into(&self, notebook: &mut Notebook) -> Result<(), serde_json::Error> {
        let value = serde_json::to_value(self)?;
        notebook.set_metadata(METADATA_KEY, serde_json::json!({ "run": value }));
        Ok(())
    }

    /// Reads the record of `notebook`, `None` when it was never run headlessly.
    pub fn read_from(notebook: &Notebook) -> Result<Option<Self>, RecordError> {
        let Some(mut record) = notebook.metadata(METADATA_KEY).and_then(|m| m.get("run")).cloned() else {
            return Ok(None);
        };
        if let Some(object) = record.as_object_mut() {
            object.entry("schema").or_insert_with(|| Value::from(RUN_RECORD_SCHEMA));
            object.entry("schema_version").or_insert_with(|| Value::from(1));
        }
        let version = record.get("schema_version").and_then(Value::as_u64).unwrap_or(0);
        if version > u64::from(RUN_RECORD_SCHEMA_VERSION) {
            return Err(RecordError::Malformed(format!(
                "schema version {version} was written by a newer Plumbline; this build reads up to {RUN_RECORD_SCHEMA_VERSION}"
            )));
        }
        serde_json::from_value(record).map(Some).map_err(|e| RecordError::Malformed(e.to_string()))
    }
}
