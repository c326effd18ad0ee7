//! The appeal page: one printable page per parcel for an owner, a review
//! board or a hearing — the value reached step by step from a typical home,
//! recent sales of similar homes adjusted to the parcel by the model, and
//! what those sales say together. Our own layout for a lay reader: each
//! comparable is a short account read top to bottom (what sold, each
//! difference and what it is worth, the adjusted price), not a grid.
//!
//! Print: each parcel's page starts on a new sheet (`break-before: page`),
//! and no table, account or chart is split across sheets
//! (`break-inside: avoid`); the page size is set by `@page`.

use super::bundle::{MimeBundle, Report};
use super::html::escape;
use super::prose::VALUATION_CAUTION;
use crate::appeal::{AdjustedSale, BuildUp, ParcelPage, ParcelPages};
use crate::documents::{document_json, DocumentKind};

const INK: &str = "#222b3a";
const MUTED: &str = "#5b6777";
const UP: &str = "#b7791f";
const DOWN: &str = "#2f7f86";
const RULE: &str = "#d5dbe3";
const FLAG: &str = "#a23b24";

/// The print rules every page carries: sheet size and margins, a new sheet
/// per parcel, nothing split across sheets.
const PRINT_STYLE: &str = "<style>\n@page { size: A4; margin: 14mm 12mm; }\n\
@media print {\n  body { background: none !important; padding: 0 !important; }\n  .pl-parcel { break-before: page; page-break-before: always; border: none !important; \
box-shadow: none !important; margin: 0 !important; }\n  .pl-parcel:first-of-type { break-before: auto; \
page-break-before: auto; }\n}\n.pl-keep { break-inside: avoid; page-break-inside: avoid; }\n</style>\n";

use super::numbers::format_money as money;

/// A signed amount (`+8,300`, `−12,100`, `0`).
fn signed_money(amount: f64) -> String {
    let rounded = amount.round();
    if rounded == 0.0 {
        "0".into()
    } else if rounded > 0.0 {
        format!("+{}", money(rounded))
    } else {
        money(rounded)
    }
}

/// A signed percentage with a true minus sign (`+3.0 %`, `−7.4 %`).
fn percent(share: f64) -> String {
    format!("{:+.1} %", 100.0 * share).replace('-', "−")
}

/// A term's inputs without the column names when the term reads one column
/// (`living_area = 2050` → `2050`).
fn shown_inputs(inputs: &str) -> String {
    if !inputs.contains(", ") {
        if let Some((_, value)) = inputs.split_once(" = ") {
            return value.to_string();
        }
    }
    inputs.to_string()
}

/// The distance as words, in the places' unit.
fn distance_words(distance: Option<f64>, unit: &str) -> Option<String> {
    distance.map(|d| format!("{d:.2} {unit} away"))
}

/// A step chart of the build-up: one row per term, a bar from the running
/// value before the step to after it (ochre up, blue-green down), the
/// reference and final values as thin rules.
fn build_up_chart(build_up: &BuildUp) -> String {
    let start = build_up.reference.value;
    let mut before = start;
    let mut spans = Vec::new();
    for step in &build_up.steps {
        spans.push((step.characteristic.as_str(), before, step.running_value));
        before = step.running_value;
    }
    let (lo, hi) = spans.iter().fold((start, start), |(lo, hi), (_, a, b)| (lo.min(a.min(*b)), hi.max(a.max(*b))));
    let pad = ((hi - lo) * 0.08).max(1.0);
    let (lo, hi) = (lo - pad, hi + pad);
    let (label_w, bar_w, row_h) = (230.0, 400.0, 18.0);
    let x = |v: f64| label_w + (v - lo) / (hi - lo) * bar_w;
    let height = row_h * (spans.len() as f64 + 1.5);
    let mut svg = format!(
        "<svg class=\"pl-keep\" viewBox=\"0 0 {w} {height}\" style=\"max-width:100%;height:auto\" role=\"img\" \
         aria-label=\"The value reached from the typical home, one difference at a time\">\n",
        w = label_w + bar_w + 90.0
    );
    for (i, (term, a, b)) in spans.iter().enumerate() {
        let y = row_h * (i as f64 + 0.5);
        let colour = if b >= a { UP } else { DOWN };
        let (left, right) = (x(a.min(*b)), x(a.max(*b)));
        svg.push_str(&format!(
            "<text x=\"{lx}\" y=\"{ty}\" font-size=\"11\" text-anchor=\"end\" fill=\"{INK}\">{t}</text>\
             <rect x=\"{left:.1}\" y=\"{y:.1}\" width=\"{w:.1}\" height=\"{h}\" fill=\"{colour}\"/>\
             <text x=\"{vx:.1}\" y=\"{ty}\" font-size=\"10\" fill=\"{MUTED}\">{amount}</text>\n",
            lx = label_w - 6.0,
            ty = y + 11.0,
            t = escape(term),
            w = (right - left).max(1.0),
            h = row_h - 5.0,
            vx = right + 4.0,
            amount = escape(&signed_money(b - a)),
        ));
    }
    let bottom = row_h * (spans.len() as f64 + 0.5);
    for (value, label) in [(start, "typical home"), (before, "this parcel")] {
        svg.push_str(&format!(
            "<line x1=\"{vx:.1}\" y1=\"2\" x2=\"{vx:.1}\" y2=\"{bottom:.1}\" stroke=\"{INK}\" stroke-width=\"1\" \
             stroke-dasharray=\"3 2\"/><text x=\"{vx:.1}\" y=\"{ly:.1}\" font-size=\"10\" text-anchor=\"middle\" \
             fill=\"{INK}\">{label} {v}</text>\n",
            vx = x(value),
            ly = bottom + 12.0,
            v = money(value),
        ));
    }
    svg.push_str("</svg>\n");
    svg
}

fn cell(text: &str, numeric: bool) -> String {
    let align = if numeric { "right;white-space:nowrap" } else { "left" };
    format!("<td style=\"text-align:{align};padding:2px 8px;border-bottom:1px solid {RULE}\">{text}</td>")
}

fn head(text: &str, numeric: bool) -> String {
    let align = if numeric { "right" } else { "left" };
    format!(
        "<th style=\"text-align:{align};padding:3px 8px;border-bottom:2px solid {RULE};font-weight:600\">{}</th>",
        escape(text)
    )
}

/// Part 1: from the typical home to this parcel.
fn build_up_html(out: &mut String, page: &ParcelPage, multiplicative: bool) {
    let b = &page.build_up;
    out.push_str(&format!(
        "<h3 style=\"font-size:14px;margin:14px 0 4px 0\">1. How the value is reached</h3>\n<p style=\"margin:2px 0 6px 0\">\
         Start from {} of the area, valued at <b>{}</b>, and change one thing at a time until it is this parcel. \
         Each line is what the model says that difference is worth{}.</p>\n",
        escape(&b.reference.name),
        money(b.reference.value),
        if multiplicative { " (a percentage of the value so far, shown here in money)" } else { "" }
    ));
    out.push_str(&format!(
        "<table class=\"pl-keep\" data-part=\"build-up\" data-parcel=\"{id}\" style=\"border-collapse:collapse;font-variant-numeric:tabular-nums;font-size:12px\">\n<thead><tr>{}{}{}{}{}</tr></thead>\n<tbody>\n",
        head("what differs", false),
        head("this parcel", false),
        head(&b.reference.name, false),
        head("worth", true),
        head("value so far", true),
        id = escape(&page.parcel_id),
    ));
    out.push_str(&format!(
        "<tr>{}{}{}{}{}</tr>\n",
        cell(&escape(&format!("start: {}", b.reference.name)), false),
        cell("", false),
        cell("", false),
        cell("", true),
        cell(&money(b.reference.value), true)
    ));
    for step in &b.steps {
        let worth = match step.factor {
            Some(f) => format!("{} <span style=\"color:{MUTED}\">(×{f:.4})</span>", signed_money(step.amount)),
            None => signed_money(step.amount),
        };
        out.push_str(&format!(
            "<tr>{}{}{}{}{}</tr>\n",
            cell(&escape(&step.characteristic), false),
            cell(&escape(&shown_inputs(&step.parcel)), false),
            cell(&escape(&shown_inputs(&step.reference)), false),
            cell(&worth, true),
            cell(&money(step.running_value), true)
        ));
    }
    out.push_str(&format!(
        "<tr>{}{}{}{}{}</tr>\n</tbody></table>\n",
        cell(&format!("<b style=\"white-space:nowrap\">value of {}</b>", escape(&page.parcel_id)), false),
        cell("", false),
        cell("", false),
        cell("", true),
        cell(&format!("<b>{}</b>", money(page.value)), true)
    ));
    out.push_str(&build_up_chart(b));
}

/// One comparable's account.
fn comparable_html(out: &mut String, number: usize, sale: &AdjustedSale, unit: &str, subject: &str) {
    let mut facts = vec![format!("sold {} for <b>{}</b>", escape(&sale.sale_date), money(sale.price))];
    if let Some(d) = distance_words(sale.distance, unit) {
        facts.push(d);
    }
    if let Some(area) = &sale.market_area {
        facts.push(escape(area));
    }
    out.push_str(&format!(
        "<div class=\"pl-keep\" data-part=\"comparable\" style=\"border-left:3px solid {}; padding:4px 0 4px 10px; margin:8px 0\">\n\
         <div><b>Sale {number}: {}</b> — {}</div>\n",
        if sale.flags.is_empty() { RULE } else { FLAG },
        escape(&sale.parcel_id),
        facts.join(" · ")
    ));
    out.push_str(&format!(
        "<table class=\"pl-keep\" data-part=\"adjustments\" data-parcel=\"{}\" style=\"border-collapse:collapse;font-variant-numeric:tabular-nums;font-size:12px;margin-top:3px\">\n<thead><tr>{}{}{}{}</tr></thead>\n<tbody>\n",
        escape(subject),
        head("difference", false),
        head("that home", false),
        head("this parcel", false),
        head("adjustment", true)
    ));
    for a in sale.adjustments.iter().filter(|a| a.amount.round() != 0.0) {
        out.push_str(&format!(
            "<tr>{}{}{}{}</tr>\n",
            cell(&escape(&a.characteristic), false),
            cell(&escape(&shown_inputs(&a.sale)), false),
            cell(&escape(&shown_inputs(&a.subject)), false),
            cell(&signed_money(a.amount), true)
        ));
    }
    out.push_str(&format!(
        "<tr>{}{}{}{}</tr>\n</tbody></table>\n",
        cell(&format!("<b style=\"white-space:nowrap\">sale {number} adjusted to {}</b>", escape(subject)), false),
        cell(&format!("net {}", percent(sale.net_share)), false),
        cell(&format!("gross {:.1} %", 100.0 * sale.gross_share), false),
        cell(&format!("<b>{}</b>", money(sale.adjusted_price)), true)
    ));
    for flag in &sale.flags {
        out.push_str(&format!(
            "<div style=\"color:{FLAG};font-size:12px\">Set aside from the figure below: {}.</div>\n",
            escape(flag)
        ));
    }
    if let Some(w) = sale.weight {
        out.push_str(&format!(
            "<div style=\"color:{MUTED};font-size:12px\">Weight in the figure below: {:.0} %.</div>\n",
            100.0 * w
        ));
    }
    out.push_str("</div>\n");
}

/// The rule that chose the comparables, in words.
fn rule_words(pages: &ParcelPages) -> String {
    let rule = &pages.rule;
    let mut conditions = vec![format!("sold in the {} months before {}", rule.months_back, pages.valuation_date)];
    if let Some(column) = &rule.market_area_column {
        conditions.push(format!("in the same {column}"));
    }
    if let Some(limit) = rule.max_distance {
        let unit = rule.places.as_ref().map_or("", |p| p.unit.as_str());
        conditions.push(format!("within {limit} {unit}"));
    }
    format!(
        "Chosen from the study's sales {}: the {} that need the smallest total adjustment. Each is adjusted to this \
         parcel with the model's own figures — first to the valuation date, then for each difference. A sale \
         adjusted by more than {:.0} % net or {:.0} % gross (common practice) is shown but set aside.",
        conditions.join(", "),
        rule.count,
        100.0 * rule.net_limit,
        100.0 * rule.gross_limit
    )
}

/// One parcel's page as HTML.
fn page_html(pages: &ParcelPages, page: &ParcelPage) -> String {
    let unit = pages.rule.places.as_ref().map_or("", |p| p.unit.as_str());
    let mut out = format!(
        "<section class=\"pl-parcel\" data-parcel=\"{id}\" style=\"background:#fff;color:{INK};border:1px solid {RULE};\
         border-radius:6px;padding:16px 20px;margin:10px 0;max-width:760px;font-family:system-ui,-apple-system,'Segoe UI',\
         Roboto,'DejaVu Sans',sans-serif;font-size:13px;line-height:1.45\">\n\
         <div style=\"color:{MUTED};font-size:12px\">Value explained · as of {date}</div>\n\
         <h2 style=\"font-size:19px;margin:2px 0 4px 0\">Parcel {id}: {value}</h2>\n\
         <div>One sale of this home would likely fetch between <b>{low}</b> and <b>{high}</b> \
         ({level:.0} % of such sales fall in this range, by the model).</div>\n",
        id = escape(&page.parcel_id),
        date = escape(&pages.valuation_date),
        value = money(page.value),
        low = money(page.interval.0),
        high = money(page.interval.1),
        level = 100.0 * pages.level,
    );
    build_up_html(&mut out, page, pages.multiplicative);
    out.push_str(&format!(
        "<h3 style=\"font-size:14px;margin:14px 0 4px 0\">2. Recent sales of similar homes, adjusted to this parcel</h3>\n\
         <p style=\"margin:2px 0 6px 0\">{}</p>\n",
        escape(&rule_words(pages))
    ));
    let c = &page.comparables;
    if c.chosen.is_empty() {
        out.push_str("<p><b>No sale met the conditions.</b></p>\n");
    }
    for (i, sale) in c.chosen.iter().enumerate() {
        comparable_html(&mut out, i + 1, sale, unit, &page.parcel_id);
    }
    out.push_str("<h3 style=\"font-size:14px;margin:14px 0 4px 0\">3. What the sales say together</h3>\n");
    match (&c.reconciled, &c.shortfall) {
        (Some(r), _) => out.push_str(&format!(
            "<p class=\"pl-keep\" style=\"margin:2px 0\">Weighting the {} qualifying sales by how little they needed \
             adjusting (weight 1 ÷ ({} + gross share)), they point to <b>{}</b> (from {} to {}), {} the model's value of {}.</p>\n",
            r.qualifying,
            pages.rule.weight_offset,
            money(r.estimate),
            money(r.range.0),
            money(r.range.1),
            if r.against_model.abs() < 0.0005 {
                "the same as".to_string()
            } else {
                format!("{} against", percent(r.against_model))
            },
            money(page.value)
        )),
        (None, Some(reason)) => out.push_str(&format!(
            "<p class=\"pl-keep\" style=\"color:{FLAG};margin:2px 0\"><b>Too few comparable sales.</b> {}</p>\n",
            escape(reason)
        )),
        (None, None) => {}
    }
    out.push_str(&format!(
        "<div class=\"pl-keep\" style=\"margin-top:12px;padding-top:6px;border-top:1px solid {RULE};color:{MUTED};font-size:11px\">\
         Model: {} · sales: {} · parcels: {} · values {} as of {}.<br>{}</div>\n</section>\n",
        escape(&pages.model),
        escape(&pages.sales.describe()),
        escape(&pages.parcels.describe()),
        if pages.multiplicative { "multiplied by the model's factors" } else { "added up from the model's amounts" },
        escape(&pages.valuation_date),
        escape(VALUATION_CAUTION)
    ));
    out
}

/// Every page as HTML, with the print rules.
pub fn parcel_pages_html(pages: &ParcelPages) -> String {
    let mut out = String::from(PRINT_STYLE);
    for page in &pages.pages {
        out.push_str(&page_html(pages, page));
    }
    out
}

/// A standalone HTML document of the pages, ready to print (one sheet or
/// more per parcel, nothing split across sheets).
pub fn parcel_pages_document(pages: &ParcelPages) -> String {
    format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>Values explained as of {}</title>\n\
         </head>\n<body style=\"margin:0;padding:12px;background:#eef1f5\">\n{}</body>\n</html>\n",
        escape(&pages.valuation_date),
        parcel_pages_html(pages)
    )
}

/// The pages as text.
pub fn parcel_pages_text(pages: &ParcelPages) -> String {
    let mut out = String::new();
    for page in &pages.pages {
        out.push_str(&format!(
            "Parcel {} — value {} as of {} (likely range {} to {})\n",
            page.parcel_id,
            money(page.value),
            pages.valuation_date,
            money(page.interval.0),
            money(page.interval.1)
        ));
        let b = &page.build_up;
        out.push_str(&format!("  from {}: {}\n", b.reference.name, money(b.reference.value)));
        let width = b.steps.iter().map(|s| s.characteristic.chars().count()).max().unwrap_or(8).max(8);
        for s in &b.steps {
            out.push_str(&format!(
                "    {:<width$}  {:>10}  → {:>10}   ({} against {})\n",
                s.characteristic,
                signed_money(s.amount),
                money(s.running_value),
                shown_inputs(&s.parcel),
                shown_inputs(&s.reference)
            ));
        }
        out.push_str(&format!("  comparable sales ({} met the conditions):\n", page.comparables.eligible));
        for (i, sale) in page.comparables.chosen.iter().enumerate() {
            out.push_str(&format!(
                "    {}. {} sold {} for {} → adjusted {} (net {}, gross {:.1} %){}\n",
                i + 1,
                sale.parcel_id,
                sale.sale_date,
                money(sale.price),
                money(sale.adjusted_price),
                percent(sale.net_share),
                100.0 * sale.gross_share,
                if sale.flags.is_empty() {
                    String::new()
                } else {
                    format!(" — set aside: {}", sale.flags.join("; "))
                }
            ));
        }
        match (&page.comparables.reconciled, &page.comparables.shortfall) {
            (Some(r), _) => out.push_str(&format!(
                "  together: {} (from {} to {}), {} against the model value\n\n",
                money(r.estimate),
                money(r.range.0),
                money(r.range.1),
                percent(r.against_model)
            )),
            (None, Some(reason)) => out.push_str(&format!("  too few comparable sales: {reason}\n\n")),
            (None, None) => out.push('\n'),
        }
    }
    out.push_str(VALUATION_CAUTION);
    out.push('\n');
    out
}

impl Report for ParcelPages {
    fn bundle(&self) -> MimeBundle {
        let bundle = MimeBundle::text_and_html(parcel_pages_text(self), parcel_pages_html(self));
        match document_json(self) {
            Ok(json) => bundle.with(<ParcelPages as DocumentKind>::MIME, json),
            Err(_) => bundle,
        }
    }
}
