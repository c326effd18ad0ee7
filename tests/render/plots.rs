//! Every chart type renders to a non-trivial picture and is byte-identical
//! across runs. Charts are drawn for fits to NIST StRD data (Longley, Norris)
//! and rasterised with resvg (an independent SVG renderer); the check is the
//! fraction of non-background pixels inside the chart.

use plumbline::plot::{self, PlotSize, Svg};
use plumbline::prelude::*;

fn longley() -> (Frame, Fit) {
    let frame = load_csv(plumbline_tests::reference_dir().join("nist-strd").join("Longley.csv"), &CsvOptions::default())
        .expect("Longley");
    let spec = ModelSpec::new("y").numeric("x1").term(Term::numeric("x2").log()).numeric("x3").numeric("x4").numeric("x6");
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
    let (_, model) = longley();
    let size = PlotSize::default();
    check("residuals", || plot::residuals_vs_fitted(&model, size).expect("draw"), 0.03, 0.5);
    check("qq", || plot::normal_qq(&model, size).expect("draw"), 0.03, 0.5);
    check("scale", || plot::scale_location(&model, size).expect("draw"), 0.03, 0.5);
    check("leverage", || plot::leverage_plot(&model, size).expect("draw"), 0.03, 0.5);
    check("sheet", || plot::diagnostic_sheet(&model, size).expect("draw"), 0.05, 0.6);
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
    let residuals = model.solution().residuals.clone();
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
    let svg = plot::normal_qq(&model, PlotSize { width: 400, height: 300 }).expect("draw");
    assert!(svg.markup.contains("width=\"400\"") && svg.markup.contains("height=\"300\""));
}

#[test]
fn fit_line_needs_a_numeric_term() {
    let (frame, model) = norris();
    let m = plot::fit_line(&model, &frame, "y", 0.95, PlotSize::default()).expect_err("not a term").to_string();
    assert!(m.contains("not a numeric term"), "{m}");
}
