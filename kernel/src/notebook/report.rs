//! The standalone HTML report of an executed notebook.
//!
//! One file with no external assets and no scripts: a header with the run's
//! facts (notebook, time, version, inputs set, cells run) and the valuation
//! caution, then every cell in order — Markdown rendered by `pulldown-cmark`
//! (tables, footnotes, strikethrough), code in a numbered block, and the
//! outputs as the notebook holds them: our HTML cards and SVG charts inline,
//! PNG images as data URIs, text in preformatted blocks, errors marked.

use super::document::{multiline, CellKind, Notebook};
use plumbline::render::html::escape;
use plumbline::render::VALUATION_CAUTION;
use serde_json::Value;

/// Our stylesheet: readable on screen and in print; report cards carry their own styles.
const STYLE: &str = "\
body{margin:0;background:#eef1f5;color:#222b3a;font-family:system-ui,-apple-system,'Segoe UI',Roboto,'DejaVu Sans',sans-serif;font-size:15px;line-height:1.55}
main{max-width:1040px;margin:0 auto;padding:20px 22px 60px}
header.run{background:#fbfcfd;border:1px solid #d5dbe3;border-radius:6px;padding:14px 18px;margin-bottom:18px}
header.run h1{font-size:24px;margin:0 0 6px 0}header.run h2{font-size:14px;margin:0 0 4px 0;color:#5b6777;font-weight:600;border:none}
header.run dl{display:grid;grid-template-columns:max-content 1fr;gap:2px 14px;margin:8px 0;font-size:13px}
header.run dt{color:#5b6777}
header.run dd{margin:0;font-family:ui-monospace,'DejaVu Sans Mono',monospace;font-size:12.5px}
.caution{background:#eef3f7;border-left:3px solid #3d5a80;padding:6px 10px;margin:10px 0 0 0;color:#24364f;font-size:13px}
.stopped{background:#fdf1ec;border-left:3px solid #c24e2f;padding:6px 10px;margin:10px 0 0 0;color:#5a2a1c}
section.prose{margin:18px 0 8px 0}
section.prose h1{font-size:24px}section.prose h2{font-size:20px;border-bottom:1px solid #d5dbe3;padding-bottom:3px}
section.prose h3{font-size:17px}
section.prose table{border-collapse:collapse}section.prose td,section.prose th{border:1px solid #d5dbe3;padding:3px 8px}
section.prose code{background:#e3e8ef;padding:0 3px;border-radius:3px;font-size:90%}
section.prose pre{background:#e3e8ef;padding:8px 12px;border-radius:5px;overflow-x:auto;font-size:12.5px}
section.prose pre code{background:none;padding:0;font-size:inherit}
section.prose blockquote{border-left:3px solid #3d5a80;background:#eef3f7;margin:10px 0;padding:2px 14px;color:#24364f}
section.code{margin:10px 0 14px 0}
.source{display:flex;gap:8px;align-items:flex-start}
.source .count{color:#7a8799;font-family:ui-monospace,'DejaVu Sans Mono',monospace;font-size:12px;min-width:56px;text-align:right;padding-top:7px;white-space:nowrap}
.source pre{flex:1;margin:0;background:#f6f8fa;border:1px solid #d5dbe3;border-radius:5px;padding:7px 10px;overflow-x:auto;font-size:12.5px;line-height:1.45}
.output{margin:6px 0 0 52px;overflow-x:auto}
.output pre{margin:0;font-size:12.5px;line-height:1.4;white-space:pre-wrap}
.output pre.stderr{color:#7a4a12}
.output .error{background:#fdf1ec;border-left:3px solid #c24e2f;padding:6px 10px}
.output .error b{color:#a03c22}
.output img,.output svg{max-width:100%;height:auto}
footer{margin-top:30px;color:#5b6777;font-size:12px}
@media print{body{background:#fff}header.run{border:none}.output{overflow:visible}}
";

/// Facts about the run shown at the top of the report.
#[derive(Debug, Clone, Default)]
pub struct RunFacts {
    /// The notebook file that was run.
    pub notebook: String,
    /// When the run started (RFC 3339).
    pub started_at: String,
    /// Wall-clock duration text.
    pub duration: String,
    /// Inputs set for the run, `name = value (was old)`.
    pub inputs: Vec<String>,
    /// `executed of total` code cells.
    pub cells: String,
    /// Where the run stopped, if it did.
    pub stopped: Option<String>,
}

/// Renders notebook Markdown for the report, safely: raw HTML in the Markdown
/// (blocks and inline tags, `<script>` included) is shown as text, not passed
/// through, and a link or image whose address uses a scheme other than
/// `http`, `https` or `mailto` (e.g. `javascript:`) keeps its text but loses
/// the address. A shared notebook thus cannot put script into a report.
fn markdown_html(source: &str) -> String {
    use pulldown_cmark::{html, Event, Options, Parser, Tag};
    let options = Options::ENABLE_TABLES | Options::ENABLE_FOOTNOTES | Options::ENABLE_STRIKETHROUGH;
    let events = Parser::new_ext(source, options).map(|event| match event {
        Event::Html(raw) | Event::InlineHtml(raw) => Event::Text(raw),
        Event::Start(Tag::Link { link_type, dest_url, title, id }) if !safe_url(&dest_url) => {
            Event::Start(Tag::Link { link_type, dest_url: "".into(), title, id })
        }
        Event::Start(Tag::Image { link_type, dest_url, title, id }) if !safe_url(&dest_url) => {
            Event::Start(Tag::Image { link_type, dest_url: "".into(), title, id })
        }
        other => other,
    });
    let mut out = String::new();
    html::push_html(&mut out, events);
    out
}

/// Whether a link address is safe in a report: relative, a fragment, or an
/// `http`, `https` or `mailto` URL.
fn safe_url(url: &str) -> bool {
    let lowered: String =
        url.trim().chars().filter(|c| !c.is_control() && !c.is_whitespace()).collect::<String>().to_ascii_lowercase();
    match lowered.split_once(':') {
        // A colon after a `/`, `?` or `#` is not a scheme separator.
        Some((scheme, _)) if !scheme.contains(['/', '?', '#']) => matches!(scheme, "http" | "https" | "mailto"),
        _ => true,
    }
}

/// Removes terminal colour codes from engine text.
fn strip_ansi(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    let mut chars = text.chars().peekable();
    while let Some(c) = chars.next() {
        if c == '\u{1b}' && chars.peek() == Some(&'[') {
            chars.next();
            for d in chars.by_ref() {
                if d.is_ascii_alphabetic() {
                    break;
                }
            }
        } else {
            out.push(c);
        }
    }
    out
}

/// The richest rendering of a display bundle we can embed.
fn bundle_html(data: &Value) -> String {
    let text = |mime: &str| data.get(mime).map(multiline);
    if let Some(html) = text("text/html") {
        html
    } else if let Some(svg) = text("image/svg+xml") {
        svg
    } else if let Some(png) = text("image/png") {
        format!("<img alt=\"chart\" src=\"data:image/png;base64,{}\">", png.trim())
    } else if let Some(plain) = text("text/plain") {
        format!("<pre>{}</pre>", escape(&strip_ansi(&plain)))
    } else {
        String::new()
    }
}

fn output_html(output: &Value) -> String {
    match output["output_type"].as_str() {
        Some("stream") => {
            let class = if output["name"] == "stderr" { " class=\"stderr\"" } else { "" };
            format!("<pre{class}>{}</pre>", escape(&strip_ansi(&multiline(&output["text"]))))
        }
        Some("display_data") | Some("execute_result") => bundle_html(&output["data"]),
        Some("error") => {
            let lines: Vec<String> = output["traceback"]
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(Value::as_str)
                .map(strip_ansi)
                .collect();
            format!(
                "<div class=\"error\"><b>{}</b>: {}<pre>{}</pre></div>",
                escape(output["ename"].as_str().unwrap_or("error")),
                escape(&strip_ansi(output["evalue"].as_str().unwrap_or(""))),
                escape(&lines.join("\n"))
            )
        }
        _ => String::new(),
    }
}

/// The report page of `notebook`.
pub fn report_html(notebook: &Notebook, facts: &RunFacts) -> String {
    let title = notebook.title(&facts.notebook);
    let mut out = format!(
        "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n<title>{}</title>\n\
<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<meta name=\"generator\" content=\"plumbline {}\">\n<style>\n{STYLE}</style>\n</head>\n<body>\n<main>\n",
        escape(&title),
        env!("CARGO_PKG_VERSION")
    );
    // The notebook's own first heading is the page's title; the run card
    // repeats it only when the notebook has none (the title is then the file name).
    let has_heading = title != facts.notebook;
    let card_title = if has_heading { "About this run".to_string() } else { title.clone() };
    let card_heading = if has_heading { "h2" } else { "h1" };
    out.push_str(&format!("<header class=\"run\">\n<{card_heading}>{}</{card_heading}>\n<dl>\n", escape(&card_title)));
    let inputs =
        if facts.inputs.is_empty() { "as written in the notebook".to_string() } else { facts.inputs.join("; ") };
    for (label, value) in [
        ("notebook", facts.notebook.as_str()),
        ("run started", facts.started_at.as_str()),
        ("duration", facts.duration.as_str()),
        ("code cells run", facts.cells.as_str()),
        ("inputs", inputs.as_str()),
        ("produced by", concat!("plumbline run ", env!("CARGO_PKG_VERSION"))),
    ] {
        out.push_str(&format!("<dt>{}</dt><dd>{}</dd>\n", escape(label), escape(value)));
    }
    out.push_str("</dl>\n");
    if let Some(stopped) = &facts.stopped {
        out.push_str(&format!("<div class=\"stopped\"><b>The run stopped early.</b> {}</div>\n", escape(stopped)));
    }
    out.push_str(&format!("<div class=\"caution\">{}</div>\n</header>\n", escape(VALUATION_CAUTION)));
    for index in 0..notebook.len() {
        match notebook.kind(index) {
            CellKind::Markdown => {
                out.push_str(&format!(
                    "<section class=\"prose\" id=\"cell-{}\">\n{}</section>\n",
                    index + 1,
                    markdown_html(&notebook.source(index))
                ));
            }
            CellKind::Raw => {
                out.push_str(&format!(
                    "<section class=\"prose\" id=\"cell-{}\"><pre>{}</pre></section>\n",
                    index + 1,
                    escape(&notebook.source(index))
                ));
            }
            CellKind::Code => {
                let count =
                    notebook.execution_count(index).map(|c| format!("step {c}")).unwrap_or_else(|| "not run".into());
                out.push_str(&format!(
                    "<section class=\"code\" id=\"cell-{}\">\n<div class=\"source\"><span class=\"count\">{count}</span><pre><code>{}</code></pre></div>\n",
                    index + 1,
                    escape(&notebook.source(index))
                ));
                for output in notebook.outputs(index) {
                    let html = output_html(output);
                    if !html.is_empty() {
                        out.push_str(&format!("<div class=\"output\">{html}</div>\n"));
                    }
                }
                out.push_str("</section>\n");
            }
        }
    }
    out.push_str(&format!(
        "<footer>Produced by plumbline run {} from {}. {}</footer>\n</main>\n</body>\n</html>\n",
        env!("CARGO_PKG_VERSION"),
        escape(&facts.notebook),
        escape(VALUATION_CAUTION)
    ));
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn markdown_cannot_put_script_or_markup_into_a_report() {
        let source = "# Notes\n\n<script>alert('x')</script>\n\nText with <img src=x onerror=alert(1)> inline.\n\n\
                      [click](javascript:alert(1)) [ok](https://example.org/a:b) [rel](notes.html#s) ![p](JaVaScRiPt:alert(2))\n";
        let html = markdown_html(source);
        assert!(!html.contains("<script"), "{html}");
        assert!(!html.contains("<img src=x"), "{html}");
        assert!(html.contains("&lt;script&gt;"), "raw HTML is shown as text: {html}");
        assert!(!html.to_ascii_lowercase().contains("javascript:"), "{html}");
        assert!(html.contains("href=\"https://example.org/a:b\""), "{html}");
        assert!(html.contains("href=\"notes.html#s\""), "{html}");
        assert!(html.contains(">click</a>"), "the link text stays: {html}");
    }

    #[test]
    fn markdown_tables_render_and_text_outputs_are_escaped() {
        let nb = Notebook::parse(
            &serde_json::json!({
                "nbformat": 4, "nbformat_minor": 5, "metadata": {},
                "cells": [
                    {"cell_type": "markdown", "metadata": {}, "source": "# Study\n\n| a | b |\n|---|---|\n| 1 | 2 |\n"},
                    {"cell_type": "code", "metadata": {}, "source": "x < 3", "execution_count": 1, "outputs": [
                        {"output_type": "stream", "name": "stdout", "text": "<b>not markup</b>\n"},
                        {"output_type": "error", "ename": "CompileError", "evalue": "\u{1b}[31mbad\u{1b}[0m", "traceback": []}
                    ]}
                ]
            })
            .to_string(),
        )
        .unwrap();
        let html = report_html(&nb, &RunFacts { notebook: "study.ipynb".into(), ..Default::default() });
        assert!(html.contains("<table>") && html.contains("<td>1</td>"));
        assert!(html.contains("&lt;b&gt;not markup&lt;/b&gt;"));
        assert!(html.contains("x &lt; 3"));
        assert!(html.contains("<b>CompileError</b>: bad"));
        assert!(html.contains(&escape(VALUATION_CAUTION)));
    }
}
