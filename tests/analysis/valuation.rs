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
    assert!(m.contains("not a time trend of this model") && m.contains("plain numeric term"), "{m}");
}

#[test]
fn predictions_outside_the_fitted_range_are_flagged() {
    let frame = sales();
    let model = fit(&frame, &ModelSpec::new("price").log_target().numeric("area").numeric("months")).expect("fit");
    let dir = scratch_dir("subjects");
    let subjects =
        load_csv(write_file(&dir, "s.csv", "area,months\n1500,6\n9000,6\n1500,30\n"), &CsvOptions::default())
            .expect("load");
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
    let residuals = model.solution().residuals();
    let smear = residuals.iter().map(|r| r.exp()).sum::<f64>() / residuals.len() as f64;
    for (m, s) in medians.iter().zip(&means) {
        let (m, s) = (m.expect("median"), s.expect("mean"));
        assert!((s / m - smear).abs() < 1e-12);
    }
}

/// Values moved to a valuation date by `model_values_at` must, divided by the
/// prices moved there by `time_adjust`, give the same ratio as value ÷ price at
/// the sale date (the trend factor cancels for a logged target: an identity of
/// the definitions in `shared/reference/ratio-study.md`).
#[test]
fn values_at_a_date_keep_each_sales_ratio() {
    let frame = sales();
    let model = fit(&frame, &ModelSpec::new("price").log_target().numeric("area").numeric("months")).expect("fit");
    let at_sale = model_values(&model, &frame, Retransform::Median).expect("values");
    let at_date =
        plumbline::value::model_values_at(&model, &frame, "months", 15.0, Retransform::Median).expect("values at");
    let adjusted = time_adjust(&model, &frame, "months", "price", 15.0).expect("adjust");
    let prices = frame.numeric_column("price").expect("price");
    for i in 0..frame.height() {
        let before = at_sale[i].expect("v") / prices[i].expect("p");
        let after = at_date[i].expect("v") / adjusted[i].expect("a");
        assert!((before - after).abs() <= 1e-13 * before, "row {i}: {before} vs {after}");
    }
}

/// The drift report on constructed runs with known answers: a coefficient
/// moved outside its old interval is named, and a COD that leaves the IAAO
/// range for homogeneous residential property (5–10, recalled from memory —
/// see `plumbline::value::standards`) is marked as crossed.
#[test]
fn drift_names_moved_coefficients_and_crossed_ranges() {
    use plumbline::drift::{drift, RunResults};
    use plumbline::value::{ratio_study, RatioOptions};
    let frame = sales();
    let spec = ModelSpec::new("price").log_target().numeric("area").numeric("months");
    let old_fit = fit(&frame, &spec).expect("fit");
    // The same market with prices 10 % higher per month: the trend must move.
    let dir = scratch_dir("valuation-drift");
    let mut body = String::from("price,area,months\n");
    let prices = frame.numeric_column("price").expect("price");
    let areas = frame.numeric_column("area").expect("area");
    let months = frame.numeric_column("months").expect("months");
    for i in 0..frame.height() {
        let (p, a, m) = (prices[i].expect("p"), areas[i].expect("a"), months[i].expect("m"));
        body.push_str(&format!("{},{a},{m}\n", p * (0.1 * m).exp()));
    }
    let new_frame = load_csv(write_file(&dir, "sales.csv", &body), &CsvOptions::default()).expect("load");
    let new_fit = fit(&new_frame, &spec).expect("fit");
    // Old ratios 1 ± 7 % (COD 7, inside 5–10); new ratios 1 ± 30 % (COD 30, outside).
    let spread = |width: f64| -> (Vec<Option<f64>>, Vec<Option<f64>>) {
        let values = (0..40).map(|i| Some(100.0 * (1.0 + width * if i % 2 == 0 { 1.0 } else { -1.0 }))).collect();
        (values, vec![Some(100.0); 40])
    };
    let options = RatioOptions { trim: None, ..Default::default() };
    let (v_old, p_old) = spread(0.07);
    let (v_new, p_new) = spread(0.30);
    let old_study = ratio_study(&v_old, &p_old, None, &options).expect("old study");
    let new_study = ratio_study(&v_new, &p_new, None, &options).expect("new study");
    let old = RunResults::new("old").with_fit(&old_fit, 0.95).expect("old").with_ratio_study(&old_study).expect("old");
    let new = RunResults::new("new").with_fit(&new_fit, 0.95).expect("new").with_ratio_study(&new_study).expect("new");
    let report = drift(&old, &new);
    let moved: Vec<&str> = report.moved_coefficients().map(|c| c.term.as_str()).collect();
    assert!(moved.contains(&"months"), "{moved:?}");
    // COD of ±w around a median of 1 is exactly 100·w: 7 (inside 5–10) → 30 (outside).
    let cod = report.ratio_studies[0].statistics.iter().find(|t| t.statistic == "COD").expect("COD");
    assert!((cod.old.expect("old") - 7.0).abs() < 1e-9 && (cod.new.expect("new") - 30.0).abs() < 1e-9);
    assert_eq!((cod.old_inside, cod.new_inside, cod.crossed), (Some(true), Some(false), true));
    assert_eq!(report.crossed_thresholds().count(), 1, "only the COD crossed: {:?}", report.ratio_studies);
    let text = plumbline::render::drift_text(&report);
    assert!(text.contains("CROSSED") && text.contains("months"), "{text}");
}

/// The value roll pairs runs by parcel id, so a repeated id is refused with
/// both rows named, and each parcel carries its latest sale.
#[test]
fn the_value_roll_refuses_repeated_ids_and_keeps_the_latest_sale() {
    use plumbline::value::value_roll;
    let frame = sales();
    let model = fit(&frame, &ModelSpec::new("price").log_target().numeric("area")).expect("fit");
    let dir = scratch_dir("roll");
    let parcels = load(write_file(&dir, "parcels.csv", "id,area\nA,1200\nB,1500\nA,1800\n")).expect("parcels");
    let e = value_roll(&model, &parcels, "id", "2026-01-01", Retransform::Median).expect_err("repeated id");
    assert!(e.to_string().contains("`A` appears on rows 1 and 3"), "{e}");

    let parcels = load(write_file(&dir, "parcels2.csv", "id,area\nA,1200\nB,\n")).expect("parcels");
    let sales =
        load(write_file(&dir, "sold.csv", "id,sold,price\nA,2024-05-01,250000\nA,2025-02-01,270000\nZ,2025-03-01,1\n"))
            .expect("sales");
    let roll = value_roll(&model, &parcels, "id", "2026-01-01", Retransform::Median)
        .expect("roll")
        .with_sales(&sales, "id", "sold", "price")
        .expect("sales");
    assert_eq!(roll.valued(), 1, "B has no area, so no value");
    let sale = roll.parcels[0].sale.as_ref().expect("A sold");
    assert_eq!((sale.date.as_str(), sale.price), ("2025-02-01", 270000.0));
    assert!(roll.parcels[1].sale.is_none());
}

/// The in-sample half of the holdout figures is exactly the accuracy of the
/// training fit's values against the training prices.
#[test]
fn holdout_accuracy_scores_each_part_with_the_training_fit() {
    use plumbline::value::{holdout_accuracy, value_accuracy};
    let frame = sales();
    let (training, holdout) = plumbline::compare::split_by_cutoff(&frame, "months", "9").expect("split");
    let spec = ModelSpec::new("price").log_target().numeric("area").numeric("months");
    let result =
        holdout_accuracy(&training, &holdout, &spec, &FitOptions::default(), Retransform::Median, "months ≥ 9")
            .expect("holdout");
    let model = fit(&training, &spec).expect("fit");
    let values = model_values(&model, &training, Retransform::Median).expect("values");
    let prices = training.numeric_column("price").expect("prices");
    assert_eq!(result.in_sample, value_accuracy(&values, &prices).expect("accuracy"));
    assert_eq!(result.holdout.count, holdout.height());
    assert_eq!(result.split, "months ≥ 9");
}

/// The demo study's chosen model E (valuation-study.ipynb, section 7) with
/// its sales and subjects, for the appeal pages.
fn demo_model_e() -> (Frame, Fit, Frame) {
    let sales = plumbline_tests::demo_study_sales();
    let spec =
        plumbline_tests::demo_model_c().term(Term::distance_from("x", "y", NamedPoint::new("Lantern Green", 4.5, 3.0)));
    let model = fit_with(&sales, &spec, &FitOptions::with_covariance(CovarianceKind::Hc3)).expect("model E");
    let subjects = load(plumbline_tests::demo_sales_csv().with_file_name("subjects.csv")).expect("subjects");
    (sales, model, subjects)
}

fn demo_page_options() -> plumbline::appeal::PageOptions {
    plumbline::appeal::PageOptions::new("parcel_id", "sale_date", "2026-01-01").market_area("district").places(
        "x",
        "y",
        plumbline::spatial::Coordinates::Planar,
    )
}

/// The build-up sums to the value (appeal::build_up): every page's reference
/// value plus its amounts is the model value, and the last running value is
/// that value, to 1e-9 relative. External reference: the model's own
/// prediction (`Fit::predict`, smearing mean; Duan 1983).
#[test]
fn every_page_builds_the_value_up_exactly_from_the_typical_home() {
    let (sales, model, subjects) = demo_model_e();
    let ids: Vec<String> = subjects.label_column("parcel_id").expect("ids").into_iter().flatten().collect();
    let pages = plumbline::appeal::parcel_pages(&model, &sales, &subjects, &ids, &demo_page_options()).expect("pages");
    let values =
        model_values(&model, &subjects.with_date("sale_date", "2026-01-01").expect("date"), Retransform::SmearingMean)
            .expect("values");
    assert_eq!(pages.pages.len(), 40);
    for (page, value) in pages.pages.iter().zip(&values) {
        let value = value.expect("every subject is valued");
        assert!((page.value - value).abs() <= 1e-9 * value, "{}: {} vs {value}", page.parcel_id, page.value);
        let b = &page.build_up;
        let total = b.reference.value + b.steps.iter().map(|s| s.amount).sum::<f64>();
        assert!((total - value).abs() <= 1e-9 * value, "{}: {total} vs {value}", page.parcel_id);
        let last = b.steps.last().expect("steps").running_value;
        assert!((last - value).abs() <= 1e-9 * value);
        assert!(page.interval.0 < page.value && page.value < page.interval.1);
    }
}

/// A subject identical to a sale in every term gets that sale's price moved
/// to the valuation date along the model's trend — exactly what
/// `value::time_adjust` gives (`price · exp(b·Δmonths)`, the definition in
/// `shared/reference/ratio-study.md`) — and no other adjustment.
#[test]
fn a_twin_of_a_sale_gets_its_time_adjusted_price_back() {
    let (sales, model, _) = demo_model_e();
    let dates = sales.date_column("sale_date").expect("dates");
    let rows = model.design().rows_used();
    let row = *rows
        .iter()
        .find(|&&r| dates[r].is_some_and(|d| d.to_string().as_str() >= "2025-06-01"))
        .expect("a recent sale");
    let twin = sales.subset(&[row], "the twin").expect("row").with_text("parcel_id", "TWIN-1").expect("id");
    let pages = plumbline::appeal::parcel_pages(&model, &sales, &twin, &["TWIN-1".to_string()], &demo_page_options())
        .expect("page");
    let adjusted = time_adjust(&model, &sales, "sale_date", "sale_price", "2026-01-01").expect("adjust");
    let expected = adjusted[row].expect("adjusted price");
    let chosen = &pages.pages[0].comparables.chosen[0];
    assert_eq!(chosen.row, row + 1, "the twin's sale needs the least adjustment: {chosen:?}");
    assert!((chosen.adjusted_price - expected).abs() <= 1e-9 * expected, "{} vs {expected}", chosen.adjusted_price);
    let moved: Vec<&str> = chosen.adjustments.iter().filter(|a| a.amount != 0.0).map(|a| a.term.as_str()).collect();
    assert_eq!(moved, vec!["sale_date (months since 2023-01-01)"]);
    assert!(chosen.adjustments[0].time_trend);
}

/// Over-limit comparables are flagged and left out of the reconciled figure,
/// and a subject with too few qualifying sales gets no figure and a reason
/// (limits: 15 % net, 25 % gross, three comparables — common practice).
#[test]
fn over_limit_comparables_are_set_aside_and_too_few_are_said() {
    let (sales, model, subjects) = demo_model_e();
    let ids: Vec<String> = subjects.label_column("parcel_id").expect("ids").into_iter().flatten().collect();
    let pages = plumbline::appeal::parcel_pages(&model, &sales, &subjects, &ids, &demo_page_options()).expect("pages");
    let (mut flagged, mut short) = (0, 0);
    for page in &pages.pages {
        let c = &page.comparables;
        for sale in &c.chosen {
            let over = sale.net_share.abs() > 0.15 || sale.gross_share > 0.25;
            assert_eq!(over, !sale.flags.is_empty(), "{}: {sale:?}", page.parcel_id);
            if c.reconciled.is_some() {
                assert_eq!(over, sale.weight.is_none(), "a qualifying sale carries weight, a flagged one none");
            }
            flagged += usize::from(over);
        }
        let qualifying = c.chosen.iter().filter(|s| s.flags.is_empty()).count();
        match &c.reconciled {
            Some(r) => {
                assert!(qualifying >= 3 && r.qualifying == qualifying);
                assert!(r.range.0 <= r.estimate && r.estimate <= r.range.1);
                let weights: f64 = c.chosen.iter().filter_map(|s| s.weight).sum();
                assert!((weights - 1.0).abs() < 1e-12);
            }
            None => {
                short += 1;
                assert!(qualifying < 3);
                let reason = c.shortfall.as_deref().expect("a reason");
                assert!(reason.contains("needs at least 3") && reason.contains("common practice"), "{reason}");
            }
        }
    }
    eprintln!("{flagged} comparables flagged over the 40 subjects; {short} subjects with too few");
    assert!(flagged > 0 && short > 0, "the demo subjects include both cases");

    // A distance no sale meets: nothing is eligible, and the page says so.
    let mut narrow = demo_page_options();
    narrow.rule.max_distance = Some(0.001);
    let page = plumbline::appeal::parcel_pages(&model, &sales, &subjects, &ids[..1], &narrow).expect("page");
    let c = &page.pages[0].comparables;
    assert_eq!((c.eligible, c.chosen.len()), (0, 0));
    assert!(c.reconciled.is_none() && c.shortfall.is_some());
}

/// Refusals: a parcel id not on the roll, and a sales frame other than the fit's.
#[test]
fn pages_refuse_an_unknown_parcel_and_a_different_sales_frame() {
    let (sales, model, subjects) = demo_model_e();
    let err = plumbline::appeal::parcel_pages(&model, &sales, &subjects, &["WM-999999"], &demo_page_options())
        .expect_err("unknown parcel")
        .to_string();
    assert!(err.contains("WM-999999") && err.contains("parcel_id"), "{err}");
    let other = sales.subset(&[0, 1, 2], "three sales").expect("subset");
    let err = plumbline::appeal::parcel_pages(&model, &other, &subjects, &["WM-135021"], &demo_page_options())
        .expect_err("not the fit's frame")
        .to_string();
    assert!(!err.is_empty());
}
