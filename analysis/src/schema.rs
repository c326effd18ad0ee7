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
/// MIME type of the spatial check of a fit's residuals.
pub const SPATIAL_CHECK_JSON_MIME: &str = "application/vnd.plumbline.spatial-check+json";
/// MIME type of ratio statistics by price tier.
pub const PRICE_TIERS_JSON_MIME: &str = "application/vnd.plumbline.price-tiers+json";
/// MIME type of value accuracy figures.
pub const VALUE_ACCURACY_JSON_MIME: &str = "application/vnd.plumbline.value-accuracy+json";
/// MIME type of value accuracy in sample and on held-out sales.
pub const HOLDOUT_ACCURACY_JSON_MIME: &str = "application/vnd.plumbline.holdout-accuracy+json";
/// MIME type of a value roll (every parcel's value from one run).
pub const VALUE_ROLL_JSON_MIME: &str = "application/vnd.plumbline.value-roll+json";
/// MIME type of a set of models fitted within each group of a column.
pub const STRATIFIED_FIT_JSON_MIME: &str = "application/vnd.plumbline.stratified-fit+json";
/// MIME type of the appeal pages document (`plumbline.parcel-pages`).
pub const PARCEL_PAGES_JSON_MIME: &str = "application/vnd.plumbline.parcel-pages+json";
/// MIME type of a local (geographically weighted) fit.
pub const LOCAL_FIT_JSON_MIME: &str = "application/vnd.plumbline.local-fit+json";
/// MIME type of the sales-chasing check between two runs.
pub const SALES_CHASING_JSON_MIME: &str = "application/vnd.plumbline.sales-chasing+json";

/// Reads a number that JSON may hold as `null`: `serde_json` writes a
/// non-finite `f64` (a perfect fit's infinite log-likelihood, an undefined
/// R²) as `null`, and this reads it back as NaN instead of failing. The
/// value's meaning is kept as "not a number", never as zero.
pub fn number_or_null<'de, D: serde::Deserializer<'de>>(deserializer: D) -> Result<f64, D::Error> {
    <Option<f64> as serde::Deserialize>::deserialize(deserializer).map(|value| value.unwrap_or(f64::NAN))
}
