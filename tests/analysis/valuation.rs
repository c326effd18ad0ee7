//! Valuation helpers: time adjustment follows the fitted trend exactly
//! (`price · exp(b·Δmonths)` for a logged target — the definition in
//! `shared/reference/ratio-study.md`), predictions outside the fitted range are
//! flagged, and model values retransform as documented (Duan 1983 smearing).

use plumbline::prelude::*;
use plumbline::value::{model_values, time_adjust, Retransform};
use plumbline_tests::{scratch_dir, write_file};

fn sales() -> Frame {
    let dir = scratch_dir("valuation");
    let mut body = String::from("price,area,months\n");
    for i in 0..40 {
        let area = 900.0 + 37.0 * i as f64;
        let months = (i % 12) as f64;
        let wobble = ((i * 7919) % 13) as f64 / 13.0 - 0.5;
        let price = (11.0 + 0.0005 * area + 0.004 * months + 0.05 * wobble).exp();
        body.push_str(&format!("{price},{area},{months}\n"));
    }
    let path = write_file(&dir, "sales.csv", &body);
    load_csv(path, &CsvOptions::default()).expect("load")
}

#[test]
fn time_adjustment_follows_the_trend() {
    let frame = sales();
    let model = fit(&frame, &ModelSpec::new("price").log_target().numeric("area").numeric("months")).expect("fit");
    let slope = model.coefficients(0.95).expect("table").iter().find(|c| c.term == "months").expect("months").estimate;
    let adjusted = time_adjust(&model, &frame, "months", "price", 12.0).expect("adjust");
    let prices = frame.numeric_column("price").expect("price");
    let months = frame.numeric_column("months").expect("months");
    for ((a, p), m) in adjusted.iter().zip(&prices).zip(&months) {
        let expected = p.expect("price") * (slope * (12.0 - m.expect("month"))).exp();
        assert!((a.expect("adjusted") - expected).abs() <= 1e-12 * expected);
    }
    let m = time_adjust(&model, &frame, "area_missing", "price", 12.0).expect_err("not a term").to_string();
    assert!(m.contains("not a plain numeric term"), "{m}");
}

#[test]
fn predictions_outside_the_fitted_range_are_flagged() {
    let frame = sales();
    let model = fit(&frame, &ModelSpec::new("price").log_target().numeric("area").numeric("months")).expect("fit");
    let dir = scratch_dir("subjects");
    let subjects = load_csv(write_file(&dir, "s.csv", "area,months\n1500,6\n9000,6\n1500,30\n"), &CsvOptions::default()).expect("load");
    let p = model.predict(&subjects, 0.95).expect("predict");
    assert!(p.rows[0].outside_range.is_empty());
    assert_eq!(p.rows[1].outside_range, vec!["area"]);
    assert_eq!(p.rows[2].outside_range, vec!["months"]);
    let text = plumbline::render::predictions_text(&p);
    assert!(text.contains("extrapolates") && text.contains("row 2 (area)"), "{text}");
}

#[test]
fn model_values_retransform_as_documented() {
    let frame = sales();
    let model = fit(&frame, &ModelSpec::new("price").log_target().numeric("area").numeric("months")).expect("fit");
    let medians = model_values(&model, &frame, Retransform::Median).expect("values");
    let means = model_values(&model, &frame, Retransform::SmearingMean).expect("values");
    let residuals = &model.solution().residuals;
    let smear = residuals.iter().map(|r| r.exp()).sum::<f64>() / residuals.len() as f64;
    for (m, s) in medians.iter().zip(&means) {
        let (m, s) = (m.expect("median"), s.expect("mean"));
        assert!((s / m - smear).abs() < 1e-12);
    }
}
