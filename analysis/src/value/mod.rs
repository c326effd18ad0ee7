//! The valuation job: ratio studies of values against sale prices, sale-date
//! adjustment from a fitted time trend, values for unsold subject properties
//! and for a whole roll, and the checks a model reviewer asks for.
//!
//! * [`ratio_study`] — level and uniformity statistics (median, mean,
//!   weighted mean, COD, PRD, PRB, COV) with intervals, IQR trimming and
//!   grouping, each beside the IAAO range for the chosen property class.
//! * [`ratio_tiers`] — the same statistics by price tier (vertical equity).
//! * [`value_accuracy`], [`holdout_accuracy`] — share within ±10 %/±20 %,
//!   forecast standard deviation and error buckets, in sample and held out.
//! * [`value_roll`] — every parcel's value from one run, with its latest sale.
//! * [`sales_chasing_check`] — sold against unsold parcels' value changes
//!   between two runs' rolls.
//! * [`standards`] — the ranges and where they come from.
//! * [`time_adjust`] — sale prices moved to a valuation date.
//! * [`model_values`] — a fitted model's values for the rows of a frame;
//!   [`model_values_at`] the same values moved to a valuation date.
//!
//! Every figure here is an analytical aid, not an appraisal; local assessment
//! law and licensed practice govern.

mod ratio_study;
mod roll;
mod sales_chasing;
pub mod standards;
mod tiers;
mod time;
mod value_accuracy;

pub use ratio_study::{ratio_study, GroupStudy, RatioOptions, RatioStatistics, RatioStudy};
pub(crate) use roll::roll_of;
pub use roll::{value_roll, RollParcel, RollSale, ValueRoll};
pub use sales_chasing::{rank_sum_test, sales_chasing_check, RankSumTest, SalesChasingCheck, ValueChange};
pub use standards::{Judgement, PropertyClass};
pub use tiers::{ratio_tiers, PriceTier, TierBasis, TierStudy};
pub use time::{model_values, model_values_at, time_adjust, Retransform, TimePoint};
pub use value_accuracy::{
    holdout_accuracy, value_accuracy, ErrorBucket, HoldoutAccuracy, ValueAccuracy, BUCKET_EDGES, WITHIN_NARROW,
    WITHIN_WIDE,
};
