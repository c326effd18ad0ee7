//! The machine-readable results of a run, read from its files for
//! `plumbline diff`: a `plumbline fit --format json` document (one model, or
//! models by group with `--by`), a value roll, or every result bundle in the
//! outputs of an executed `.ipynb`, in order.

use super::document::Notebook;
use plumbline::documents::DocumentKind;
use plumbline::drift::RunResults;
use plumbline::strata::StratifiedSummary;
use plumbline::value::ValueRoll;
use serde_json::Value;
use std::path::Path;

/// Why a run's results could not be read.
#[derive(Debug, thiserror::Error)]
pub enum ResultsError {
    /// The file could not be read or parsed.
    #[error("cannot read `{path}`: {reason}")]
    Unreadable { path: String, reason: String },
    /// A document in the file cannot be read as its type.
    #[error(transparent)]
    Document(#[from] plumbline::Error),
    /// The file holds no result the drift report compares.
    #[error("`{path}` holds no Plumbline fit results (expected a `plumbline fit --format json` file or an executed notebook with fit or ratio-study outputs)")]
    NoResults { path: String },
}

/// Reads the results of one run from a `.json` fit document or an `.ipynb` notebook.
pub fn read_run(path: &Path) -> Result<RunResults, ResultsError> {
    let shown = path.display().to_string();
    let unreadable = |reason: String| ResultsError::Unreadable { path: shown.clone(), reason };
    let text = std::fs::read_to_string(path).map_err(|e| unreadable(e.to_string()))?;
    let root: Value = serde_json::from_str(&text).map_err(|e| unreadable(e.to_string()))?;
    let mut run = RunResults::new(shown.clone());
    let schema = root.get("schema").and_then(Value::as_str);
    if schema == Some("plumbline.fit") {
        run.add_document(plumbline::render::FIT_JSON_MIME, &root)?;
    } else if schema == Some(<ValueRoll as DocumentKind>::SCHEMA) {
        run.add_document(<ValueRoll as DocumentKind>::MIME, &root)?;
    } else if schema == Some(<StratifiedSummary as DocumentKind>::SCHEMA) {
        run.add_document(<StratifiedSummary as DocumentKind>::MIME, &root)?;
    } else if root.get("cells").is_some() {
        let notebook = Notebook::from_json(root).map_err(unreadable)?;
        for cell in 0..notebook.len() {
            for output in notebook.outputs(cell) {
                if let Some(data) = output.get("data").and_then(Value::as_object) {
                    for (mime, document) in data {
                        run.add_document(mime, document)?;
                    }
                }
            }
        }
    }
    if run.is_empty() {
        return Err(ResultsError::NoResults { path: shown });
    }
    Ok(run)
}
