//! Calendar dates: parsing, and the numbers and labels models build from a
//! sale date.
//!
//! Dates are stored as polars `Date` columns (days since 1970-01-01). The
//! default written form is ISO 8601's calendar date `YYYY-MM-DD`; any other
//! form is read with a per-column chrono format string (e.g. `%d/%m/%Y`).
//!
//! ## Months between two dates (the convention used throughout)
//!
//! A date `d` sits at the month position
//!
//! ```text
//! t(d) = 12·year + (month − 1) + (day − 1) / days_in_month(year, month)
//! ```
//!
//! and the months from `r` to `d` are `t(d) − t(r)`: whole calendar months plus
//! the day's fraction of its own month. Every calendar month thus has length
//! one whatever its number of days; the first of each month is a whole number
//! of months from the first of any other, and mid-month (the 16th of a 31-day
//! month) is 15/31 of a month on. This is the common practice of counting sale
//! months with a day fraction; days since a date are also offered for daily
//! trends.

use chrono::{Datelike, NaiveDate};
use polars::prelude::{DataFrame, DataType, TimeUnit};

/// The ISO 8601 calendar-date format, the default for date columns.
pub const ISO_DATE_FORMAT: &str = "%Y-%m-%d";

/// Days from 1970-01-01 to 0001-01-01 in chrono's proleptic Gregorian
/// day numbering (`NaiveDate::num_days_from_ce` of 1970-01-01).
const UNIX_EPOCH_DAYS_FROM_CE: i32 = 719_163;

/// Refuses a date, date-time or time of day in `data` that lies outside
/// the calendar (beyond chrono's years −262,143 to 262,142, or a time of day
/// past midnight): a damaged or hand-made Parquet or Arrow file can hold any
/// 32- or 64-bit number there, and showing such a value would otherwise stop
/// the program. `source` names the file in the error.
pub(crate) fn check_calendar_values(data: &DataFrame, source: &str) -> crate::Result<()> {
    const NANOS_PER_DAY: i64 = 86_400_000_000_000;
    for column in data.columns() {
        let series = column.as_materialized_series();
        let refuse = |row: usize, value: String, requirement: &str| crate::Error::OutOfRange {
            what: format!("the value of column `{}` at data row {} of {source}", column.name(), row + 1),
            requirement: requirement.into(),
            value,
        };
        match series.dtype() {
            DataType::Date => {
                for (row, days) in series.date()?.physical().iter().enumerate() {
                    if let Some(days) = days.filter(|&d| from_epoch_days(d).is_none()) {
                        return Err(refuse(row, format!("{days} days from 1970-01-01"), CALENDAR_RANGE));
                    }
                }
            }
            DataType::Datetime(unit, _) => {
                let per_day: i64 = match unit {
                    TimeUnit::Nanoseconds => NANOS_PER_DAY,
                    TimeUnit::Microseconds => NANOS_PER_DAY / 1_000,
                    TimeUnit::Milliseconds => NANOS_PER_DAY / 1_000_000,
                };
                for (row, value) in series.datetime()?.physical().iter().enumerate() {
                    let outside = |v: i64| {
                        i32::try_from(v.div_euclid(per_day)).ok().and_then(|d| from_epoch_days(d).map(|_| d)).is_none()
                    };
                    if let Some(value) = value.filter(|&v| outside(v)) {
                        return Err(refuse(row, format!("{value} ({unit:?} from 1970-01-01)"), CALENDAR_RANGE));
                    }
                }
            }
            DataType::Time => {
                for (row, nanos) in series.time()?.physical().iter().enumerate() {
                    if let Some(nanos) = nanos.filter(|n| !(0..NANOS_PER_DAY).contains(n)) {
                        return Err(refuse(row, format!("{nanos} ns after midnight"), "a time of day within one day"));
                    }
                }
            }
            _ => {}
        }
    }
    Ok(())
}

/// The calendar a date must lie in, as errors state it.
const CALENDAR_RANGE: &str = "a date between the years -262143 and 262142";

/// Parses `text` (trimmed) with a chrono format string.
pub fn parse_date(text: &str, format: &str) -> Option<NaiveDate> {
    NaiveDate::parse_from_str(text.trim(), format).ok()
}

/// Parses an ISO 8601 calendar date `YYYY-MM-DD`, quickly and strictly (four
/// year digits, two month digits, two day digits): the test used to infer
/// whether a text column holds dates.
pub fn parse_iso_date(text: &str) -> Option<NaiveDate> {
    let b = text.trim().as_bytes();
    if b.len() != 10 || b[4] != b'-' || b[7] != b'-' {
        return None;
    }
    let number =
        |s: &[u8]| s.iter().try_fold(0u32, |acc, &c| c.is_ascii_digit().then(|| acc * 10 + u32::from(c - b'0')));
    NaiveDate::from_ymd_opt(number(&b[0..4])? as i32, number(&b[5..7])?, number(&b[8..10])?)
}

/// Parses an ISO 8601 date given as an argument (a reference date, a
/// valuation date, a cut-off), refusing anything else with `what` named.
pub(crate) fn require_iso_date(what: impl Into<String>, text: &str) -> crate::Result<NaiveDate> {
    parse_iso_date(text).ok_or_else(|| crate::Error::OutOfRange {
        what: what.into(),
        requirement: "a calendar date written YYYY-MM-DD".into(),
        value: text.to_string(),
    })
}

/// Days since 1970-01-01 (the storage of a polars `Date`).
pub fn to_epoch_days(date: NaiveDate) -> i32 {
    date.num_days_from_ce() - UNIX_EPOCH_DAYS_FROM_CE
}

/// The date `days` after 1970-01-01.
pub fn from_epoch_days(days: i32) -> Option<NaiveDate> {
    NaiveDate::from_num_days_from_ce_opt(days.checked_add(UNIX_EPOCH_DAYS_FROM_CE)?)
}

/// Days in the month of `date` (28–31, Gregorian leap years).
pub fn days_in_month(date: NaiveDate) -> u32 {
    let (y, m) = (date.year(), date.month());
    let first_of_next =
        if m == 12 { NaiveDate::from_ymd_opt(y + 1, 1, 1) } else { NaiveDate::from_ymd_opt(y, m + 1, 1) };
    let first = NaiveDate::from_ymd_opt(y, m, 1);
    match (first, first_of_next) {
        (Some(a), Some(b)) => (b - a).num_days() as u32,
        _ => 31,
    }
}

/// The month position `t(d)` of the module documentation.
pub fn month_position(date: NaiveDate) -> f64 {
    12.0 * f64::from(date.year()) + f64::from(date.month0()) + f64::from(date.day0()) / f64::from(days_in_month(date))
}

/// Months from `reference` to `date`: `t(date) − t(reference)` (see the module
/// documentation); negative before the reference.
pub fn months_between(reference: NaiveDate, date: NaiveDate) -> f64 {
    // Whole months are exact integers in f64; only the day fractions round.
    let whole = 12 * (date.year() - reference.year()) + date.month0() as i32 - reference.month0() as i32;
    let fraction = |d: NaiveDate| f64::from(d.day0()) / f64::from(days_in_month(d));
    f64::from(whole) + fraction(date) - fraction(reference)
}

/// Days from `reference` to `date`; negative before the reference.
pub fn days_between(reference: NaiveDate, date: NaiveDate) -> f64 {
    (date - reference).num_days() as f64
}

/// The sale quarter as a label that sorts in time order: `2025 Q3`.
pub fn quarter_label(date: NaiveDate) -> String {
    format!("{} Q{}", date.year(), date.month0() / 3 + 1)
}

/// The month of the year as a label that sorts in calendar order: `03 Mar`.
pub fn month_of_year_label(date: NaiveDate) -> String {
    format!("{:02} {}", date.month(), date.format("%b"))
}

/// The calendar year as a label: `2025`.
pub fn year_label(date: NaiveDate) -> String {
    date.year().to_string()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(y: i32, m: u32, day: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(y, m, day).unwrap()
    }

    // Hand-computed from the Gregorian calendar: 2024 is a leap year.
    #[test]
    fn months_between_follows_the_documented_convention() {
        assert_eq!(months_between(d(2023, 1, 1), d(2026, 1, 1)), 36.0);
        assert_eq!(months_between(d(2023, 1, 1), d(2023, 3, 16)), 2.0 + 15.0 / 31.0);
        assert_eq!(months_between(d(2023, 1, 1), d(2024, 2, 29)), 13.0 + 28.0 / 29.0);
        assert_eq!(months_between(d(2023, 1, 1), d(2023, 2, 28)), 1.0 + 27.0 / 28.0);
        assert_eq!(months_between(d(2023, 1, 16), d(2023, 1, 1)), -15.0 / 31.0);
        assert_eq!(months_between(d(2023, 1, 31), d(2023, 2, 1)), 1.0 - 30.0 / 31.0);
        assert_eq!(days_between(d(2024, 2, 28), d(2024, 3, 1)), 2.0);
    }

    #[test]
    fn epoch_days_match_polars_storage() {
        assert_eq!(to_epoch_days(d(1970, 1, 1)), 0);
        assert_eq!(to_epoch_days(d(2000, 3, 1)), 11_017);
        assert_eq!(from_epoch_days(11_017), Some(d(2000, 3, 1)));
    }

    #[test]
    fn parses_iso_strictly_and_custom_formats() {
        assert_eq!(parse_iso_date("2024-02-29"), Some(d(2024, 2, 29)));
        for bad in ["2023-02-29", "2024-2-9", "20240229", "2024-13-01", "24-02-29x"] {
            assert_eq!(parse_iso_date(bad), None, "{bad}");
        }
        assert_eq!(parse_date("29/02/2024", "%d/%m/%Y"), Some(d(2024, 2, 29)));
        assert_eq!(quarter_label(d(2025, 8, 27)), "2025 Q3");
        assert_eq!(month_of_year_label(d(2025, 3, 1)), "03 Mar");
    }
}
