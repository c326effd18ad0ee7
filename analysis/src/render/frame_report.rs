//! Frames and column profiles as text and HTML.

use super::bundle::{MimeBundle, Report};
use super::html::{card_end, card_start, escape, table, SUBTLE};
use super::numbers::{format_column, format_count, format_trimmed};
use crate::data::{profile, ColumnProfile, Frame};
use polars::prelude::AnyValue;

/// Rows shown at each end of a long frame.
const EDGE_ROWS: usize = 5;

/// One non-float cell as text, `·` for missing.
fn cell_text(value: &AnyValue) -> String {
    match value {
        AnyValue::Null => "·".to_string(),
        AnyValue::String(s) => s.to_string(),
        AnyValue::StringOwned(s) => s.to_string(),
        other => other.to_string(),
    }
}

/// The shown cells of one column: floats share their decimals (six
/// significant digits at most), other types print as they are.
fn column_cells(column: &polars::prelude::Column, rows: &[usize]) -> Vec<String> {
    let is_float = matches!(column.dtype(), polars::prelude::DataType::Float64 | polars::prelude::DataType::Float32);
    let values: Vec<AnyValue> = rows.iter().map(|&r| column.get(r).unwrap_or(AnyValue::Null)).collect();
    if !is_float {
        return values.iter().map(cell_text).collect();
    }
    let numbers: Vec<f64> = values.iter().filter_map(|v| v.extract::<f64>()).collect();
    let mut formatted = format_column(&numbers, 6).into_iter();
    values.iter().map(|v| if v.is_null() { "·".to_string() } else { formatted.next().unwrap_or_default() }).collect()
}

/// The rows to show: all of a short frame, or both ends of a long one (`None` marks the gap).
fn shown_rows(height: usize) -> Vec<Option<usize>> {
    if height <= 2 * EDGE_ROWS + 2 {
        (0..height).map(Some).collect()
    } else {
        (0..EDGE_ROWS).map(Some).chain(std::iter::once(None)).chain((height - EDGE_ROWS..height).map(Some)).collect()
    }
}

/// What a frame display shows: column names, their types in words, which
/// columns are numeric (right-aligned), and the rows shown (`None` marks the
/// gap between the first and last rows of a long frame).
struct FrameCells {
    names: Vec<String>,
    dtypes: Vec<String>,
    numeric: Vec<bool>,
    rows: Vec<Option<Vec<String>>>,
}

fn frame_cells(frame: &Frame) -> FrameCells {
    let data = frame.data();
    let names = frame.column_names();
    let dtypes: Vec<String> = data.columns().iter().map(|c| kind_words(c.dtype()).to_string()).collect();
    let numeric: Vec<bool> = data.columns().iter().map(|c| c.dtype().is_primitive_numeric()).collect();
    let shown = shown_rows(frame.height());
    let indices: Vec<usize> = shown.iter().flatten().copied().collect();
    let by_column: Vec<Vec<String>> = data.columns().iter().map(|c| column_cells(c, &indices)).collect();
    let mut next = 0;
    let rows = shown
        .into_iter()
        .map(|r| {
            r.map(|_| {
                let row: Vec<String> = by_column.iter().map(|c| c[next].clone()).collect();
                next += 1;
                row
            })
        })
        .collect();
    FrameCells { names, dtypes, numeric, rows }
}

/// A column's storage type in the words of the column types people give on
/// the command line (`number`, `integer`, `text`, `date`), so the frame
/// display and `--column-type` speak alike.
fn kind_words(dtype: &polars::prelude::DataType) -> String {
    use polars::prelude::DataType;
    match dtype {
        DataType::Float64 | DataType::Float32 => "number".into(),
        d if d.is_integer() => "integer".into(),
        DataType::String => "text".into(),
        DataType::Date => "date".into(),
        DataType::Boolean => "yes/no".into(),
        other => other.to_string(),
    }
}

/// The frame as aligned text under 100 columns (columns that do not fit are counted).
pub fn frame_text(frame: &Frame) -> String {
    let prov = frame.provenance();
    let FrameCells { names, dtypes, numeric, rows } = frame_cells(frame);
    let mut out =
        format!("{} records · {} columns from {}\n", format_count(frame.height()), frame.width(), prov.describe());
    if !prov.sha256.is_empty() {
        out.push_str(&format!("  sha256 {}…, read {}\n", prov.short_hash(), prov.loaded_at));
    }
    let widths: Vec<usize> = (0..names.len())
        .map(|c| {
            let body = rows.iter().flatten().map(|r| r[c].chars().count()).max().unwrap_or(0);
            names[c].chars().count().max(dtypes[c].chars().count()).max(body).min(24)
        })
        .collect();
    let mut shown = 0;
    let mut used = 7;
    while shown < names.len() && used + widths[shown] + 2 <= 96 {
        used += widths[shown] + 2;
        shown += 1;
    }
    let clip = |s: &str, w: usize| {
        if s.chars().count() > w {
            s.chars().take(w - 1).chain(std::iter::once('…')).collect()
        } else {
            s.to_string()
        }
    };
    let line = |cells: &[String], row_label: &str| {
        let mut s = format!("{row_label:>6} ");
        for c in 0..shown {
            let text = clip(&cells[c], widths[c]);
            if numeric[c] {
                s.push_str(&format!(" {text:>w$} ", w = widths[c]));
            } else {
                s.push_str(&format!(" {text:<w$} ", w = widths[c]));
            }
        }
        s.trim_end().to_string() + "\n"
    };
    out.push_str(&line(&names, "row"));
    out.push_str(&line(&dtypes, ""));
    let indices = shown_rows(frame.height());
    for (index, row) in indices.iter().zip(&rows) {
        match (index, row) {
            (Some(i), Some(cells)) => out.push_str(&line(cells, &(i + 1).to_string())),
            _ => {
                out.push_str(&format!("{:>6}  … {} more records …\n", "", format_count(frame.height() - 2 * EDGE_ROWS)))
            }
        }
    }
    if shown < names.len() {
        out.push_str(&format!("  … and {} more columns: {}\n", names.len() - shown, names[shown..].join(", ")));
    }
    out
}

/// Characters of cell text per stacked table of a wide frame's HTML card:
/// about what an A4 page or a notebook's output area shows at the cards'
/// 13 px type.
const HTML_CHARS_PER_TABLE: usize = 84;

/// Consecutive column ranges whose widths (characters, plus a gap of 3 per
/// column) stay within `budget`; a column wider than the budget has a range
/// of its own.
fn column_groups(widths: &[usize], budget: usize) -> Vec<std::ops::Range<usize>> {
    let mut groups = Vec::new();
    let (mut start, mut used) = (0, 0);
    for (c, w) in widths.iter().enumerate() {
        let need = w + 3;
        if c > start && used + need > budget {
            groups.push(start..c);
            (start, used) = (c, 0);
        }
        used += need;
    }
    if start < widths.len() {
        groups.push(start..widths.len());
    }
    groups
}

/// The frame as an HTML card.
pub fn frame_html(frame: &Frame) -> String {
    let prov = frame.provenance();
    let FrameCells { names, dtypes, numeric, rows } = frame_cells(frame);
    let mut out = String::new();
    card_start(&mut out, &format!("{} records · {} columns", format_count(frame.height()), frame.width()));
    out.push_str(&format!("<div style=\"{SUBTLE}\">{}", escape(&prov.describe())));
    if !prov.sha256.is_empty() {
        out.push_str(&format!(
            " · sha256 <code>{}</code>… · read {}",
            escape(prov.short_hash()),
            escape(&prov.loaded_at)
        ));
    }
    out.push_str("</div>\n");
    // Wide frames are shown as stacked tables of a few columns each (the row
    // number repeated), so that a printed page holds every column and no
    // value wraps over two lines.
    let widths: Vec<usize> = names
        .iter()
        .enumerate()
        .map(|(c, name)| {
            let cells = rows.iter().flatten().map(|r| r[c].chars().count());
            cells.chain([name.chars().count(), dtypes[c].chars().count()]).max().unwrap_or(4)
        })
        .collect();
    for columns in column_groups(&widths, HTML_CHARS_PER_TABLE) {
        let header: Vec<&str> = std::iter::once("row").chain(columns.clone().map(|c| names[c].as_str())).collect();
        let numeric_flags: Vec<bool> = std::iter::once(true).chain(columns.clone().map(|c| numeric[c])).collect();
        let nowrap = |cell: String| format!("<span style=\"white-space:nowrap\">{cell}</span>");
        let mut body: Vec<Vec<String>> = vec![std::iter::once(String::new())
            .chain(columns.clone().map(|c| format!("<span style=\"{SUBTLE}\">{}</span>", escape(&dtypes[c]))))
            .collect()];
        for (index, row) in shown_rows(frame.height()).iter().zip(&rows) {
            match (index, row) {
                (Some(i), Some(cells)) => body.push(
                    std::iter::once((i + 1).to_string())
                        .chain(columns.clone().map(|c| {
                            // Numeric cells are kept on one line by the table's own style.
                            if numeric[c] {
                                escape(&cells[c])
                            } else {
                                nowrap(escape(&cells[c]))
                            }
                        }))
                        .collect(),
                ),
                _ => {
                    let mut gap = vec![format!("<span style=\"{SUBTLE}\">⋮</span>")];
                    gap.push(nowrap(format!(
                        "<span style=\"{SUBTLE}\">{} more records</span>",
                        format_count(frame.height() - 2 * EDGE_ROWS)
                    )));
                    gap.resize(header.len(), String::new());
                    body.push(gap);
                }
            }
        }
        table(&mut out, &header, &numeric_flags, &body);
    }
    card_end(&mut out);
    out
}

impl Report for Frame {
    fn bundle(&self) -> MimeBundle {
        MimeBundle::text_and_html(frame_text(self), frame_html(self))
    }
}

/// A frame's column profile, ready to display.
#[derive(Debug, Clone, PartialEq)]
pub struct ProfileReport {
    /// Where the frame came from.
    pub source: String,
    /// One profile per column.
    pub columns: Vec<ColumnProfile>,
}

impl ProfileReport {
    /// Profiles `frame`.
    pub fn of(frame: &Frame) -> crate::Result<Self> {
        Ok(Self { source: frame.provenance().describe(), columns: profile(frame)? })
    }

    fn rows(&self) -> Vec<[String; 7]> {
        let number = |v: Option<f64>| v.map(|x| format_trimmed(x, 6)).unwrap_or_else(|| "·".into());
        self.columns
            .iter()
            .map(|c| {
                let levels = c.top_levels.iter().map(|(l, n)| format!("{l} ({n})")).collect::<Vec<_>>().join(", ");
                let missing = match c.non_finite {
                    0 => c.missing.to_string(),
                    k => format!("{} + {k} NaN/∞", c.missing),
                };
                let (low, high) = match (&c.earliest, &c.latest) {
                    (Some(first), Some(last)) => (first.clone(), last.clone()),
                    _ if c.min.is_some() => (number(c.min), number(c.max)),
                    _ => (number(None), levels),
                };
                [c.name.clone(), c.dtype.clone(), missing, c.distinct.to_string(), low, number(c.median), high]
            })
            .collect()
    }
}

impl Report for ProfileReport {
    fn bundle(&self) -> MimeBundle {
        let header = ["column", "type", "missing", "distinct", "min / earliest", "median", "max / latest / top levels"];
        let rows = self.rows();
        let mut text = format!("Column profile of {}\n", self.source);
        let widths: Vec<usize> = (0..7)
            .map(|i| rows.iter().map(|r| r[i].chars().count()).chain([header[i].len()]).max().unwrap_or(4).min(30))
            .collect();
        let fmt_row = |cells: &[String]| {
            let mut s = String::from(" ");
            for (i, c) in cells.iter().enumerate() {
                let c: String = if c.chars().count() > widths[i] {
                    c.chars().take(widths[i] - 1).chain(std::iter::once('…')).collect()
                } else {
                    c.clone()
                };
                if (2..6).contains(&i) {
                    s.push_str(&format!(" {c:>w$}", w = widths[i]));
                } else {
                    s.push_str(&format!(" {c:<w$}", w = widths[i]));
                }
            }
            s.trim_end().to_string() + "\n"
        };
        text.push_str(&fmt_row(&header.map(String::from)));
        for r in &rows {
            text.push_str(&fmt_row(r));
        }
        let mut html = String::new();
        card_start(&mut html, "Column profile");
        html.push_str(&format!("<div style=\"{SUBTLE}\">{}</div>\n", escape(&self.source)));
        let body: Vec<Vec<String>> = rows.iter().map(|r| r.iter().map(|c| escape(c)).collect()).collect();
        table(&mut html, &header, &[false, false, true, true, true, true, false], &body);
        card_end(&mut html);
        MimeBundle::text_and_html(text, html)
    }
}

/// A screen: the rule, how many rows passed, and every row set aside.
impl Report for crate::data::Screen {
    fn bundle(&self) -> MimeBundle {
        let line = |l: Option<u64>| l.map(|l| l.to_string()).unwrap_or_else(|| "·".into());
        let mut text = format!(
            "Screen: {}\n  {} of {} rows kept; {} set aside (column `{}`)\n",
            self.rule,
            self.kept.height(),
            self.screened,
            self.excluded.len(),
            self.column
        );
        for e in &self.excluded {
            text.push_str(&format!(
                "    row {:>6}  file line {:>6}  {} = {}\n",
                e.row,
                line(e.line),
                self.column,
                e.value
            ));
        }
        let mut html = String::new();
        card_start(&mut html, &format!("Screen — {}", self.rule));
        html.push_str(&format!(
            "<div style=\"{SUBTLE}\">{} of {} rows kept; {} set aside by column <code>{}</code></div>\n",
            self.kept.height(),
            self.screened,
            self.excluded.len(),
            escape(&self.column)
        ));
        if !self.excluded.is_empty() {
            let body: Vec<Vec<String>> =
                self.excluded.iter().map(|e| vec![e.row.to_string(), line(e.line), escape(&e.value)]).collect();
            let value_header = format!("{} (set aside)", self.column);
            table(&mut html, &["row", "file line", &value_header], &[true, true, false], &body);
        }
        card_end(&mut html);
        MimeBundle::text_and_html(text, html)
    }
}

#[cfg(test)]
mod tests {
    use super::column_groups;

    #[test]
    fn wide_frames_split_into_column_groups_within_the_budget() {
        assert_eq!(column_groups(&[10, 10, 10, 10], 30), vec![0..2, 2..4]);
        assert_eq!(column_groups(&[50, 5], 30), vec![0..1, 1..2]);
        assert_eq!(column_groups(&[], 30), Vec::<std::ops::Range<usize>>::new());
    }
}
