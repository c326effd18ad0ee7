//! Fits assembled from pieces equal the fit of all rows at once.
//!
//! Reference: the in-memory fit of the same data with the double-double
//! solver (`Precision::Extended`), itself certified against NIST StRD
//! (`tests/accuracy/nist.rs`). The algebra that makes the pieces agree is the
//! TSQR reduction (Demmel, Grigori, Hoemmen & Langou 2012, *SIAM J. Sci.
//! Comput.* 34(1), A206–A239): any split of the rows and any merge order give
//! the same triangular factor up to rounding. Agreement is checked to 1e-12
//! relative for every coefficient and standard error (issue acceptance).

use plumbline::fit::streamed::{finish, FactorAggregate, FirstSolution, ResidualAggregate};
use plumbline::fit::{fit_batches, AssembledFit};
use plumbline::model::{Design, DroppedRows};
use plumbline::numeric::tsqr::merge_pairwise;
use plumbline::polars::prelude::ParquetWriter;
use plumbline::prelude::*;
use plumbline_tests::{assert_summaries_agree, close, demo_sales_csv, demo_spec, scratch_dir};

fn in_memory(covariance: CovarianceKind) -> (Frame, Fit) {
    let frame = load(demo_sales_csv()).expect("demo sales");
    let options = FitOptions { covariance, precision: Precision::Extended, rank_tolerance: None };
    let fit = fit_with(&frame, &demo_spec(), &options).expect("in-memory fit");
    (frame, fit)
}

fn assert_agrees(reference: &Fit, assembled: &AssembledFit, what: &str) {
    assert_summaries_agree(
        &reference.summary(0.95).expect("summary"),
        &assembled.summary(0.95).expect("summary"),
        what,
    );
}

/// Writes the demo sales as `parts` CSV files (header repeated) in a new directory.
fn csv_directory(name: &str, parts: usize) -> std::path::PathBuf {
    let dir = scratch_dir(name);
    let text = std::fs::read_to_string(demo_sales_csv()).expect("demo sales text");
    let mut lines = text.lines();
    let header = lines.next().expect("header");
    let rows: Vec<&str> = lines.collect();
    for (k, chunk) in rows.chunks(rows.len().div_ceil(parts)).enumerate() {
        let body = format!("{header}\n{}\n", chunk.join("\n"));
        std::fs::write(dir.join(format!("sales-{k:02}.csv")), body).expect("write part");
    }
    dir
}

#[test]
fn a_fit_read_in_batches_equals_the_fit_in_memory() {
    let dir = csv_directory("batches-csv", 3);
    for covariance in [CovarianceKind::Classical, CovarianceKind::Hc0, CovarianceKind::Hc1] {
        let (_, reference) = in_memory(covariance.clone());
        let options = FitOptions { covariance: covariance.clone(), ..FitOptions::default() };
        // 257 rows per batch: batches straddle the file boundaries unevenly.
        let streamed = fit_batches(&dir, &demo_spec(), &options, 257, NonFinite::Refuse).expect("fit in batches");
        assert!(streamed.pieces > 10, "the data came in {} batches", streamed.pieces);
        assert_agrees(&reference, &streamed, &format!("CSV directory, {}", covariance.label()));
    }
}

#[test]
fn a_parquet_file_read_in_batches_equals_the_fit_in_memory() {
    let (frame, reference) = in_memory(CovarianceKind::Hc1);
    let dir = scratch_dir("batches-parquet");
    let path = dir.join("sales.parquet");
    let mut data = frame.data().clone();
    let file = std::fs::File::create(&path).expect("create parquet");
    ParquetWriter::new(file).with_row_group_size(Some(400)).finish(&mut data).expect("write parquet");
    let options = FitOptions::with_covariance(CovarianceKind::Hc1);
    let streamed = fit_batches(&path, &demo_spec(), &options, 1000, NonFinite::Refuse).expect("fit in batches");
    assert_agrees(&reference, &streamed, "Parquet file, HC1");
    // The stamp names the file by its own SHA-256, as loading it would.
    assert_eq!(streamed.provenance.sha256, load(&path).expect("load parquet").provenance().sha256);
}

#[test]
fn predictions_of_a_fit_read_in_batches_equal_the_in_memory_predictions() {
    let (_, reference) = in_memory(CovarianceKind::Classical);
    let dir = csv_directory("batches-predict", 2);
    let streamed = fit_batches(&dir, &demo_spec(), &FitOptions::default(), 640, NonFinite::Refuse).expect("fit");
    let parcels = load(demo_sales_csv().with_file_name("parcels.csv")).expect("parcels");
    let (expected, got) =
        (reference.predict(&parcels, 0.9).expect("predict"), streamed.predict(&parcels, 0.9).expect("predict"));
    assert_eq!(expected.rows.len(), got.rows.len());
    assert_eq!(expected.skipped_rows, got.skipped_rows);
    for (e, g) in expected.rows.iter().zip(&got.rows) {
        assert_eq!(e.row, g.row);
        for (a, b) in [(e.estimate, g.estimate), (e.se_fit, g.se_fit), (e.pi_low, g.pi_low), (e.pi_high, g.pi_high)] {
            assert!(close(a, b), "row {}: {a} vs {b}", e.row);
        }
        let (a, b) = (e.mean_original.expect("log target"), g.mean_original.expect("log target"));
        assert!(close(a, b), "row {}: smeared mean {a} vs {b}", e.row);
    }
}

#[test]
fn partitions_factored_apart_and_merged_in_a_tree_equal_the_single_pass_fit() {
    let (frame, reference) = in_memory(CovarianceKind::Hc1);
    let recipe = reference.design().recipe().clone();
    let n = frame.height();
    for k in [1usize, 7, 64] {
        // Partition i holds rows i, i + k, i + 2k, …: interleaved, as a hash
        // partitioning would spread them.
        let partitions: Vec<Frame> = (0..k)
            .map(|i| {
                let rows: Vec<usize> = (i..n).step_by(k).collect();
                frame.subset(&rows, "partition").expect("partition")
            })
            .collect();
        let designs: Vec<Design> = partitions.iter().map(|p| recipe.fitting_design(p).expect("design")).collect();
        let factors: Vec<FactorAggregate> = designs
            .iter()
            .map(|d| {
                let mut a = FactorAggregate::new(recipe.column_names.len());
                a.absorb(d);
                a
            })
            .collect();
        let merged = merge_pairwise(factors, |a, b| a.merge(&b)).expect("some partitions");
        let first = FirstSolution::from_aggregate(merged, &recipe, None).expect("round one");
        let residuals: Vec<ResidualAggregate> = designs
            .iter()
            .map(|d| {
                let mut a = ResidualAggregate::new(&first, true);
                a.absorb(d, &first);
                a
            })
            .collect();
        let second = merge_pairwise(residuals, |a, b| a.merge(&b)).expect("some partitions");
        let mut dropped = DroppedRows::default();
        designs.iter().for_each(|d| dropped.absorb(d.dropped()));
        let assembled =
            finish(first, second, recipe.clone(), &CovarianceKind::Hc1, dropped, frame.provenance().clone(), k)
                .expect("assembled fit");
        assert_agrees(&reference, &assembled, &format!("{k} partitions"));
    }
}

/// The states that cross processes read back to the last bit, in both
/// precisions, and damaged bytes are refused with a typed error, never
/// misread (the states a query engine's executors send each other).
#[test]
fn round_states_read_back_exactly_and_damaged_states_are_refused() {
    let (frame, reference) = in_memory(CovarianceKind::Hc1);
    let recipe = reference.design().recipe().clone();
    let design = recipe.fitting_design(&frame).expect("design");
    let p = recipe.column_names.len();
    for mut factor in [FactorAggregate::new(p), FactorAggregate::new_extended(p)] {
        factor.absorb(&design);
        let bytes = factor.to_bytes();
        let back = FactorAggregate::from_bytes(&bytes).expect("read back");
        assert_eq!(back, factor, "a factor state moved on its way");
        assert_eq!(back.to_bytes(), bytes);
        for cut in [0, 4, 5, bytes.len() / 2, bytes.len() - 1] {
            let error = FactorAggregate::from_bytes(&bytes[..cut]).expect_err("a cut state");
            assert!(matches!(error, Error::DamagedState { .. }), "{error}");
        }
        let mut longer = bytes.clone();
        longer.push(0);
        assert!(FactorAggregate::from_bytes(&longer).is_err(), "trailing bytes");
    }
    let first = FirstSolution::from_aggregate(
        {
            let mut f = FactorAggregate::new(p);
            f.absorb(&design);
            f
        },
        &recipe,
        None,
    )
    .expect("round one");
    let mut sums = ResidualAggregate::new(&first, true);
    sums.absorb(&design, &first);
    let bytes = sums.to_bytes();
    assert_eq!(ResidualAggregate::from_bytes(&bytes).expect("read back"), sums);
    // Another state's bytes are not taken for these.
    assert!(ResidualAggregate::from_bytes(&FactorAggregate::new(p).to_bytes()).is_err());
    let mut learner = plumbline::model::design::RecipeLearner::new(&demo_spec()).expect("learner");
    learner.absorb(&frame).expect("learn");
    let bytes = learner.to_bytes();
    let back = plumbline::model::design::RecipeLearner::from_bytes(&bytes, &demo_spec()).expect("read back");
    assert_eq!(back.finish().expect("recipe"), learner.finish().expect("recipe"));
    assert_eq!(back.to_bytes(), bytes);
}

#[test]
fn estimators_that_need_every_row_are_refused_in_batches_with_the_alternative() {
    let dir = csv_directory("batches-refused", 2);
    let options = FitOptions::with_covariance(CovarianceKind::Hc3);
    let message =
        fit_batches(&dir, &demo_spec(), &options, 500, NonFinite::Refuse).expect_err("HC3 needs leverages").to_string();
    assert!(message.contains("HC3") && message.contains("HC1"), "{message}");
    let centred = ModelSpec::new("sale_price").term(Term::numeric("age").center());
    let message =
        fit_batches(&dir, &centred, &FitOptions::default(), 500, NonFinite::Refuse).expect_err("centred").to_string();
    assert!(message.contains("use `age` itself"), "{message}");
}
