//! The cross-crate tests as one binary: each module one concern, named as
//! its test binary was (`cargo test -p plumbline-tests --test cross_crate
//! layers::` runs one).

#[path = "analysis/comparison.rs"]
mod comparison;
#[path = "analysis/properties.rs"]
mod fit_properties;
#[path = "analysis/errors.rs"]
mod input_errors;
#[path = "analysis/input_values.rs"]
mod input_values;
#[path = "analysis/layers.rs"]
mod layers;
#[path = "analysis/loading.rs"]
mod loading;
#[path = "analysis/location.rs"]
mod location;
#[path = "accuracy/nist.rs"]
mod nist_accuracy;
#[path = "render/plots.rs"]
mod plots;
#[path = "analysis/postgres.rs"]
mod postgres;
#[path = "render/reports.rs"]
mod reports;
#[path = "analysis/scale.rs"]
mod scale;
#[path = "analysis/sources.rs"]
mod sources;
#[path = "analysis/strata.rs"]
mod strata;
#[path = "analysis/valuation.rs"]
mod valuation;
