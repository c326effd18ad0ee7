//! Reports people read: snapshots of the text and HTML of a frame, a profile,
//! a fit and a comparison (reviewed by eye and committed under
//! `tests/render/snapshots/`), HTML validity with an HTML5 parser (scraper,
//! built on html5ever), and the display bundle contract. The data are NIST
//! StRD Longley; the numbers in the snapshots are checked elsewhere against
//! NIST's certified values.

use plumbline::compare::side_by_side;
use plumbline::prelude::*;
use plumbline::render::{fit_csv, fit_markdown, MimeBundle, ProfileReport, Report, FIT_JSON_MIME};

fn longley() -> Frame {
    load_csv(plumbline_tests::reference_dir().join("nist-strd").join("Longley.csv"), &CsvOptions::default())
        .expect("Longley")
}

/// Replaces what differs between machines and runs (path, load time).
fn stable(text: &str, frame: &Frame) -> String {
    let p = frame.provenance();
    text.replace(&p.path, "[data]/Longley.csv").replace(&p.loaded_at, "[loaded at]")
}

fn full_model(frame: &Frame) -> Fit {
    fit(frame, &ModelSpec::new("y").numeric("x1").numeric("x2").numeric("x3").numeric("x4").numeric("x5").numeric("x6"))
        .expect("fit")
}

fn check_html(name: &str, html: &str) {
    let document = scraper::Html::parse_fragment(html);
    assert!(document.errors.is_empty(), "{name}: HTML parse errors {:?}", document.errors);
    assert!(!html.to_lowercase().contains("<script"), "{name}: contains a script");
    assert!(!html.contains("href=\"http") && !html.contains("src=\"http"), "{name}: external asset");
    assert!(!html.contains("<style"), "{name}: a style sheet instead of inline styles");
}

fn check_text(name: &str, text: &str) {
    for line in text.lines().filter(|l| !l.contains("[data]")) {
        assert!(line.chars().count() < 100, "{name}: line over 100 columns: {line}");
    }
}

fn parts(bundle: &MimeBundle) -> (&str, &str) {
    (bundle.get("text/plain").expect("text/plain always"), bundle.get("text/html").expect("text/html"))
}

#[test]
fn frame_snapshot() {
    let frame = longley();
    let bundle = frame.bundle();
    let (text, html) = parts(&bundle);
    check_text("frame", text);
    check_html("frame", html);
    insta::assert_snapshot!("frame_text", stable(text, &frame));
    insta::assert_snapshot!("frame_html", stable(html, &frame));
}

#[test]
fn profile_snapshot() {
    let frame = longley();
    let bundle = ProfileReport::of(&frame).expect("profile").bundle();
    let (text, html) = parts(&bundle);
    check_text("profile", text);
    check_html("profile", html);
    insta::assert_snapshot!("profile_text", stable(text, &frame));
    insta::assert_snapshot!("profile_html", stable(html, &frame));
}

#[test]
fn fit_snapshot() {
    let frame = longley();
    let model = full_model(&frame);
    let bundle = model.bundle();
    let (text, html) = parts(&bundle);
    check_text("fit", text);
    check_html("fit", html);
    assert!(html.contains("not appraisals"), "the caution is part of every fit report");
    let json: serde_json::Value =
        serde_json::from_str(bundle.get(FIT_JSON_MIME).expect("fit json")).expect("valid JSON");
    assert_eq!(json["schema_version"], plumbline::inference::SUMMARY_SCHEMA_VERSION);
    assert!(
        json.get("model_df").is_some() && json.get("residual_df").is_some(),
        "schema 2 names the degrees of freedom model_df and residual_df"
    );
    insta::assert_snapshot!("fit_text", stable(text, &frame));
    insta::assert_snapshot!("fit_html", stable(html, &frame));
}

#[test]
fn explain_has_a_sentence_per_statistic() {
    let frame = longley();
    let model = full_model(&frame);
    let bundle = model.explain(0.95).bundle();
    let (text, html) = parts(&bundle);
    check_text("explain", text);
    check_html("explain", html);
    for what in ["R²", "adjusted R²", "typical miss", "F", "AIC and BIC", "condition number", "x1", "x6"] {
        assert!(text.contains(&format!("{what}: ")), "no sentence for {what}");
    }
    insta::assert_snapshot!("explain_text", stable(text, &frame));
}

#[test]
fn comparison_snapshot() {
    let frame = longley();
    let small = fit(&frame, &ModelSpec::new("y").numeric("x2").numeric("x6")).expect("fit");
    let large = full_model(&frame);
    let table = side_by_side(&[("two terms", &small), ("six terms", &large)]).expect("table");
    let bundle = table.bundle();
    let (text, html) = parts(&bundle);
    check_text("comparison", text);
    check_html("comparison", html);
    insta::assert_snapshot!("comparison_text", text);
    insta::assert_snapshot!("comparison_html", html);
}

#[test]
fn exports_for_a_written_study() {
    let frame = longley();
    let model = full_model(&frame);
    let markdown = fit_markdown(&model, 0.95).expect("markdown");
    assert!(markdown.contains("| term | estimate |") && markdown.contains("| x6 |"));
    let csv = fit_csv(&model, 0.95).expect("csv");
    let mut lines = csv.lines();
    assert_eq!(lines.next(), Some("term,estimate,std_error,t,p_value,ci_low,ci_high"));
    // NIST StRD Longley certified B6 (x6) = 1829.15146461355: full precision survives the export.
    let x6 = csv.lines().find(|l| l.starts_with("x6,")).expect("x6 row");
    let estimate: f64 = x6.split(',').nth(1).expect("estimate").parse().expect("number");
    assert!(((estimate - 1829.15146461355) / 1829.15146461355).abs() < 1e-12);
}

#[test]
fn every_result_has_plain_text() {
    let frame = longley();
    let model = full_model(&frame);
    let bundles = vec![
        plumbline::render::AssumptionTests(model.assumption_tests()).bundle(),
        model.collinearity().bundle(),
        model.flagged_rows(&frame, None).expect("flags").bundle(),
        model.predict(&frame, 0.9).expect("predict").bundle(),
        plumbline::plot::normal_quantiles(&model, Default::default()).expect("svg").bundle(),
    ];
    for b in &bundles {
        assert!(b.get("text/plain").is_some_and(|t| !t.is_empty()));
        if let Some(html) = b.get("text/html") {
            check_html("result", html);
        }
    }
}
