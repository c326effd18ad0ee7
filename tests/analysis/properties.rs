//! Properties any correct least-squares fit has, checked on random designs
//! (proptest). Each property is a mathematical identity of least squares
//! (e.g. Seber & Lee, *Linear Regression Analysis*, 2nd ed., ch. 3), not a
//! value of ours.

use plumbline::polars::prelude::{Column, DataFrame};
use plumbline::prelude::*;
use proptest::prelude::*;

fn frame(columns: &[(&str, Vec<f64>)]) -> Frame {
    let n = columns[0].1.len();
    let cols = columns.iter().map(|(name, v)| Column::new((*name).into(), v.clone())).collect();
    Frame::from_dataframe(DataFrame::new(n, cols).expect("frame"), "(property test)")
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()).max(1e-300)
}

/// Rows of (x1, x2, noise) with enough spread to be well posed.
fn rows() -> impl Strategy<Value = Vec<(f64, f64, f64)>> {
    prop::collection::vec((-100.0..100.0f64, -5.0..5.0f64, -1.0..1.0f64), 8..40)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn row_order_does_not_change_the_fit(data in rows(), seed in 0u64..1000) {
        let y: Vec<f64> = data.iter().map(|(a, b, e)| 2.0 + 0.3 * a - 1.7 * b + e).collect();
        let x1: Vec<f64> = data.iter().map(|r| r.0).collect();
        let x2: Vec<f64> = data.iter().map(|r| r.1).collect();
        let spec = ModelSpec::new("y").numeric("x1").numeric("x2");
        let Ok(base) = fit(&frame(&[("y", y.clone()), ("x1", x1.clone()), ("x2", x2.clone())]), &spec) else { return Ok(()) };
        // A deterministic shuffle from the seed.
        let mut order: Vec<usize> = (0..y.len()).collect();
        let mut state = seed.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        for i in (1..order.len()).rev() {
            state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
            order.swap(i, (state >> 33) as usize % (i + 1));
        }
        let pick = |v: &Vec<f64>| order.iter().map(|&i| v[i]).collect::<Vec<f64>>();
        let shuffled = fit(&frame(&[("y", pick(&y)), ("x1", pick(&x1)), ("x2", pick(&x2))]), &spec).expect("same data");
        let (a, b) = (base.coefficients(0.95).expect("ok"), shuffled.coefficients(0.95).expect("ok"));
        for (p, q) in a.iter().zip(&b) {
            prop_assert!(close(p.estimate, q.estimate, 1e-12), "{} vs {}", p.estimate, q.estimate);
            prop_assert!(close(p.std_error, q.std_error, 1e-12));
        }
        prop_assert!(close(base.statistics().r_squared, shuffled.statistics().r_squared, 1e-13));
    }

    #[test]
    fn rescaling_a_column_rescales_its_coefficient(data in rows(), factor in prop::sample::select(vec![1e-3, 0.3048, 10.7639, 1e4])) {
        let y: Vec<f64> = data.iter().map(|(a, b, e)| 2.0 + 0.3 * a - 1.7 * b + e).collect();
        let x1: Vec<f64> = data.iter().map(|r| r.0).collect();
        let x2: Vec<f64> = data.iter().map(|r| r.1).collect();
        let scaled: Vec<f64> = x1.iter().map(|v| v * factor).collect();
        let spec = ModelSpec::new("y").numeric("x1").numeric("x2");
        let Ok(base) = fit(&frame(&[("y", y.clone()), ("x1", x1), ("x2", x2.clone())]), &spec) else { return Ok(()) };
        let rescaled = fit(&frame(&[("y", y), ("x1", scaled), ("x2", x2)]), &spec).expect("same rank");
        let (a, b) = (base.coefficients(0.95).expect("ok"), rescaled.coefficients(0.95).expect("ok"));
        prop_assert!(close(a[1].estimate, b[1].estimate * factor, 1e-11));
        prop_assert!(close(a[1].std_error, b[1].std_error * factor, 1e-11));
        prop_assert!(close(a[1].t.unwrap_or(0.0), b[1].t.unwrap_or(0.0), 1e-10));
        prop_assert!(close(a[0].estimate, b[0].estimate, 1e-10) || a[0].estimate.abs() < 1e-9);
    }

    #[test]
    fn a_duplicated_column_is_reported_as_aliased(data in rows()) {
        let y: Vec<f64> = data.iter().map(|(a, b, e)| 2.0 + 0.3 * a - 1.7 * b + e).collect();
        let x1: Vec<f64> = data.iter().map(|r| r.0).collect();
        let x2: Vec<f64> = data.iter().map(|r| r.1).collect();
        let spec = ModelSpec::new("y").numeric("x1").numeric("x2").numeric("x1_again");
        let model = fit(&frame(&[("y", y), ("x1", x1.clone()), ("x2", x2), ("x1_again", x1)]), &spec).expect("fit");
        prop_assert_eq!(model.aliased_names(), vec!["x1_again"]);
        prop_assert_eq!(model.estimated_names(), vec!["intercept", "x1", "x2"]);
    }

    #[test]
    fn a_perfect_fit_has_zero_residuals_and_no_nan(data in rows()) {
        let x1: Vec<f64> = data.iter().map(|r| r.0.round()).collect();
        let x2: Vec<f64> = data.iter().map(|r| r.1.round()).collect();
        let y: Vec<f64> = x1.iter().zip(&x2).map(|(a, b)| 4.0 + 2.0 * a - 3.0 * b).collect();
        let spec = ModelSpec::new("y").numeric("x1").numeric("x2");
        let Ok(model) = fit(&frame(&[("y", y), ("x1", x1), ("x2", x2)]), &spec) else { return Ok(()) };
        prop_assert!(model.solution().residuals().iter().all(|r| r.abs() < 1e-12 && !r.is_nan()));
        let stats = model.statistics();
        prop_assert!(!stats.r_squared.is_nan() && (stats.r_squared - 1.0).abs() < 1e-12);
        prop_assert!(!stats.residual_std_error.is_nan());
        for c in model.coefficients(0.95).expect("ok") {
            prop_assert!(!c.estimate.is_nan() && !c.std_error.is_nan() && !c.ci_low.is_nan());
        }
        let json = serde_json::to_string(&model.summary(0.95).expect("ok")).expect("json");
        prop_assert!(!json.contains("NaN"));
    }
}
