//! The one place that turns results into what people read: aligned plain text
//! for terminals, self-contained HTML for notebooks and reports, SVG charts
//! (from [`crate::plot`]), and machine-readable JSON — gathered per result in
//! a [`MimeBundle`] by the single display trait [`Report`].

mod accuracy_table;
mod appeal_page;
#[macro_use]
mod bundle;
mod diagnostics_text;
mod drift_report;
mod explain;
mod export;
mod fit_figures;
mod fit_report;
mod frame_report;
pub mod html;
mod live;
mod local_report;
mod numbers;
mod prose;
mod ratio_report;
mod result_reports;
mod strata_report;
mod text;
mod valuation_checks;

pub use accuracy_table::accuracy_table;
pub use appeal_page::{parcel_pages_document, parcel_pages_html, parcel_pages_text};
pub use bundle::{
    emit, CellValue, MimeBundle, Report, ShownInCells, COMPARISON_JSON_MIME, DRIFT_JSON_MIME, FIT_JSON_MIME,
    RATIO_JSON_MIME,
};
pub use diagnostics_text::{
    collinearity_text, comparison_text, cross_validation_text, flags_text, nested_text, tests_text,
};
pub use drift_report::{drift_html, drift_text};
pub use explain::{explanations, Explained};
pub use export::{fit_csv, fit_markdown};
pub use fit_report::{fit_html, fit_warnings, FitReport};
pub use frame_report::{frame_html, frame_text, ProfileReport};
pub use live::{
    clear_output, show, show_updatable, update, DisplayCommand, LiveProgress, KERNEL_DISPLAY_ENV, KERNEL_DISPLAY_MARKER,
};
pub use local_report::{local_html, local_text};
pub use numbers::{format_column, format_p_value, format_significant, format_trimmed};
pub use prose::VALUATION_CAUTION;
pub use ratio_report::{ratio_html, ratio_text};
pub use result_reports::AssumptionTests;
pub use strata_report::{stratified_html, stratified_text};
pub use text::{assembled_fit_text, fit_text, predictions_text};

// Every `Report` type of this crate, shown richly as a cell's last value.
shown_in_cells!(
    Explained<'_>,
    crate::diagnose::SpatialCheck,
    crate::value::TierStudy,
    crate::value::ValueAccuracy,
    crate::value::HoldoutAccuracy,
    crate::value::ValueRoll,
    crate::value::SalesChasingCheck,
    crate::value::RatioStudy,
    FitReport<'_>,
    crate::fit::Fit,
    crate::plot::Svg,
    crate::compare::NestedTest,
    crate::compare::Comparison,
    crate::compare::CrossValidationResult,
    AssumptionTests,
    crate::diagnose::Collinearity,
    crate::diagnose::RowFlags,
    crate::predict::Predictions,
    crate::data::Frame,
    ProfileReport,
    crate::data::Screen,
    LiveProgress,
    crate::drift::DriftReport,
    crate::strata::StratifiedFit,
    crate::local::LocalFit,
    crate::local::LocalSummary,
    crate::strata::StratifiedSummary,
    crate::appeal::ParcelPages,
);
