//! Names of the documents Plumbline emits, shared by those who write them
//! ([`crate::render`]) and those who read them back ([`crate::drift`]); it
//! sits below both so that neither imports the other for a name.

/// MIME type of the machine-readable fit document.
pub const FIT_JSON_MIME: &str = "application/vnd.plumbline.fit+json";
/// MIME type of the machine-readable comparison document.
pub const COMPARISON_JSON_MIME: &str = "application/vnd.plumbline.comparison+json";
/// MIME type of the machine-readable ratio-study document.
pub const RATIO_JSON_MIME: &str = "application/vnd.plumbline.ratio-study+json";
/// MIME type of the machine-readable drift report (schema `plumbline.drift`).
pub const DRIFT_JSON_MIME: &str = "application/vnd.plumbline.drift+json";
