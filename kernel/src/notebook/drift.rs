//! What moved between two runs of a study.
//!
//! Inputs are fit documents (`application/vnd.plumbline.fit+json`, schema
//! `plumbline.fit`): a `.json` file written by `plumbline fit --format json`,
//! or every fit bundle found, in order, in the outputs of an `.ipynb` notebook.
//! Fits are paired by position. For each pair we report the data provenance
//! (hash, rows), every coefficient whose new estimate lies outside the old
//! confidence interval, terms that appeared or disappeared, and the change in
//! n, R², adjusted R² and residual standard error.

use serde::Serialize;
use serde_json::Value;
use std::path::Path;

/// Why a run could not be read.
#[derive(Debug, thiserror::Error)]
pub enum DriftError {
    /// The file could not be read or parsed.
    #[error("cannot read `{path}`: {reason}")]
    Unreadable { path: String, reason: String },
    /// The file holds no fit document.
    #[error("`{path}` holds no Plumbline fit results (expected a `plumbline fit --format json` file or a notebook with fit outputs)")]
    NoFits { path: String },
}

/// One coefficient across the two runs.
#[derive(Debug, Clone, Serialize)]
pub struct CoefficientDrift {
    /// Design column name.
    pub term: String,
    /// Old estimate and interval.
    pub old: Option<(f64, f64, f64)>,
    /// New estimate and interval.
    pub new: Option<(f64, f64, f64)>,
    /// New estimate outside the old interval.
    pub moved: bool,
}

/// One scalar statistic across the runs.
#[derive(Debug, Clone, Serialize)]
pub struct StatisticDrift {
    /// Statistic name.
    pub statistic: String,
    /// Old value.
    pub old: Option<f64>,
    /// New value.
    pub new: Option<f64>,
}

/// The drift between one pair of fits.
#[derive(Debug, Clone, Serialize)]
pub struct FitDrift {
    /// Target of the fit.
    pub target: String,
    /// Data file and hash, old and new.
    pub data_old: (String, String, u64),
    /// Data file and hash, new.
    pub data_new: (String, String, u64),
    /// Whether the data bytes changed.
    pub data_changed: bool,
    /// Coefficients in old order, then new ones.
    pub coefficients: Vec<CoefficientDrift>,
    /// Whole-fit statistics.
    pub statistics: Vec<StatisticDrift>,
}

/// The drift report.
#[derive(Debug, Clone, Serialize)]
pub struct DriftReport {
    /// Always `plumbline.drift`.
    pub schema: String,
    /// Old run (path).
    pub old: String,
    /// New run (path).
    pub new: String,
    /// One entry per paired fit.
    pub fits: Vec<FitDrift>,
    /// Fits present in only one run.
    pub unpaired: usize,
}

/// Reads every fit document from a `.json` file or an `.ipynb` notebook.
pub fn read_fits(path: &Path) -> Result<Vec<Value>, DriftError> {
    let shown = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| DriftError::Unreadable { path: shown.clone(), reason: e.to_string() })?;
    let root: Value = serde_json::from_str(&text).map_err(|e| DriftError::Unreadable { path: shown.clone(), reason: e.to_string() })?;
    let mut fits = Vec::new();
    if root.get("schema").and_then(Value::as_str) == Some("plumbline.fit") {
        fits.push(root);
    } else if let Some(cells) = root.get("cells").and_then(Value::as_array) {
        for cell in cells {
            for output in cell.get("outputs").and_then(Value::as_array).into_iter().flatten() {
                if let Some(doc) = output.get("data").and_then(|d| d.get(plumbline::render::FIT_JSON_MIME)) {
                    let doc = match doc {
                        Value::String(s) => serde_json::from_str(s).unwrap_or(Value::Null),
                        other => other.clone(),
                    };
                    if doc.get("schema").and_then(Value::as_str) == Some("plumbline.fit") {
                        fits.push(doc);
                    }
                }
            }
        }
    }
    if fits.is_empty() {
        return Err(DriftError::NoFits { path: shown });
    }
    Ok(fits)
}

fn coefficient_map(doc: &Value) -> Vec<(String, (f64, f64, f64))> {
    doc.get("coefficients")
        .and_then(Value::as_array)
        .into_iter()
        .flatten()
        .filter_map(|c| {
            Some((
                c.get("term")?.as_str()?.to_string(),
                (c.get("estimate")?.as_f64()?, c.get("ci_low")?.as_f64()?, c.get("ci_high")?.as_f64()?),
            ))
        })
        .collect()
}

fn data_of(doc: &Value) -> (String, String, u64) {
    let d = &doc["data"];
    (
        d["path"].as_str().unwrap_or("").to_string(),
        d["sha256"].as_str().unwrap_or("").to_string(),
        d["rows"].as_u64().unwrap_or(0),
    )
}

/// Compares two fit documents.
pub fn compare_fits(old: &Value, new: &Value) -> FitDrift {
    let (old_coefs, new_coefs) = (coefficient_map(old), coefficient_map(new));
    let mut coefficients = Vec::new();
    for (term, o) in &old_coefs {
        let n = new_coefs.iter().find(|(t, _)| t == term).map(|(_, v)| *v);
        let moved = n.is_some_and(|n| n.0 < o.1 || n.0 > o.2);
        coefficients.push(CoefficientDrift { term: term.clone(), old: Some(*o), new: n, moved });
    }
    for (term, n) in &new_coefs {
        if !old_coefs.iter().any(|(t, _)| t == term) {
            coefficients.push(CoefficientDrift { term: term.clone(), old: None, new: Some(*n), moved: false });
        }
    }
    let statistics = ["n_obs", "r_squared", "adj_r_squared", "residual_std_error", "aic"]
        .iter()
        .map(|s| StatisticDrift { statistic: s.to_string(), old: old[*s].as_f64(), new: new[*s].as_f64() })
        .collect();
    let (data_old, data_new) = (data_of(old), data_of(new));
    FitDrift {
        target: new["target"].as_str().unwrap_or("").to_string(),
        data_changed: data_old.1 != data_new.1,
        data_old,
        data_new,
        coefficients,
        statistics,
    }
}

/// The drift between two runs.
pub fn drift(old_path: &Path, new_path: &Path) -> Result<DriftReport, DriftError> {
    let old = read_fits(old_path)?;
    let new = read_fits(new_path)?;
    let fits = old.iter().zip(&new).map(|(a, b)| compare_fits(a, b)).collect();
    Ok(DriftReport {
        schema: "plumbline.drift".into(),
        old: old_path.display().to_string(),
        new: new_path.display().to_string(),
        fits,
        unpaired: old.len().abs_diff(new.len()),
    })
}

fn number(v: Option<f64>) -> String {
    v.map(|x| plumbline::render::format_trimmed(x, 5)).unwrap_or_else(|| "—".into())
}

/// The report as text.
pub fn drift_text(report: &DriftReport) -> String {
    let mut out = format!("Drift from {}\n        to {}\n", report.old, report.new);
    for (i, f) in report.fits.iter().enumerate() {
        out.push_str(&format!("\nFit {} — {}\n", i + 1, f.target));
        out.push_str(&format!(
            "  data: {} rows → {} rows; {}\n",
            f.data_old.2,
            f.data_new.2,
            if f.data_changed {
                format!("contents changed (sha256 {}… → {}…)", &f.data_old.1.get(..12).unwrap_or(""), &f.data_new.1.get(..12).unwrap_or(""))
            } else {
                "same bytes".into()
            }
        ));
        for s in &f.statistics {
            out.push_str(&format!("  {:<20} {:>12} → {:>12}\n", s.statistic, number(s.old), number(s.new)));
        }
        let moved: Vec<&CoefficientDrift> = f.coefficients.iter().filter(|c| c.moved).collect();
        out.push_str(&format!("  coefficients outside their old interval: {}\n", moved.len()));
        for c in moved {
            let (o, n) = (c.old.unwrap_or_default(), c.new.unwrap_or_default());
            out.push_str(&format!(
                "    {:<28} {} [{}, {}] → {}\n",
                c.term,
                number(Some(o.0)),
                number(Some(o.1)),
                number(Some(o.2)),
                number(Some(n.0))
            ));
        }
        for c in f.coefficients.iter().filter(|c| c.old.is_none() || c.new.is_none()) {
            out.push_str(&format!("    {:<28} {}\n", c.term, if c.old.is_none() { "new term" } else { "dropped" }));
        }
    }
    if report.unpaired > 0 {
        out.push_str(&format!("\n{} fit(s) appear in only one of the runs and were not compared.\n", report.unpaired));
    }
    out
}
