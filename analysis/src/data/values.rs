//! Reading single values as people write them, and what to do with values
//! that are not finite numbers.
//!
//! Two rules keep a bad cell from becoming a wrong answer without a word:
//!
//! * A number written the way a spreadsheet shows it (`$250,000`, `250 000`,
//!   `12.5%`) is never read as a plain number by accident: a plain numeric
//!   column refuses it and the message names the option that reads it
//!   ([`parse_formatted_number`], column type `formatted-number`).
//! * A value that is not a finite number (NaN, ±infinity, or a literal beyond
//!   the range of a 64-bit float) is refused where a model uses it, unless the
//!   user said such values mean "missing" ([`NonFinite`]).

use serde::{Deserialize, Serialize};

/// What a frame does with a non-finite number (NaN, ±∞, or a written value
/// beyond ±1.797·10³⁰⁸ that parsed as ∞) in a column that is used as numbers.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub enum NonFinite {
    /// Refuse: the use fails with the column, the row and the file line.
    #[default]
    Refuse,
    /// Treat the value as missing: the row is dropped like one with an empty
    /// field, and counted separately in the fit's account of dropped rows.
    AsMissing,
}

impl std::str::FromStr for NonFinite {
    type Err = String;
    fn from_str(s: &str) -> Result<Self, String> {
        match s.to_ascii_lowercase().as_str() {
            "refuse" | "error" => Ok(Self::Refuse),
            "missing" | "as-missing" => Ok(Self::AsMissing),
            other => Err(format!("unknown non-finite rule `{other}`; use `refuse` or `missing`")),
        }
    }
}

/// Currency signs a formatted number may carry before or after its digits.
const CURRENCY_SIGNS: [char; 5] = ['$', '€', '£', '¥', '₹'];

/// Characters accepted between groups of three digits: comma, space, no-break
/// space (U+00A0), narrow no-break space (U+202F, the SI thin space), and the
/// apostrophe used in Switzerland.
const GROUP_SEPARATORS: [char; 5] = [',', ' ', '\u{a0}', '\u{202f}', '\''];

/// Reads a number written as a spreadsheet displays it.
///
/// Accepted, in this order: an optional sign (`-`, `+`) or accounting
/// parentheses for a negative amount; an optional currency sign (`$ € £ ¥ ₹`)
/// before or after the digits; digits, optionally grouped by threes with one
/// separator used throughout (`,`, space, no-break space, narrow no-break
/// space or `'`); an optional `.` and fraction digits; an optional trailing
/// `%`, which divides by 100 (`12.5%` reads as `0.125`).
///
/// Grouping is checked strictly — the first group has one to three digits and
/// every later group exactly three — so a decimal-comma number such as
/// `250.000,50` is refused rather than misread. The cleaned digits are parsed
/// by the standard library's correctly rounded decimal conversion.
pub fn parse_formatted_number(text: &str) -> Option<f64> {
    let mut s = text.trim();
    let mut negative = false;
    if let Some(inner) = s.strip_prefix('(').and_then(|r| r.strip_suffix(')')) {
        negative = true;
        s = inner.trim();
    }
    let mut percent = false;
    if let Some(rest) = s.strip_suffix('%') {
        percent = true;
        s = rest.trim_end();
    }
    let mut take_sign = |s: &mut &str| {
        if let Some(rest) = s.strip_prefix('-') {
            negative = !negative;
            *s = rest.trim_start();
        } else if let Some(rest) = s.strip_prefix('+') {
            *s = rest.trim_start();
        }
    };
    take_sign(&mut s);
    if let Some(rest) = s.strip_prefix(CURRENCY_SIGNS) {
        s = rest.trim_start();
        take_sign(&mut s);
    } else if let Some(rest) = s.strip_suffix(CURRENCY_SIGNS) {
        s = rest.trim_end();
    }
    let (integer, fraction) = match s.split_once('.') {
        Some((i, f)) => (i, Some(f)),
        None => (s, None),
    };
    let digits = ungroup(integer)?;
    let mut clean = String::with_capacity(s.len() + 2);
    if negative {
        clean.push('-');
    }
    clean.push_str(&digits);
    if let Some(f) = fraction {
        if f.is_empty() || !f.bytes().all(|b| b.is_ascii_digit()) {
            return None;
        }
        clean.push('.');
        clean.push_str(f);
    }
    let value: f64 = clean.parse().ok()?;
    Some(if percent { value / 100.0 } else { value })
}

/// The digits of an integer part, with grouping checked and removed.
fn ungroup(integer: &str) -> Option<String> {
    if integer.is_empty() {
        return None;
    }
    let separator = integer.chars().find(|c| !c.is_ascii_digit());
    let Some(separator) = separator else { return Some(integer.to_string()) };
    if !GROUP_SEPARATORS.contains(&separator) {
        return None;
    }
    let groups: Vec<&str> = integer.split(separator).collect();
    let first_ok = (1..=3).contains(&groups[0].len());
    let rest_ok = groups[1..].iter().all(|g| g.len() == 3);
    let all_digits = groups.iter().all(|g| g.bytes().all(|b| b.is_ascii_digit()));
    (first_ok && rest_ok && all_digits).then(|| groups.concat())
}

/// Why a value that is not a plain number might still be meant as one, as a
/// hint to add to the refusal (`None` when nothing suggests it).
pub(crate) fn number_hint(column: &str, text: &str) -> Option<String> {
    let trimmed = text.trim();
    if trimmed.starts_with('#')
        && trimmed.len() > 1
        && trimmed[1..].chars().all(|c| c.is_ascii_uppercase() || "/0!?".contains(c))
    {
        return Some(format!(
            "`{trimmed}` is a spreadsheet error value; mark it missing with the null marker `{trimmed}` (`--null '{trimmed}'`)"
        ));
    }
    if parse_formatted_number(trimmed).is_some() {
        return Some(format!(
            "it is a number written with a currency sign, digit grouping or a percent sign; read such values with the column type \
             `formatted-number` (`--column-type {column}=formatted-number`, or `CsvOptions::column_type(\"{column}\", ColumnType::FormattedNumber)`)"
        ));
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_spreadsheet_numbers() {
        let cases = [
            ("$250,000", 250_000.0),
            ("250 000", 250_000.0),
            ("250\u{a0}000", 250_000.0),
            ("1'234'567.5", 1_234_567.5),
            ("12.5%", 0.125),
            ("-$1,200.50", -1_200.5),
            ("$-1,200.50", -1_200.5),
            ("(1,200)", -1_200.0),
            ("€ 99", 99.0),
            ("99 €", 99.0),
            ("1234", 1234.0),
            ("0.1", 0.1),
        ];
        for (text, expected) in cases {
            assert_eq!(parse_formatted_number(text), Some(expected), "{text}");
        }
    }

    #[test]
    fn refuses_ambiguous_grouping() {
        for text in ["250.000,50", "25,00", "1,2345", ",100", "1,,000", "12a", "$", "", "1. 5", "1,000 000"] {
            assert_eq!(parse_formatted_number(text), None, "{text}");
        }
    }

    #[test]
    fn hints_name_the_option() {
        let hint = number_hint("sale_price", "$250,000").unwrap();
        assert!(hint.contains("--column-type sale_price=formatted-number"), "{hint}");
        assert!(number_hint("x", "#N/A").unwrap().contains("--null '#N/A'"));
        assert!(number_hint("x", "twelve").is_none());
    }
}
