//! Every chart type renders to a non-trivial picture and is byte-identical
//! across runs. Charts are drawn for fits to NIST StRD data (Longley, Norris)
//! and the demo study, and rasterised with resvg (an independent SVG
//! renderer); the check is the fraction of non-background pixels inside the
//! chart. The review sheet is also read back as SVG structure: its panels and
//! the parcels it names.

use plumbline::plot::{self, PlotSize, ReviewOptions, Svg};
use plumbline::prelude::*;

fn longley() -> (Frame, Fit) {
    let frame =
        load_csv(plumbline_tests::reference_dir().join("nist-strd").join("Longley.csv"), &CsvOptions::default())
            .expect("Longley");
    let spec =
        ModelSpec::new("y").numeric("x1").term(Term::numeric("x2").log()).numeric("x3").numeric("x4").numeric("x6");
    let model = fit(&frame, &spec).expect("fit");
    (frame, model)
}

fn norris() -> (Frame, Fit) {
    let frame = load_csv(plumbline_tests::reference_dir().join("nist-strd").join("Norris.csv"), &CsvOptions::default())
        .expect("Norris");
    let model = fit(&frame, &ModelSpec::new("y").numeric("x")).expect("fit");
    (frame, model)
}

/// Fraction of pixels that differ from white.
fn ink_fraction(svg: &Svg) -> (f64, u32, u32) {
    // System fonts, when the machine has any, so that saved pictures show their labels.
    let mut options = resvg::usvg::Options::default();
    let fonts = std::sync::Arc::make_mut(&mut options.fontdb);
    fonts.load_system_fonts();
    if fonts.faces().any(|f| f.families.iter().any(|(name, _)| name == "DejaVu Sans")) {
        fonts.set_sans_serif_family("DejaVu Sans");
    }
    let tree = resvg::usvg::Tree::from_str(&svg.markup, &options).expect("valid SVG");
    let size = tree.size().to_int_size();
    let mut pixmap = resvg::tiny_skia::Pixmap::new(size.width(), size.height()).expect("pixmap");
    resvg::render(&tree, resvg::tiny_skia::Transform::default(), &mut pixmap.as_mut());
    let pixels = pixmap.pixels();
    let inked = pixels.iter().filter(|p| p.alpha() > 0 && (p.red() < 245 || p.green() < 245 || p.blue() < 245)).count();
    if let Ok(dir) = std::env::var("PLUMBLINE_SAVE_PLOTS") {
        let name: String = svg.title.chars().map(|c| if c.is_ascii_alphanumeric() { c } else { '_' }).collect();
        let _ = pixmap.save_png(std::path::Path::new(&dir).join(format!("{name}.png")));
    }
    (inked as f64 / pixels.len() as f64, size.width(), size.height())
}

fn check(name: &str, make: impl Fn() -> Svg, low: f64, high: f64) {
    let first = make();
    let second = make();
    assert_eq!(first.markup, second.markup, "{name}: SVG differs between two runs");
    assert!(first.markup.contains("<title>") && first.markup.contains("<desc>"), "{name}: no title/desc");
    assert!(!first.markup.contains("<script"), "{name}: script in SVG");
    let (fraction, w, h) = ink_fraction(&first);
    assert!(w >= 300 && h >= 200, "{name}: {w}×{h}");
    assert!(fraction > low && fraction < high, "{name}: ink fraction {fraction:.4} outside ({low}, {high})");
}

#[test]
fn residual_charts() {
    let (frame, model) = longley();
    let size = PlotSize::default();
    check("residuals", || plot::residuals_by_value(&model, size).expect("draw"), 0.03, 0.5);
    check("normal", || plot::normal_quantiles(&model, size).expect("draw"), 0.03, 0.5);
    check("spread", || plot::residual_spread(&model, size).expect("draw"), 0.03, 0.5);
    // Longley's x6 is the year: a numeric time column, drawn with tier medians.
    let by_year = ReviewOptions::default().time("x6");
    check("over time", || plot::residuals_over_time(&model, &frame, &by_year).expect("draw"), 0.03, 0.5);
    check(
        "influence",
        || plot::influence_by_value(&model, &frame, &ReviewOptions::default()).expect("draw"),
        0.03,
        0.5,
    );
    check("sheet", || plot::diagnostic_sheet(&model, &frame, &by_year).expect("draw"), 0.05, 0.6);
}

/// The demo study's model C with HC3 errors (valuation-study.ipynb).
fn demo_study() -> (Frame, Fit) {
    let (study, spec) = (plumbline_tests::demo_study_sales(), plumbline_tests::demo_model_c());
    let model = fit_with(&study, &spec, &FitOptions::with_covariance(CovarianceKind::Hc3)).expect("fit");
    (study, model)
}

/// The text of every `<text>` element, in document order.
fn svg_texts(markup: &str) -> Vec<String> {
    markup
        .split("<text")
        .skip(1)
        .filter_map(|piece| {
            piece
                .split_once('>')
                .and_then(|(_, rest)| rest.split_once("</text>"))
                .map(|(text, _)| text.trim().to_string())
        })
        .collect()
}

#[test]
fn the_review_sheet_shows_time_location_and_the_flagged_parcels() {
    let (frame, model) = demo_study();
    let options = ReviewOptions::default().ids("parcel_id");
    let svg = plot::diagnostic_sheet(&model, &frame, &options).expect("sheet");
    let texts = svg_texts(&svg.markup);
    // The time panel and the location panel exist, titled by their columns.
    assert!(texts.iter().any(|t| t == "Miss by sale_date: median of each quarter"), "no time panel: {texts:?}");
    assert!(texts.iter().any(|t| t == "Miss by district"), "no location panel: {texts:?}");
    for district in ["Wickerholm", "Tidewright Quay", "Brambleknot", "Corvel Heights", "Mossgrieve", "Pellowick"] {
        assert!(
            texts.iter().any(|t| t.starts_with(&format!("{district} ("))),
            "district {district} missing from the location panel"
        );
    }
    // The labelled parcels are the ones flagged_rows names for Cook's distance
    // above 4/n, most influential first (at most DEFAULT_LABELLED of them).
    let flags = model.flagged_rows(&frame, Some("parcel_id")).expect("flags");
    let expected: Vec<String> = flags
        .rows
        .iter()
        .filter(|r| r.cooks_distance.is_some_and(|d| d > flags.cooks_cutoff))
        .take(plot::DEFAULT_LABELLED)
        .map(|r| r.id.clone().expect("every demo sale has a parcel id"))
        .collect();
    assert_eq!(expected.len(), plot::DEFAULT_LABELLED, "the demo study has more than five influential sales");
    let drawn: Vec<&String> = texts.iter().filter(|t| t.len() == 9 && t.as_bytes()[2] == b'-').collect();
    assert_eq!(drawn, expected.iter().collect::<Vec<_>>(), "labels drawn on the sheet");
    assert!(
        svg.markup.contains(&format!("most influential first): {}.", expected.join(", "))),
        "the description names them too"
    );
    // The picture is not blank and renders in an independent SVG renderer.
    let (fraction, w, h) = ink_fraction(&svg);
    assert!(
        (w, h) == (plot::SHEET_SIZE.width, plot::SHEET_SIZE.height) && fraction > 0.05 && fraction < 0.6,
        "{fraction} {w}×{h}"
    );
}

#[test]
fn review_charts_refuse_a_frame_that_is_not_the_fitting_one() {
    let (frame, model) = longley();
    let (other, _) = norris();
    let e = plot::diagnostic_sheet(&model, &other, &ReviewOptions::default()).expect_err("other frame").to_string();
    assert!(e.contains("not the one the model was fitted to"), "{e}");
    let e = plot::residuals_by_group(&model, &frame, &ReviewOptions::default()).expect_err("no category").to_string();
    assert!(e.contains("no category term"), "{e}");
    let e = plot::residuals_by_group(&model, &frame, &ReviewOptions::default().groups("x9"))
        .expect_err("no such column")
        .to_string();
    assert!(e.contains("x9"), "{e}");
}

#[test]
fn model_charts() {
    let (frame, model) = longley();
    let size = PlotSize::default();
    check("fit line", || plot::fit_line(&model, &frame, "x2", 0.95, size).expect("draw"), 0.05, 0.7);
    check("coefficients", || plot::coefficient_intervals(&model, 0.95, size).expect("draw"), 0.03, 0.5);
    let (nframe, nmodel) = norris();
    check("norris line", || plot::fit_line(&nmodel, &nframe, "x", 0.99, size).expect("draw"), 0.03, 0.7);
}

#[test]
fn distribution_charts() {
    let (frame, model) = longley();
    let size = PlotSize::default();
    let residuals = model.solution().residuals().to_vec();
    check("histogram", || plot::histogram(&residuals, "residual", size).expect("draw"), 0.05, 0.7);
    check(
        "heatmap",
        || plot::correlation_heatmap(&frame, &["y", "x1", "x2", "x3", "x4", "x5", "x6"], size).expect("draw"),
        0.2,
        0.95,
    );
}

#[test]
fn a_custom_size_is_honoured() {
    let (_, model) = norris();
    let svg = plot::normal_quantiles(&model, PlotSize { width: 400, height: 300 }).expect("draw");
    assert!(svg.markup.contains("width=\"400\"") && svg.markup.contains("height=\"300\""));
}

#[test]
fn fit_line_needs_a_numeric_term() {
    let (frame, model) = norris();
    let m = plot::fit_line(&model, &frame, "y", 0.95, PlotSize::default()).expect_err("not a term").to_string();
    assert!(m.contains("not a numeric term"), "{m}");
}
