//! The machine-readable documents Plumbline writes, as types, and the one
//! way each is read back.
//!
//! Every document carries a `schema` name and a `schema_version`. Writers
//! (the command line's `--format json`, the notebook bundles of
//! [`crate::render`]) serialize these types; readers ([`crate::drift`],
//! `plumbline diff`) deserialize the same types through [`read_fit`],
//! [`read_comparison`] and [`read_ratio_study`], which upgrade older
//! versions and refuse newer ones with a message, so a renamed field can never
//! read as an empty value. The JSON Schema of each (feature `json-schema`) is
//! committed under `schemas/` and checked to be current by the test suite.
//!
//! | document | type | `schema` | version | MIME type |
//! |---|---|---|---|---|
//! | fit | [`FitDocument`] | `plumbline.fit` | [`FIT_SCHEMA_VERSION`] | [`crate::schema::FIT_JSON_MIME`] |
//! | comparison | [`ComparisonDocument`] | `plumbline.comparison` | [`COMPARISON_SCHEMA_VERSION`] | [`crate::schema::COMPARISON_JSON_MIME`] |
//! | ratio study | [`RatioStudyDocument`] | `plumbline.ratio-study` | [`RATIO_STUDY_SCHEMA_VERSION`] | [`crate::schema::RATIO_JSON_MIME`] |
//! | drift report | [`crate::drift::DriftReport`] | `plumbline.drift` | [`crate::drift::DRIFT_SCHEMA_VERSION`] | [`crate::schema::DRIFT_JSON_MIME`] |
//! | spatial check | [`Versioned`]`<`[`SpatialCheck`]`>` | `plumbline.spatial-check` | 2 | [`crate::schema::SPATIAL_CHECK_JSON_MIME`] |
//! | price tiers | [`Versioned`]`<`[`TierStudy`]`>` | `plumbline.price-tiers` | 1 | [`crate::schema::PRICE_TIERS_JSON_MIME`] |
//! | value accuracy | [`Versioned`]`<`[`ValueAccuracy`]`>` | `plumbline.value-accuracy` | 1 | [`crate::schema::VALUE_ACCURACY_JSON_MIME`] |
//! | holdout accuracy | [`Versioned`]`<`[`HoldoutAccuracy`]`>` | `plumbline.holdout-accuracy` | 1 | [`crate::schema::HOLDOUT_ACCURACY_JSON_MIME`] |
//! | value roll | [`Versioned`]`<`[`ValueRoll`]`>` | `plumbline.value-roll` | 2 | [`crate::schema::VALUE_ROLL_JSON_MIME`] |
//! | sales-chasing check | [`Versioned`]`<`[`SalesChasingCheck`]`>` | `plumbline.sales-chasing` | 1 | [`crate::schema::SALES_CHASING_JSON_MIME`] |
//! | local fit | [`Versioned`]`<`[`LocalSummary`]`>` | `plumbline.local-fit` | 2 | [`crate::schema::LOCAL_FIT_JSON_MIME`] |
//! | appeal pages | [`Versioned`]`<`[`ParcelPages`]`>` | `plumbline.parcel-pages` | 1 | [`crate::schema::PARCEL_PAGES_JSON_MIME`] |
//! | models by group | [`Versioned`]`<`[`StratifiedSummary`]`>` | `plumbline.stratified-fit` | 1 | [`crate::schema::STRATIFIED_FIT_JSON_MIME`] |
//!
//! The later documents share one wrapper, [`Versioned`], whose name and
//! version come from the body type's [`DocumentKind`]; [`read_document`] reads
//! any of them back.
//!
//! The run record of `plumbline run` lives in the kernel crate, beside the
//! notebook it describes.

use crate::appeal::ParcelPages;
use crate::compare::{Comparison, CrossValidationResult, NestedTest};
use crate::data::Provenance;
use crate::diagnose::{Collinearity, Influence, RowFlags, SpatialCheck, TestResult};
use crate::error::{Error, Result};
use crate::inference::FitSummary;
use crate::local::LocalSummary;
use crate::predict::Predictions;
use crate::schema::{
    HOLDOUT_ACCURACY_JSON_MIME, LOCAL_FIT_JSON_MIME, PARCEL_PAGES_JSON_MIME, PRICE_TIERS_JSON_MIME,
    SALES_CHASING_JSON_MIME, SPATIAL_CHECK_JSON_MIME, STRATIFIED_FIT_JSON_MIME, VALUE_ACCURACY_JSON_MIME,
    VALUE_ROLL_JSON_MIME,
};
use crate::strata::StratifiedSummary;
use crate::value::{HoldoutAccuracy, RatioStudy, SalesChasingCheck, TierStudy, ValueAccuracy, ValueRoll};
use serde::de::DeserializeOwned;
use serde::{Deserialize, Serialize};
use serde_json::Value;

pub use crate::inference::SUMMARY_SCHEMA_VERSION as FIT_SCHEMA_VERSION;

/// `schema` of a fit document.
pub const FIT_SCHEMA: &str = "plumbline.fit";
/// `schema` of a comparison document.
pub const COMPARISON_SCHEMA: &str = "plumbline.comparison";
/// Version of [`ComparisonDocument`]. 2: nested tests name the full model's
/// residual degrees of freedom `residual_df_full`; 3: the notebook bundle of a
/// side-by-side table carries this same document (`rows_dropped`, `data` and
/// each model's `terms` may then be absent).
pub const COMPARISON_SCHEMA_VERSION: u32 = 3;
/// `schema` of a ratio-study document.
pub const RATIO_STUDY_SCHEMA: &str = "plumbline.ratio-study";
/// Version of [`RatioStudyDocument`]. 1 is the first versioned form; earlier
/// documents had no `schema` field and read as version 1. 2 adds the
/// optional `tiers` and `accuracy` sections (`plumbline ratio --tiers N
/// --accuracy`); a version 1 document reads as one without them.
pub const RATIO_STUDY_SCHEMA_VERSION: u32 = 2;

/// The fit document: the summary every fit has, plus the sections the
/// command line adds on request (`--predict`, `--diagnose`, `--influence`).
/// The notebook bundle of a fit is this document with no optional section.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct FitDocument {
    /// Coefficients, fit statistics and provenance.
    #[serde(flatten)]
    pub summary: FitSummary,
    /// Predictions for new rows, when asked for.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub predictions: Option<Predictions>,
    /// Assumption tests, collinearity and rows to check, when asked for.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub diagnostics: Option<FitDiagnostics>,
    /// Per-row leverage, studentized residuals and Cook's distance, when asked for.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub influence: Option<Influence>,
    /// Moran's I of the residuals over the sales' places, when asked for
    /// (`--spatial-check`; fit document version 3).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub spatial: Option<SpatialCheck>,
}

impl From<FitSummary> for FitDocument {
    fn from(summary: FitSummary) -> Self {
        Self { summary, predictions: None, diagnostics: None, influence: None, spatial: None }
    }
}

/// The diagnostics section of a fit document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct FitDiagnostics {
    /// Tests of the model's assumptions.
    pub tests: Vec<TestResult>,
    /// How much terms moving together widen the intervals.
    pub collinearity: Collinearity,
    /// Sales beyond the flag cut-offs.
    pub flagged_rows: RowFlags,
}

/// One model of a comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ComparedModel {
    /// The model's name (`A`, `B`, … on the command line; the caller's in code).
    pub name: String,
    /// The terms as the user wrote them (command line only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub terms: Option<String>,
}

/// A nested test between two neighbouring models, or why there is none.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct NestedEntry {
    /// The smaller model's name.
    pub restricted: String,
    /// The larger model's name.
    pub full: String,
    /// The F test, when the first model is nested in the second.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub test: Option<NestedTest>,
    /// Why the two were not compared, otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub not_comparable: Option<String>,
}

/// The cross-validation of one model.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ValidationEntry {
    /// The model's name.
    pub model: String,
    /// Fold scores and their summary.
    pub result: CrossValidationResult,
}

/// The comparison document: candidate models on one set of rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct ComparisonDocument {
    /// Always [`COMPARISON_SCHEMA`].
    pub schema: String,
    /// [`COMPARISON_SCHEMA_VERSION`].
    pub schema_version: u32,
    /// The models, in the order given.
    pub models: Vec<ComparedModel>,
    /// Rows every model was fitted on.
    pub rows_used: usize,
    /// Rows left out because some model's column was missing (command line only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rows_dropped: Option<usize>,
    /// Coefficients aligned by term, and whole-fit figures.
    pub table: Comparison,
    /// Nested tests between neighbours, in the order given.
    #[serde(default)]
    pub nested: Vec<NestedEntry>,
    /// Cross-validation of each model, when asked for.
    #[serde(default)]
    pub cross_validation: Vec<ValidationEntry>,
    /// Provenance of the data (command line only).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub data: Option<Provenance>,
}

impl ComparisonDocument {
    /// The document of a side-by-side table alone (what a notebook shows).
    pub fn of_table(table: &Comparison) -> Self {
        Self {
            schema: COMPARISON_SCHEMA.into(),
            schema_version: COMPARISON_SCHEMA_VERSION,
            models: table.models.iter().map(|m| ComparedModel { name: m.name.clone(), terms: None }).collect(),
            rows_used: table.models.first().map_or(0, |m| m.n_obs),
            rows_dropped: None,
            table: table.clone(),
            nested: Vec::new(),
            cross_validation: Vec::new(),
            data: None,
        }
    }
}

/// The ratio-study document.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct RatioStudyDocument {
    /// Always [`RATIO_STUDY_SCHEMA`].
    pub schema: String,
    /// [`RATIO_STUDY_SCHEMA_VERSION`].
    pub schema_version: u32,
    /// Level, uniformity and vertical equity, overall and per group.
    #[serde(flatten)]
    pub study: RatioStudy,
    /// The statistics by price tier, when asked for.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tiers: Option<TierStudy>,
    /// Value accuracy figures, when asked for.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub accuracy: Option<ValueAccuracy>,
}

impl From<RatioStudy> for RatioStudyDocument {
    fn from(study: RatioStudy) -> Self {
        Self {
            schema: RATIO_STUDY_SCHEMA.into(),
            schema_version: RATIO_STUDY_SCHEMA_VERSION,
            study,
            tiers: None,
            accuracy: None,
        }
    }
}

/// A result type written as a document of its own (see [`Versioned`]).
pub trait DocumentKind: Serialize + DeserializeOwned + Clone {
    /// The document's `schema` name.
    const SCHEMA: &'static str;
    /// The newest version this build writes and reads.
    const VERSION: u32;
    /// Its MIME type in notebook bundles.
    const MIME: &'static str;
    /// What it is, in words, for error messages.
    const WHAT: &'static str;

    /// Checks what the types alone cannot: that the numbers agree with one
    /// another as this build writes them (an interval holds its estimate…).
    /// The reason names the field. By default there is nothing to check.
    fn check_consistent(&self) -> std::result::Result<(), String> {
        Ok(())
    }
}

/// The coefficients of a fit read back must be as a fit writes them: each
/// named once, each standard error non-negative and each interval holding
/// its estimate. A
/// document edited by hand that breaks this would make `plumbline diff` call
/// a coefficient moved when compared with itself; it is refused instead,
/// naming the coefficient.
fn check_fit_summary(summary: &FitSummary, place: &str) -> std::result::Result<(), String> {
    for (i, c) in summary.coefficients.iter().enumerate() {
        if summary.coefficients[..i].iter().any(|earlier| earlier.term == c.term) {
            return Err(format!("{place}coefficient `{}` appears twice", c.term));
        }
        if !(c.std_error >= 0.0) {
            return Err(format!("{place}coefficient `{}` has a negative standard error ({})", c.term, c.std_error));
        }
        if !(c.ci_low <= c.estimate && c.estimate <= c.ci_high) {
            return Err(format!(
                "{place}coefficient `{}` has the interval [{}, {}], which does not hold its estimate {}",
                c.term, c.ci_low, c.ci_high, c.estimate
            ));
        }
    }
    Ok(())
}

impl DocumentKind for StratifiedSummary {
    const SCHEMA: &'static str = "plumbline.stratified-fit";
    const VERSION: u32 = 1;
    const MIME: &'static str = STRATIFIED_FIT_JSON_MIME;
    const WHAT: &'static str = "stratified-fit";

    fn check_consistent(&self) -> std::result::Result<(), String> {
        for stratum in &self.strata {
            if let Some(fit) = &stratum.fit {
                check_fit_summary(fit, &format!("group `{}`: ", stratum.group))?;
            }
        }
        match &self.pooled {
            Some(pooled) => check_fit_summary(pooled, "the pooled model: "),
            None => Ok(()),
        }
    }
}

/// A document made of a result's own fields plus `schema` and
/// `schema_version`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[cfg_attr(feature = "json-schema", derive(schemars::JsonSchema))]
pub struct Versioned<T> {
    /// The body type's [`DocumentKind::SCHEMA`].
    pub schema: String,
    /// The body type's [`DocumentKind::VERSION`].
    pub schema_version: u32,
    /// The result.
    #[serde(flatten)]
    pub body: T,
}

impl<T: DocumentKind> Versioned<T> {
    /// Wraps `body` at the current version.
    pub fn new(body: T) -> Self {
        Self { schema: T::SCHEMA.into(), schema_version: T::VERSION, body }
    }
}

/// Writes `body` as its compact JSON document.
pub fn document_json<T: DocumentKind>(body: &T) -> Result<String> {
    to_json(&Versioned::new(body.clone()), T::WHAT)
}

/// Reads a [`Versioned`] document of kind `T`, refusing another kind and a
/// newer version. `origin` names where it came from in the error.
pub fn read_document<T: DocumentKind>(document: Value, origin: &str) -> Result<Versioned<T>> {
    let what = format!("the {} document in {origin}", T::WHAT);
    check_version(&document, T::SCHEMA, T::VERSION, &what)?;
    let read: Versioned<T> = typed(document, what.clone())?;
    read.body.check_consistent().map_err(|reason| Error::Document { what, reason })?;
    Ok(read)
}

macro_rules! document_kind {
    ($type:ty, $schema:literal, $version:literal, $mime:expr, $what:literal) => {
        impl DocumentKind for $type {
            const SCHEMA: &'static str = $schema;
            const VERSION: u32 = $version;
            const MIME: &'static str = $mime;
            const WHAT: &'static str = $what;
        }
    };
}

// Spatial check 2: the options say whether the places are planar or geographic
// (`coordinates`); version 1 documents read as planar.
document_kind!(SpatialCheck, "plumbline.spatial-check", 2, SPATIAL_CHECK_JSON_MIME, "spatial-check");
document_kind!(TierStudy, "plumbline.price-tiers", 1, PRICE_TIERS_JSON_MIME, "price-tiers");
document_kind!(ValueAccuracy, "plumbline.value-accuracy", 1, VALUE_ACCURACY_JSON_MIME, "value-accuracy");
document_kind!(HoldoutAccuracy, "plumbline.holdout-accuracy", 1, HOLDOUT_ACCURACY_JSON_MIME, "holdout-accuracy");
// Value roll 2: a parcel without a value may say why (`not_valued`); version 1 reads unchanged.
document_kind!(ValueRoll, "plumbline.value-roll", 2, VALUE_ROLL_JSON_MIME, "value-roll");
document_kind!(SalesChasingCheck, "plumbline.sales-chasing", 1, SALES_CHASING_JSON_MIME, "sales-chasing");
document_kind!(ParcelPages, "plumbline.parcel-pages", 1, PARCEL_PAGES_JSON_MIME, "parcel-pages");
// Local fit 2: both models scored on held-out sales (`holdout`), when asked
// for; version 1 documents read unchanged.
document_kind!(LocalSummary, "plumbline.local-fit", 2, LOCAL_FIT_JSON_MIME, "local-fit");

/// Serializes a document as compact JSON.
pub fn to_json<T: Serialize>(document: &T, what: &'static str) -> Result<String> {
    serde_json::to_string(document).map_err(|cause| Error::Serialization { what, cause })
}

/// Serializes a document as indented JSON ending in a newline (the command line's form).
pub fn to_pretty_json<T: Serialize>(document: &T, what: &'static str) -> Result<String> {
    serde_json::to_string_pretty(document).map(|s| s + "\n").map_err(|cause| Error::Serialization { what, cause })
}

/// The `schema` name of a JSON value, if it has one.
pub fn schema_name(document: &Value) -> Option<&str> {
    document.get("schema").and_then(Value::as_str)
}

/// Reads a fit document, upgrading version 1 (`df_model`, `df_resid`) and
/// refusing versions newer than this build's. `origin` names where it came
/// from in the error.
pub fn read_fit(mut document: Value, origin: &str) -> Result<FitDocument> {
    let what = format!("the fit document in {origin}");
    let version = check_version(&document, FIT_SCHEMA, FIT_SCHEMA_VERSION, &what)?;
    if version == 1 {
        if let Some(object) = document.as_object_mut() {
            for (old, new) in [("df_model", "model_df"), ("df_resid", "residual_df")] {
                if let Some(value) = object.remove(old) {
                    object.insert(new.into(), value);
                }
            }
        }
    }
    let read: FitDocument = typed(document, what.clone())?;
    check_fit_summary(&read.summary, "").map_err(|reason| Error::Document { what, reason })?;
    Ok(read)
}

/// Reads a comparison document (versions 2 and 3 read alike: version 3 only
/// allowed fields to be absent).
pub fn read_comparison(document: Value, origin: &str) -> Result<ComparisonDocument> {
    let what = format!("the comparison document in {origin}");
    let version = check_version(&document, COMPARISON_SCHEMA, COMPARISON_SCHEMA_VERSION, &what)?;
    if version < 2 {
        return Err(Error::Document {
            what,
            reason: format!(
                "schema version {version} predates the nested tests' `residual_df_full`; rerun the comparison"
            ),
        });
    }
    typed(document, what)
}

/// Reads a ratio-study document; one without a `schema` field (written before
/// ratio studies were versioned) reads as version 1.
pub fn read_ratio_study(mut document: Value, origin: &str) -> Result<RatioStudyDocument> {
    let what = format!("the ratio-study document in {origin}");
    if let Some(object) = document.as_object_mut() {
        object.entry("schema").or_insert_with(|| RATIO_STUDY_SCHEMA.into());
        object.entry("schema_version").or_insert_with(|| 1.into());
    }
    check_version(&document, RATIO_STUDY_SCHEMA, RATIO_STUDY_SCHEMA_VERSION, &what)?;
    typed(document, what)
}

/// Checks the `schema` name and returns the version, refusing a newer one.
fn check_version(document: &Value, schema: &str, newest: u32, what: &str) -> Result<u32> {
    let refuse = |reason: String| Error::Document { what: what.to_string(), reason };
    match schema_name(document) {
        Some(name) if name == schema => {}
        Some(other) => return Err(refuse(format!("it is a `{other}` document, not `{schema}`"))),
        None => return Err(refuse(format!("it has no `schema` field (expected `{schema}`)"))),
    }
    let version = document
        .get("schema_version")
        .and_then(Value::as_u64)
        .ok_or_else(|| refuse("it has no whole-number `schema_version`".into()))?;
    let version = u32::try_from(version).unwrap_or(u32::MAX);
    if version > newest {
        return Err(refuse(format!(
            "it is schema version {version}, written by a newer Plumbline; this build reads up to version {newest} — update Plumbline"
        )));
    }
    Ok(version)
}

fn typed<T: for<'de> Deserialize<'de>>(document: Value, what: String) -> Result<T> {
    serde_json::from_value(document)
        .map_err(|e| Error::Document { what, reason: format!("{e}; was it edited by hand?") })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_newer_version_is_refused_with_a_message() {
        let document = serde_json::json!({ "schema": FIT_SCHEMA, "schema_version": FIT_SCHEMA_VERSION + 1 });
        let message = read_fit(document, "q3.json").expect_err("newer version").to_string();
        assert!(message.contains("newer Plumbline") && message.contains("q3.json"), "{message}");
    }

    #[test]
    fn a_document_of_another_kind_is_refused() {
        let document = serde_json::json!({ "schema": COMPARISON_SCHEMA, "schema_version": 3 });
        let message = read_fit(document, "run.json").expect_err("wrong kind").to_string();
        assert!(message.contains("`plumbline.comparison` document"), "{message}");
    }

    #[test]
    fn a_missing_field_is_an_error_not_an_empty_value() {
        let document =
            serde_json::json!({ "schema": FIT_SCHEMA, "schema_version": FIT_SCHEMA_VERSION, "target": "price" });
        let message = read_fit(document, "run.json").expect_err("fields missing").to_string();
        assert!(message.contains("missing field"), "{message}");
    }
}
