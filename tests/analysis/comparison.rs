//! Cross-validation and holdout splits are reproducible: the same seed gives the
//! same result, and so does any ordering of the rows (a property of the method,
//! checked on the NIST StRD Norris data).

use plumbline::compare::{cross_validate, split_by_cutoff, split_by_fraction, CrossValidation};
use plumbline::prelude::*;

fn norris() -> Frame {
    load_csv(plumbline_tests::reference_dir().join("nist-strd").join("Norris.csv"), &CsvOptions::default())
        .expect("Norris")
}

fn permuted(frame: &Frame, seed: u64) -> Frame {
    let mut order: Vec<usize> = (0..frame.height()).collect();
    let mut state = seed;
    for i in (1..order.len()).rev() {
        state = state.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407);
        order.swap(i, (state >> 33) as usize % (i + 1));
    }
    frame.subset(&order, "permuted").expect("subset")
}

fn run_cv(frame: &Frame, seed: u64) -> plumbline::compare::CrossValidationResult {
    let spec = ModelSpec::new("y").numeric("x");
    let cv = CrossValidation { folds: 5, seed, id_column: None };
    let mut calls = 0;
    let result = cross_validate(frame, &spec, &FitOptions::default(), &cv, &mut |done, total| {
        calls += 1;
        assert!(done <= total);
    })
    .expect("cv");
    assert_eq!(calls, 5, "progress is reported once per fold");
    result
}

#[test]
fn same_seed_same_result() {
    let frame = norris();
    assert_eq!(run_cv(&frame, 7), run_cv(&frame, 7));
    assert_ne!(run_cv(&frame, 7).scores, run_cv(&frame, 8).scores);
}

#[test]
fn row_order_does_not_change_cross_validation() {
    let frame = norris();
    let base = run_cv(&frame, 42);
    for seed in [1, 2, 3] {
        let other = run_cv(&permuted(&frame, seed), 42);
        for (a, b) in base.scores.iter().zip(&other.scores) {
            assert_eq!((a.n_train, a.n_test), (b.n_train, b.n_test));
            assert!((a.rmse - b.rmse).abs() <= 1e-12 * a.rmse, "{} vs {}", a.rmse, b.rmse);
            assert!((a.mae - b.mae).abs() <= 1e-12 * a.mae);
        }
    }
}

#[test]
fn holdout_by_fraction_is_order_independent() {
    let frame = norris();
    let (train_a, test_a) = split_by_fraction(&frame, 0.25, 9, None).expect("split");
    let (train_b, test_b) = split_by_fraction(&permuted(&frame, 5), 0.25, 9, None).expect("split");
    assert_eq!(test_a.height(), 9);
    let mut ya: Vec<f64> = test_a.numeric_column("y").expect("y").into_iter().flatten().collect();
    let mut yb: Vec<f64> = test_b.numeric_column("y").expect("y").into_iter().flatten().collect();
    ya.sort_by(f64::total_cmp);
    yb.sort_by(f64::total_cmp);
    assert_eq!(ya, yb);
    assert_eq!(train_a.height(), train_b.height());
}

#[test]
fn holdout_by_cutoff_splits_older_from_newer() {
    let dir = plumbline_tests::scratch_dir("cutoff");
    let p = plumbline_tests::write_file(
        &dir,
        "s.csv",
        "sale_date,y\n2024-01-05,1\n2025-03-01,2\n2024-11-30,3\n2025-07-01,4\n,5\n",
    );
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let (train, test) = split_by_cutoff(&frame, "sale_date", "2025-01-01").expect("split");
    assert_eq!(train.numeric_column("y").expect("y"), vec![Some(1.0), Some(3.0)]);
    assert_eq!(test.numeric_column("y").expect("y"), vec![Some(2.0), Some(4.0)]);
    let m = split_by_cutoff(&frame, "sale_date", "2030-01-01").expect_err("nothing to test").to_string();
    assert!(m.contains("0 test rows"), "{m}");
}
