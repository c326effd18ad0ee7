//! The study finds the location effect the demo generator put in.
//!
//! The generator (`notebooks-demo/generator`) prices every Wrenmoor sale 4 %
//! lower per km from Lantern Green, inside districts as well as between
//! them, and records that surface in `truth.json`. A model with district
//! indicators only must leave the within-district part in its residuals, so
//! Moran's I of its residuals (8 nearest sales, row-standardised, moments for
//! regression residuals: Cliff & Ord 1981 §8.3) must be clearly significant;
//! adding the distance term must remove it. The coefficient recovered must
//! cover the truth. External reference: the generator's documented truth.
//!
//! Measured on the seeded demo data (2,980 screened sales): district-only
//! model, Moran's I 0.121 (expected −0.0019), z 14.1, p 3·10⁻⁴⁵; with the
//! distance from Lantern Green, I −0.00003, z 0.26, p 0.80, and the distance
//! coefficient −0.0405 per km against the true −0.040.

use plumbline::diagnose::SpatialOptions;
use plumbline::prelude::*;
use plumbline_tests::{demo_model_c as district_model, demo_sales_csv, demo_study_sales as screened_sales};

fn truth() -> serde_json::Value {
    let path = demo_sales_csv().with_file_name("truth.json");
    serde_json::from_str(&std::fs::read_to_string(&path).expect("truth.json")).expect("truth is JSON")
}

#[test]
fn moran_finds_the_surface_districts_miss_and_the_distance_term_removes_it() {
    let truth = truth();
    let surface = &truth["location_surface"];
    let point = NamedPoint::new(
        surface["point"]["name"].as_str().expect("name"),
        surface["point"]["x"].as_f64().expect("x"),
        surface["point"]["y"].as_f64().expect("y"),
    );
    let sales = screened_sales();
    let options = SpatialOptions::new("x", "y").grouped_by("district");

    let districts_only = fit(&sales, &district_model()).expect("district-only fit");
    let before = districts_only.spatial_check(&sales, &options).expect("check").moran;
    eprintln!(
        "district-only model: Moran's I {:.4}, z {:.2}, p {:.3e}",
        before.statistic, before.z_score, before.p_value
    );
    assert!(before.statistic > 0.05 && before.p_value < 1e-6, "the within-district surface must show: {before:?}");

    let with_distance = district_model().term(Term::distance_from("x", "y", point));
    let located = fit(&sales, &with_distance).expect("fit with distance");
    let after = located.spatial_check(&sales, &options).expect("check").moran;
    eprintln!("with distance term:  Moran's I {:.4}, z {:.2}, p {:.3e}", after.statistic, after.z_score, after.p_value);
    assert!(after.p_value > 0.01, "no clustering should remain once distance is in the model: {after:?}");
    assert!(after.statistic < before.statistic / 4.0);

    let true_slope = surface["log_price_per_km"].as_f64().expect("slope");
    let row = located
        .coefficients(0.99)
        .expect("table")
        .into_iter()
        .find(|c| c.term == "distance from Lantern Green")
        .expect("the distance column is named after the place");
    assert!(row.ci_low <= true_slope && true_slope <= row.ci_high, "99 % interval {row:?} must cover {true_slope}");
}

#[test]
fn a_distance_term_values_new_parcels_from_the_same_place() {
    let sales = screened_sales();
    let spec = district_model().term(Term::distance_from("x", "y", NamedPoint::new("Lantern Green", 4.5, 3.0)));
    let model = fit(&sales, &spec).expect("fit");
    let subjects = load(demo_sales_csv().with_file_name("subjects.csv"))
        .expect("subjects")
        .with_date("sale_date", "2026-01-01")
        .expect("date");
    let predictions = model.predict(&subjects, 0.95).expect("the recipe measures subjects from the same place");
    assert_eq!(predictions.rows.len(), subjects.height());
}
