//! A compact, one-line way to write a model's terms — our own syntax, for the
//! command line and for quick cells.
//!
//! Terms are separated by commas. Each term is a column name, optionally with
//! a prefix saying how to use it; `A*B` is the interaction of two such terms.
//!
//! | token | meaning |
//! |---|---|
//! | `area` | numeric column as it is |
//! | `log:area` | natural log |
//! | `pow:area:0.5` | power |
//! | `center:age`, `std:age` | centred; standardized |
//! | `poly:age:3`, `orth:age:3` | raw / orthogonal polynomial of degree 3 |
//! | `cat:district` | categorical, most frequent level as reference |
//! | `cat:district=Wickerholm` | categorical with the named reference level |
//! | `months:sale_date:2023-01-01` | months since a date (whole months plus the day's fraction) |
//! | `days:sale_date:2023-01-01` | days since a date |
//! | `year:sale_date`, `quarter:sale_date`, `month:sale_date` | sale year, quarter (`2025 Q3`), month of the year (`03 Mar`) as categories; `=LEVEL` names the reference |
//! | `dist:x:y:4.2:3.1:Lantern Green` | distance of the coordinates in columns `x`, `y` from the place named last, at (4.2, 3.1) |
//! | `logdist:x:y:4.2:3.1:Lantern Green` | its natural log |
//! | `geodist:lon:lat:-93.63:42.03:Old Mill` | geodesic km on WGS 84 of longitude `lon`, latitude `lat` (degrees) from the place at (−93.63, 42.03); `loggeodist:` its log |
//! | `log:area*cat:district` | interaction |
//!
//! ```
//! use plumbline::model::parse_term_list;
//! let terms = parse_term_list("log:living_area, age, cat:district=Wickerholm, log:living_area*cat:district").unwrap();
//! assert_eq!(terms.len(), 4);
//! ```

use super::spec::{NamedPoint, Term, Transform};
use crate::error::{Error, Result};

/// Parses a comma-separated term list.
pub fn parse_term_list(text: &str) -> Result<Vec<Term>> {
    text.split(',').map(str::trim).filter(|t| !t.is_empty()).map(parse_term).collect()
}

fn parse_term(token: &str) -> Result<Term> {
    if let Some((left, right)) = token.split_once('*') {
        return Ok(parse_term(left.trim())?.times(parse_term(right.trim())?));
    }
    let bad = |why: &str| Error::Specification(format!("term `{token}`: {why}"));
    let geographic = token.starts_with("geodist:") || token.starts_with("loggeodist:");
    let distance_fields = ["dist:", "logdist:", "geodist:", "loggeodist:"].iter().find_map(|p| token.strip_prefix(p));
    if let Some(rest) = distance_fields {
        let fields: Vec<&str> = rest.splitn(5, ':').map(str::trim).collect();
        let [x, y, px, py, name] = fields.as_slice() else {
            return Err(bad("a distance term reads `dist:X:Y:PX:PY:NAME`, e.g. `dist:x:y:4.2:3.1:Lantern Green` \
                 (or `geodist:LON:LAT:PLON:PLAT:NAME` for longitude and latitude in degrees)"));
        };
        let coordinate = |s: &str| {
            s.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| bad("the place's coordinates must be numbers"))
        };
        if [x, y, name].iter().any(|s| s.is_empty()) {
            return Err(bad("a distance term needs both coordinate columns and the place's name"));
        }
        let place = if geographic {
            let (lon, lat) = (coordinate(px)?, coordinate(py)?);
            crate::spatial::geodesy::check_lon_lat(lon, lat, &|| format!("the place of the term `{token}`"))?;
            NamedPoint::geographic(*name, lon, lat)
        } else {
            NamedPoint::new(*name, coordinate(px)?, coordinate(py)?)
        };
        let term = Term::distance_from(*x, *y, place);
        return Ok(if token.starts_with("log") { term.log() } else { term });
    }
    let parts: Vec<&str> = token.splitn(3, ':').collect();
    let number = |s: &str| s.trim().parse::<f64>().map_err(|_| bad("expected a number after the column"));
    let degree =
        |s: &str| s.trim().parse::<u32>().map_err(|_| bad("expected a whole-number degree, e.g. `poly:age:2`"));
    let name = |s: &str| {
        let s = s.trim();
        if s.is_empty() {
            Err(bad("missing column name"))
        } else {
            Ok(s.to_string())
        }
    };
    Ok(match parts.as_slice() {
        [column] => Term::numeric(name(column)?),
        ["log", column] => Term::numeric(name(column)?).log(),
        ["center", column] => Term::numeric(name(column)?).center(),
        ["std", column] => Term::numeric(name(column)?).standardize(),
        ["pow", column, p] => Term::numeric(name(column)?).transformed(Transform::Power(number(p)?)),
        ["poly", column, d] => Term::numeric(name(column)?).polynomial(degree(d)?),
        ["orth", column, d] => Term::numeric(name(column)?).orthogonal_polynomial(degree(d)?),
        ["cat", rest] => with_reference(rest, Term::category)?,
        ["months", column, date] => Term::months_since(name(column)?, date.trim()),
        ["days", column, date] => Term::days_since(name(column)?, date.trim()),
        ["year", rest] => with_reference(rest, Term::sale_year)?,
        ["quarter", rest] => with_reference(rest, Term::sale_quarter)?,
        ["month", rest] => with_reference(rest, Term::month_of_year)?,
        [prefix, ..] => {
            return Err(bad(&format!(
                "unknown prefix `{prefix}:`; use log:, pow:C:P, center:, std:, poly:C:D, orth:C:D, cat:, months:C:DATE, days:C:DATE, year:, quarter:, month:, dist:X:Y:PX:PY:NAME, logdist:, geodist:LON:LAT:PLON:PLAT:NAME or loggeodist:"
            )))
        }
        [] => return Err(bad("empty term")),
    })
}

/// A categorical term on `COLUMN` or `COLUMN=REFERENCE`.
fn with_reference(text: &str, make: fn(String) -> Term) -> Result<Term> {
    let (column, level) = match text.split_once('=') {
        Some((column, level)) => (column.trim(), Some(level.trim())),
        None => (text.trim(), None),
    };
    if column.is_empty() {
        return Err(Error::Specification(format!("term `{text}`: missing column name")));
    }
    let term = make(column.to_string());
    Ok(match level {
        Some(level) => term.reference(level),
        None => term,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_every_form() {
        let terms =
            parse_term_list("a, log:b, pow:c:0.5, center:d, std:e, poly:f:2, orth:g:3, cat:h, cat:i=X, a*cat:h")
                .unwrap();
        let labels: Vec<String> = terms.iter().map(Term::label).collect();
        assert_eq!(
            labels,
            [
                "a",
                "log(b)",
                "c^0.5",
                "d (centred)",
                "e (standardized)",
                "f (powers 1–2)",
                "g (orthogonal, degree 3)",
                "h",
                "i",
                "a*h"
            ]
        );
        assert_eq!(terms[8], Term::category("i").reference("X"));
    }

    #[test]
    fn parses_date_terms() {
        let terms =
            parse_term_list("months:sale_date:2023-01-01, days:d:2024-02-29, year:d, quarter:d=2024 Q1, month:d")
                .unwrap();
        assert_eq!(terms[0], Term::months_since("sale_date", "2023-01-01"));
        assert_eq!(terms[1], Term::days_since("d", "2024-02-29"));
        assert_eq!(terms[2], Term::sale_year("d"));
        assert_eq!(terms[3], Term::sale_quarter("d").reference("2024 Q1"));
        assert_eq!(terms[4].label(), "d (month of year)");
    }

    #[test]
    fn parses_distance_terms() {
        let terms = parse_term_list("dist:x:y:4.2:-3.1:Lantern Green, logdist:e:n:0:0:Old Mill").unwrap();
        assert_eq!(terms[0], Term::distance_from("x", "y", NamedPoint::new("Lantern Green", 4.2, -3.1)));
        assert_eq!(terms[0].label(), "distance from Lantern Green");
        assert_eq!(terms[1].label(), "log(distance from Old Mill)");
        assert_eq!(terms[1].columns(), ["e", "n"]);
        let e = parse_term_list("dist:x:y:4.2:Lantern Green").unwrap_err().to_string();
        assert!(e.contains("dist:X:Y:PX:PY:NAME"), "{e}");
        let e = parse_term_list("dist:x:y:east:3:Green").unwrap_err().to_string();
        assert!(e.contains("coordinates must be numbers"), "{e}");
    }

    #[test]
    fn explains_mistakes() {
        let e = parse_term_list("poly:age").unwrap_err().to_string();
        assert!(e.contains("unknown prefix") || e.contains("degree"), "{e}");
        let e = parse_term_list("poly:age:two").unwrap_err().to_string();
        assert!(e.contains("whole-number degree"), "{e}");
        let e = parse_term_list("sqrt:age").unwrap_err().to_string();
        assert!(e.contains("unknown prefix `sqrt:`"), "{e}");
    }
}
