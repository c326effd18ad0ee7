//! Building blocks of our HTML: a self-contained card with inline styles
//! only (no scripts, no external assets), readable on light and dark notebook
//! themes because the card sets its own background and ink.

/// Escapes text for HTML content and attribute values.
pub fn escape(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            _ => out.push(c),
        }
    }
    out
}

/// Style of a report card.
pub const CARD: &str = "background:#fbfcfd;color:#222b3a;border:1px solid #d5dbe3;border-radius:6px;\
padding:12px 14px;margin:4px 0;font-family:system-ui,-apple-system,'Segoe UI',Roboto,'DejaVu Sans',sans-serif;\
font-size:13px;line-height:1.45;max-width:100%;overflow-x:auto";
/// Style of a card heading.
pub const HEADING: &str = "font-size:15px;font-weight:600;margin:0 0 6px 0;color:#222b3a";
pub(crate) const SUBTLE: &str = "color:#5b6777;font-size:12px";
pub(crate) const TABLE: &str = "border-collapse:collapse;margin:6px 0;font-variant-numeric:tabular-nums";
pub(crate) const TH: &str =
    "text-align:left;padding:3px 10px;border-bottom:2px solid #c6ced9;color:#222b3a;font-weight:600;white-space:nowrap";
pub(crate) const TH_NUM: &str = "text-align:right;padding:3px 10px;border-bottom:2px solid #c6ced9;color:#222b3a;font-weight:600;white-space:nowrap";
pub(crate) const TD: &str = "text-align:left;padding:2px 10px;border-bottom:1px solid #e4e8ee";
pub(crate) const TD_NUM: &str = "text-align:right;padding:2px 10px;border-bottom:1px solid #e4e8ee;white-space:nowrap";
pub(crate) const NOTE: &str =
    "background:#fdf1ec;border-left:3px solid #c24e2f;padding:5px 9px;margin:6px 0;color:#5a2a1c";
pub(crate) const CAUTION: &str =
    "background:#eef3f7;border-left:3px solid #3d5a80;padding:5px 9px;margin:8px 0 0 0;color:#24364f;font-size:12px";

/// Opens a card with a heading.
pub(crate) fn card_start(out: &mut String, heading: &str) {
    out.push_str(&format!("<div style=\"{CARD}\">\n<div style=\"{HEADING}\">{}</div>\n", escape(heading)));
}

/// Closes a card.
pub(crate) fn card_end(out: &mut String) {
    out.push_str("</div>\n");
}

/// A table from a header and rows; `numeric[i]` right-aligns column `i`.
pub(crate) fn table(out: &mut String, header: &[&str], numeric: &[bool], rows: &[Vec<String>]) {
    out.push_str(&format!("<table style=\"{TABLE}\">\n<thead><tr>"));
    for (i, h) in header.iter().enumerate() {
        let style = if numeric.get(i).copied().unwrap_or(false) { TH_NUM } else { TH };
        out.push_str(&format!("<th style=\"{style}\">{}</th>", escape(h)));
    }
    out.push_str("</tr></thead>\n<tbody>\n");
    for row in rows {
        out.push_str("<tr>");
        for (i, cell) in row.iter().enumerate() {
            let style = if numeric.get(i).copied().unwrap_or(false) { TD_NUM } else { TD };
            // Cells are pre-escaped by the caller when they hold markup (inline SVG).
            out.push_str(&format!("<td style=\"{style}\">{cell}</td>"));
        }
        out.push_str("</tr>\n");
    }
    out.push_str("</tbody></table>\n");
}

/// A standalone HTML5 document around report cards: UTF-8, a title, and our
/// page style inline; no scripts and no external assets.
pub fn page(title: &str, cards: &[String]) -> String {
    let mut out = format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{}</title>\n\
<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n</head>\n\
<body style=\"margin:0;padding:18px;background:#eef1f5\">\n<main style=\"max-width:1040px;margin:0 auto\">\n",
        escape(title)
    );
    for card in cards {
        out.push_str(card);
    }
    out.push_str("</main>\n</body>\n</html>\n");
    out
}
