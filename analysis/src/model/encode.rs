//! What each term learns from the fitting rows, and how it turns rows into
//! design columns — the same way for the fitting data and for new data.

use super::spec::{Term, Transform};
use crate::error::{Error, Result};
use crate::numeric::DoubleDouble;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// One generated design column, held in double-double form where the
/// transform produced more digits than a double keeps (powers, products).
#[derive(Debug, Clone, PartialEq)]
pub struct GeneratedColumn {
    /// Display name, e.g. `living_area^2` or `district=Tidewright Quay`.
    pub name: String,
    /// Values rounded to double.
    pub hi: Vec<f64>,
    /// What rounding to double left out, when that is not zero everywhere.
    pub lo: Option<Vec<f64>>,
}

impl GeneratedColumn {
    fn from_dd(name: String, values: Vec<DoubleDouble>) -> Self {
        let hi: Vec<f64> = values.iter().map(|v| v.hi).collect();
        let lo = if values.iter().any(|v| v.lo != 0.0) { Some(values.iter().map(|v| v.lo).collect()) } else { None };
        Self { name, hi, lo }
    }

    fn from_f64(name: String, hi: Vec<f64>) -> Self {
        Self { name, hi, lo: None }
    }

    /// Value `i` in double-double form.
    pub fn value(&self, i: usize) -> DoubleDouble {
        DoubleDouble { hi: self.hi[i], lo: self.lo.as_ref().map_or(0.0, |lo| lo[i]) }
    }
}

/// Learned parameters of a numeric transform.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum NumericParams {
    /// The transform needs nothing from the data.
    Fixed,
    /// Mean (and, for standardizing, the sample standard deviation).
    Moments {
        /// Mean over the fitting rows.
        mean: f64,
        /// Sample standard deviation over the fitting rows.
        sd: f64,
    },
    /// Orthogonal-polynomial recurrence: `P_{k+1} = (x − alpha_k) P_k − beta_k P_{k−1}`,
    /// with `norms[k]² = Σ P_k²` over the fitting rows.
    Recurrence {
        /// The `alpha_k` of the recurrence.
        alpha: Vec<f64>,
        /// The `beta_k` of the recurrence.
        beta: Vec<f64>,
        /// `norms[k]`, the root of `Σ P_k²` over the fitting rows.
        norms: Vec<f64>,
    },
}

/// A term together with what it learned from the fitting rows.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub enum TermEncoding {
    /// A numeric column and its transform.
    Numeric {
        /// The column.
        column: String,
        /// Its transform.
        transform: Transform,
        /// What the transform learned from the fitting rows.
        params: NumericParams,
    },
    /// Indicator coding: one 0/1 column per entry of `coded_levels`.
    Category {
        /// The column.
        column: String,
        /// Levels with an indicator column, in design order.
        coded_levels: Vec<String>,
        /// The level without one (the baseline), if any.
        reference: Option<String>,
        /// Every level seen in the fitting rows, sorted.
        all_levels: Vec<String>,
    },
    /// Products of the two sides' columns.
    Interaction(Box<TermEncoding>, Box<TermEncoding>),
}

/// Column values the encoder reads, each already restricted to the rows in use.
pub struct RowValues<'a> {
    /// Numeric columns by name (every value present).
    pub numbers: &'a BTreeMap<String, Vec<f64>>,
    /// Label columns by name (every value present).
    pub labels: &'a BTreeMap<String, Vec<String>>,
    /// Original 0-based row index of each row in use (for messages).
    pub rows: &'a [usize],
    /// File line of an original row, when known (for messages).
    pub line_of: &'a dyn Fn(usize) -> Option<u64>,
}

impl RowValues<'_> {
    fn numbers(&self, column: &str) -> &[f64] {
        &self.numbers[column]
    }
    fn labels(&self, column: &str) -> &[String] {
        &self.labels[column]
    }
    fn domain_error(&self, transform: &str, column: &str, requirement: &str, i: usize, value: f64) -> Error {
        let row = self.rows[i];
        Error::TransformDomain {
            transform: transform.into(),
            column: column.into(),
            requirement: requirement.into(),
            row: row + 1,
            line: (self.line_of)(row),
            value,
        }
    }
}

/// Orders category labels: numerically when every label is a number, else by text.
pub fn sort_levels(levels: &mut [String]) {
    let all_numeric = levels.iter().all(|l| l.trim().parse::<f64>().is_ok());
    if all_numeric {
        levels.sort_by(|a, b| {
            let (x, y) = (a.trim().parse::<f64>().unwrap_or(0.0), b.trim().parse::<f64>().unwrap_or(0.0));
            x.total_cmp(&y).then_with(|| a.cmp(b))
        });
    } else {
        levels.sort();
    }
}

/// Learns a term's encoding from the fitting rows. `full_coding` asks a
/// categorical term to code every level (used for the first categorical term
/// of a model without intercept, so no level is forced to zero).
pub fn learn(term: &Term, values: &RowValues, full_coding: bool) -> Result<TermEncoding> {
    match term {
        Term::Numeric { column, transform } => {
            let x = values.numbers(column);
            let params = match transform {
                Transform::Center | Transform::Standardize => {
                    let (mean, sd) = mean_and_sd(x);
                    if *transform == Transform::Standardize && !(sd > 0.0) {
                        return Err(Error::ConstantColumn {
                            column: column.clone(),
                            value: mean,
                            action: "standardized".into(),
                        });
                    }
                    NumericParams::Moments { mean, sd }
                }
                Transform::OrthogonalPolynomial(degree) => orthogonal_recurrence(column, x, *degree)?,
                _ => NumericParams::Fixed,
            };
            Ok(TermEncoding::Numeric { column: column.clone(), transform: *transform, params })
        }
        Term::Category { column, reference } => {
            let labels = values.labels(column);
            let mut counts: BTreeMap<&str, usize> = BTreeMap::new();
            for l in labels {
                *counts.entry(l.as_str()).or_default() += 1;
            }
            category_encoding(column, reference.as_ref(), &counts, full_coding)
        }
        Term::Date { .. } | Term::Distance { .. } => learn(&term.resolved(), values, full_coding),
        Term::Interaction(a, b) => {
            Ok(TermEncoding::Interaction(Box::new(learn(a, values, false)?), Box::new(learn(b, values, false)?)))
        }
    }
}

/// Learns a term's encoding from the level counts of its label columns alone
/// (keyed by the name the encoder reads them under), for recipes learned from
/// row batches. Numeric terms must have a fixed transform (identity, log,
/// powers); `RecipeLearner` refuses the others before this is called.
pub fn learn_from_level_counts(
    term: &Term,
    level_counts: &BTreeMap<String, BTreeMap<String, usize>>,
    full_coding: bool,
) -> Result<TermEncoding> {
    match term {
        Term::Numeric { column, transform } => {
            Ok(TermEncoding::Numeric { column: column.clone(), transform: *transform, params: NumericParams::Fixed })
        }
        Term::Category { column, reference } => {
            let counts: BTreeMap<&str, usize> = level_counts
                .get(column)
                .map(|c| c.iter().map(|(level, &k)| (level.as_str(), k)).collect())
                .unwrap_or_default();
            category_encoding(column, reference.as_ref(), &counts, full_coding)
        }
        Term::Date { .. } | Term::Distance { .. } => {
            learn_from_level_counts(&term.resolved(), level_counts, full_coding)
        }
        Term::Interaction(a, b) => Ok(TermEncoding::Interaction(
            Box::new(learn_from_level_counts(a, level_counts, false)?),
            Box::new(learn_from_level_counts(b, level_counts, false)?),
        )),
    }
}

/// A category's coding from its level counts: levels in [`sort_levels`]
/// order, the reference named or else the most frequent level (the first in
/// level order on a tie), every level coded under `full_coding`.
fn category_encoding(
    column: &str,
    reference: Option<&String>,
    counts: &BTreeMap<&str, usize>,
    full_coding: bool,
) -> Result<TermEncoding> {
    let column = column.to_string();
    let mut all_levels: Vec<String> = counts.keys().map(|s| s.to_string()).collect();
    sort_levels(&mut all_levels);
    let reference = if full_coding {
        None
    } else {
        match reference {
            Some(r) if counts.contains_key(r.as_str()) => Some(r.clone()),
            Some(r) => {
                return Err(Error::UnknownLevel { column: column.clone(), level: r.clone(), levels: all_levels })
            }
            None => {
                let mut best: Option<(&String, usize)> = None;
                for level in &all_levels {
                    let c = counts[level.as_str()];
                    if best.is_none_or(|(_, bc)| c > bc) {
                        best = Some((level, c));
                    }
                }
                best.map(|(l, _)| l.clone())
            }
        }
    };
    let coded_levels = all_levels.iter().filter(|l| Some(*l) != reference.as_ref()).cloned().collect();
    Ok(TermEncoding::Category { column, coded_levels, reference, all_levels })
}

impl TermEncoding {
    /// How many design columns this term contributes: one per numeric
    /// column, its degree for a polynomial, one per coded level for a
    /// category, the product of both sides for an interaction. Known before
    /// any column is built, so that a design too large for memory is refused
    /// first.
    pub fn width(&self) -> usize {
        match self {
            TermEncoding::Numeric {
                transform: Transform::Polynomial(degree) | Transform::OrthogonalPolynomial(degree),
                ..
            } => *degree as usize,
            TermEncoding::Numeric { .. } => 1,
            TermEncoding::Category { coded_levels, .. } => coded_levels.len(),
            TermEncoding::Interaction(a, b) => a.width().saturating_mul(b.width()),
        }
    }

    /// The design columns this term contributes, evaluated on `values`' rows.
    pub fn columns(&self, values: &RowValues) -> Result<Vec<GeneratedColumn>> {
        match self {
            TermEncoding::Numeric { column, transform, params } => numeric_columns(column, *transform, params, values),
            TermEncoding::Category { column, coded_levels, all_levels, .. } => {
                let labels = values.labels(column);
                let known: std::collections::HashSet<&str> = all_levels.iter().map(String::as_str).collect();
                if let Some((i, unseen)) = labels.iter().enumerate().find(|(_, l)| !known.contains(l.as_str())) {
                    return Err(Error::Prediction(format!(
                        "data row {} has level `{unseen}` of `{column}`, which the fitting data did not contain (known levels: {})",
                        values.rows[i] + 1,
                        all_levels.join(", ")
                    )));
                }
                Ok(coded_levels
                    .iter()
                    .map(|level| {
                        let hi = labels.iter().map(|l| if l == level { 1.0 } else { 0.0 }).collect();
                        GeneratedColumn::from_f64(format!("{column}={level}"), hi)
                    })
                    .collect())
            }
            TermEncoding::Interaction(a, b) => {
                let left = a.columns(values)?;
                let right = b.columns(values)?;
                let mut out = Vec::with_capacity(left.len() * right.len());
                for l in &left {
                    for r in &right {
                        let product = (0..l.hi.len()).map(|i| l.value(i) * r.value(i)).collect();
                        out.push(GeneratedColumn::from_dd(format!("{}*{}", l.name, r.name), product));
                    }
                }
                Ok(out)
            }
        }
    }
}

fn numeric_columns(
    column: &str,
    transform: Transform,
    params: &NumericParams,
    values: &RowValues,
) -> Result<Vec<GeneratedColumn>> {
    let x = values.numbers(column);
    Ok(match (transform, params) {
        (Transform::Identity, _) => vec![GeneratedColumn::from_f64(column.to_string(), x.to_vec())],
        (Transform::Log, _) => {
            if let Some((i, &v)) = x.iter().enumerate().find(|(_, v)| !(**v > 0.0)) {
                return Err(values.domain_error("log", column, "positive values", i, v));
            }
            vec![GeneratedColumn::from_f64(format!("log({column})"), x.iter().map(|v| v.ln()).collect())]
        }
        (Transform::Power(p), _) => {
            let name = format!("{column}^{p}");
            if p.fract() == 0.0 && p.abs() <= 64.0 {
                if p < 0.0 {
                    if let Some((i, &v)) = x.iter().enumerate().find(|(_, v)| **v == 0.0) {
                        return Err(values.domain_error("a negative power", column, "non-zero values", i, v));
                    }
                }
                let k = p as i32;
                let powered = x.iter().map(|&v| dd_powi(v, k)).collect();
                vec![GeneratedColumn::from_dd(name, powered)]
            } else {
                if let Some((i, &v)) = x.iter().enumerate().find(|(_, v)| !(**v > 0.0)) {
                    return Err(values.domain_error("a fractional power", column, "positive values", i, v));
                }
                vec![GeneratedColumn::from_f64(name, x.iter().map(|v| v.powf(p)).collect())]
            }
        }
        (Transform::Center, NumericParams::Moments { mean, .. }) => {
            let centered = x.iter().map(|&v| DoubleDouble::from(v) - DoubleDouble::from(*mean)).collect();
            vec![GeneratedColumn::from_dd(format!("{column} (centred)"), centered)]
        }
        (Transform::Standardize, NumericParams::Moments { mean, sd }) => {
            let z = x
                .iter()
                .map(|&v| (DoubleDouble::from(v) - DoubleDouble::from(*mean)) / DoubleDouble::from(*sd))
                .collect();
            vec![GeneratedColumn::from_dd(format!("{column} (standardized)"), z)]
        }
        (Transform::Polynomial(degree), _) => (1..=degree)
            .map(|k| {
                let name = if k == 1 { column.to_string() } else { format!("{column}^{k}") };
                GeneratedColumn::from_dd(name, x.iter().map(|&v| dd_powi(v, k as i32)).collect())
            })
            .collect(),
        (Transform::OrthogonalPolynomial(degree), NumericParams::Recurrence { alpha, beta, norms }) => {
            let mut previous: Vec<DoubleDouble> = vec![DoubleDouble::ZERO; x.len()];
            let mut current: Vec<DoubleDouble> = vec![DoubleDouble::ONE; x.len()];
            let mut out = Vec::with_capacity(degree as usize);
            for k in 0..degree as usize {
                let next: Vec<DoubleDouble> = (0..x.len())
                    .map(|i| {
                        (DoubleDouble::from(x[i]) - DoubleDouble::from(alpha[k])) * current[i]
                            - previous[i].mul_f64(beta[k])
                    })
                    .collect();
                let scaled = next.iter().map(|v| *v / DoubleDouble::from(norms[k + 1])).collect();
                out.push(GeneratedColumn::from_dd(format!("{column} (orthogonal {})", k + 1), scaled));
                previous = std::mem::replace(&mut current, next);
            }
            out
        }
        (t, p) => unreachable!("transform {t:?} was learned with mismatched parameters {p:?}"),
    })
}

/// `x^k` in double-double arithmetic by binary powering (exact products).
pub fn dd_powi(x: f64, k: i32) -> DoubleDouble {
    let mut base = DoubleDouble::from(x);
    let mut result = DoubleDouble::ONE;
    let mut e = k.unsigned_abs();
    while e > 0 {
        if e & 1 == 1 {
            result *= base;
        }
        base *= base;
        e >>= 1;
    }
    if k < 0 {
        DoubleDouble::ONE / result
    } else {
        result
    }
}

/// Mean and sample standard deviation (divisor n − 1), accumulated in double-double.
fn mean_and_sd(x: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let sum: DoubleDouble = x.iter().map(|&v| DoubleDouble::from(v)).sum();
    let mean = sum / DoubleDouble::from(n);
    let ss: DoubleDouble = x
        .iter()
        .map(|&v| {
            let d = DoubleDouble::from(v) - mean;
            d * d
        })
        .sum();
    let sd = if x.len() > 1 { (ss / DoubleDouble::from(n - 1.0)).sqrt().to_f64() } else { 0.0 };
    (mean.to_f64(), sd)
}

/// The recurrence of orthogonal polynomials over the points `x` (Forsythe 1957).
fn orthogonal_recurrence(column: &str, x: &[f64], degree: u32) -> Result<NumericParams> {
    let mut distinct = x.to_vec();
    distinct.sort_by(f64::total_cmp);
    distinct.dedup();
    if distinct.len() <= degree as usize {
        return Err(Error::Specification(format!(
            "an orthogonal polynomial of degree {degree} in `{column}` needs at least {} distinct values; the fitting rows have {}",
            degree + 1,
            distinct.len()
        )));
    }
    let n = x.len();
    let mut alpha = Vec::with_capacity(degree as usize);
    let mut beta = Vec::with_capacity(degree as usize);
    let mut norms_sq = vec![DoubleDouble::from(n as f64)];
    let mut previous = vec![DoubleDouble::ZERO; n];
    let mut current = vec![DoubleDouble::ONE; n];
    for k in 0..degree as usize {
        let weighted: DoubleDouble = (0..n).map(|i| current[i] * current[i] * DoubleDouble::from(x[i])).sum();
        let a = weighted / norms_sq[k];
        let b = if k == 0 { DoubleDouble::ZERO } else { norms_sq[k] / norms_sq[k - 1] };
        let next: Vec<DoubleDouble> =
            (0..n).map(|i| (DoubleDouble::from(x[i]) - a) * current[i] - previous[i] * b).collect();
        norms_sq.push(next.iter().map(|v| *v * *v).sum());
        alpha.push(a.to_f64());
        beta.push(b.to_f64());
        previous = std::mem::replace(&mut current, next);
    }
    let norms = norms_sq.iter().map(|v| v.sqrt().to_f64()).collect();
    Ok(NumericParams::Recurrence { alpha, beta, norms })
}
