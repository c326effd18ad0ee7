//! Screening sales before a study: keep the rows that pass a stated rule and
//! keep a record of the rows set aside, with their file lines and the value
//! that failed — the record a reviewer asks for when a sale is left out.

use super::Frame;
use crate::error::Result;

/// A row set aside by a screen.
#[derive(Debug, Clone, PartialEq)]
pub struct ExcludedRow {
    /// 1-based row in the screened frame.
    pub row: usize,
    /// File line of the row, when the frame came from a text file.
    pub line: Option<u64>,
    /// The screened column's value, as text (`missing` when absent).
    pub value: String,
}

/// The result of a screen: the kept rows as a frame, and what was set aside.
#[derive(Debug, Clone)]
pub struct Screen {
    /// The rule, in words (shown in the report and in the kept frame's provenance).
    pub rule: String,
    /// The column the rule tests.
    pub column: String,
    /// Rows screened.
    pub screened: usize,
    /// The rows that pass.
    pub kept: Frame,
    /// The rows set aside, in file order.
    pub excluded: Vec<ExcludedRow>,
}

impl Frame {
    /// Keeps the rows whose text in `column` passes `keep` (given `None` for a
    /// missing value); `rule` says in words what is kept.
    pub fn keep_where_text(&self, column: &str, rule: &str, keep: impl Fn(Option<&str>) -> bool) -> Result<Screen> {
        let labels = self.label_column(column)?;
        let passes: Vec<bool> = labels.iter().map(|l| keep(l.as_deref())).collect();
        let shown: Vec<String> = labels.into_iter().map(|l| l.unwrap_or_else(|| "missing".into())).collect();
        self.screen(column, rule, &passes, &shown)
    }

    /// Keeps the rows whose number in `column` passes `keep` (given `None` for
    /// a missing value); `rule` says in words what is kept.
    pub fn keep_where_number(&self, column: &str, rule: &str, keep: impl Fn(Option<f64>) -> bool) -> Result<Screen> {
        let values = self.numeric_column(column)?;
        let passes: Vec<bool> = values.iter().map(|v| keep(*v)).collect();
        let shown: Vec<String> =
            values.iter().map(|v| v.map(|x| x.to_string()).unwrap_or_else(|| "missing".into())).collect();
        self.screen(column, rule, &passes, &shown)
    }

    fn screen(&self, column: &str, rule: &str, passes: &[bool], shown: &[String]) -> Result<Screen> {
        let kept_rows: Vec<usize> = (0..passes.len()).filter(|&i| passes[i]).collect();
        let excluded = (0..passes.len())
            .filter(|&i| !passes[i])
            .map(|i| ExcludedRow { row: i + 1, line: self.source_line(i), value: shown[i].clone() })
            .collect();
        Ok(Screen {
            rule: rule.to_string(),
            column: column.to_string(),
            screened: passes.len(),
            kept: self.subset(&kept_rows, rule)?,
            excluded,
        })
    }
}
