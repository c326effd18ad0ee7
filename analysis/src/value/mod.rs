//! The valuation job: ratio studies of values against sale prices, sale-date
//! adjustment from a fitted time trend, and values for unsold subject
//! properties.
//!
//! * [`ratio_study`] — level and uniformity statistics (median, mean,
//!   weighted mean, COD, PRD, PRB, COV) with intervals, IQR trimming and
//!   grouping, each beside the IAAO range for the chosen property class.
//! * [`standards`] — those ranges and where they come from.
//! * [`time_adjust`] — sale prices moved to a valuation date.
//! * [`model_values`] — a fitted model's values for the rows of a frame;
//!   [`model_values_at`] the same values moved to a valuation date.
//!
//! Every figure here is an analytical aid, not an appraisal; local assessment
//! law and licensed practice govern.

mod ratio_study;
pub mod standards;
mod time;

pub use ratio_study::{ratio_study, GroupStudy, RatioOptions, RatioStatistics, RatioStudy};
pub use standards::{Judgement, PropertyClass};
pub use time::{model_values, model_values_at, time_adjust, Retransform, TimePoint};
