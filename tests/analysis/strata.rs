//! Models by market area equal separate fits of each area's rows.
//!
//! Reference: each district's rows of the demo sales (our documented
//! generator) written to a file of its own by splitting the CSV text — not
//! through the library's grouping — then loaded and fitted alone with the
//! double-double solver, itself certified against NIST StRD
//! (`tests/accuracy/nist.rs`). The per-area fits, in memory and in row
//! batches, must agree with those separate fits to 1e-12 relative in every
//! coefficient, standard error and R² (issue acceptance). The F test of
//! equal coefficients is checked against a numpy implementation of its
//! formula in `tests/python/test_strata_against_numpy.py`.

use plumbline::prelude::*;
use plumbline::strata::{fit_batches_by, fit_by_with, StratifiedFit, StratumOutcome};
use plumbline_tests::{assert_summaries_agree, close, demo_sales_csv, scratch_dir, write_file};
use std::collections::BTreeMap;

/// The model fitted within each district: every kind of term a group codes
/// for itself (a log, a category with its own levels and reference, a date trend).
fn spec() -> ModelSpec {
    ModelSpec::new("sale_price")
        .log_target()
        .term(Term::numeric("living_area").log())
        .numeric("age")
        .term(Term::category("quality"))
        .numeric("bathrooms")
        .term(Term::months_since("sale_date", "2023-01-01"))
}

fn extended() -> FitOptions {
    FitOptions { precision: Precision::Extended, ..FitOptions::default() }
}

/// Splits the CSV text of `path` by the value of column `column_index` into
/// one file per value (header repeated), returning the files by value.
fn split_by_column(
    path: &std::path::Path,
    column_index: usize,
    dir: &std::path::Path,
) -> BTreeMap<String, std::path::PathBuf> {
    let text = std::fs::read_to_string(path).expect("sales");
    let mut lines = text.lines();
    let header = lines.next().expect("header");
    let mut parts: BTreeMap<String, String> = BTreeMap::new();
    for line in lines {
        let value = line.split(',').nth(column_index).expect("column").to_string();
        parts.entry(value).or_insert_with(|| format!("{header}\n")).push_str(&format!("{line}\n"));
    }
    parts.into_iter().map(|(value, body)| (value.clone(), write_file(dir, &format!("{value}.csv"), &body))).collect()
}

fn assert_equals_separate_fits(set: &StratifiedFit, separate: &BTreeMap<String, std::path::PathBuf>, how: &str) {
    assert_eq!(set.strata().len(), separate.len(), "{how}: one stratum per district");
    for (district, file) in separate {
        let alone = fit_with(&load(file).expect("district file"), &spec(), &extended()).expect("separate fit");
        let stratum = set.stratum(district).unwrap_or_else(|| panic!("{how}: {district} missing"));
        let model = stratum.model().unwrap_or_else(|| panic!("{how}: {district} has no model"));
        assert_summaries_agree(
            &alone.summary(0.95).expect("summary"),
            &model.summary(0.95).expect("summary"),
            &format!("{how}, {district}"),
        );
    }
}

#[test]
fn per_area_fits_in_memory_equal_separate_fits_of_each_area() {
    let dir = scratch_dir("strata-memory");
    let separate = split_by_column(&demo_sales_csv(), 9, &dir);
    let sales = load(demo_sales_csv()).expect("demo sales");
    let set = fit_by_with(&sales, &spec(), "district", &extended()).expect("fit by district");
    assert_equals_separate_fits(&set, &separate, "in memory");
    // The pooled model is the same specification on every fitted area's rows.
    let pooled = fit_with(&sales, &spec(), &extended()).expect("pooled");
    assert_summaries_agree(
        &pooled.summary(0.95).expect("summary"),
        &set.pooled().expect("pooled model").summary(0.95).expect("summary"),
        "pooled",
    );
}

#[test]
fn per_area_fits_in_batches_equal_separate_fits_of_each_area() {
    let dir = scratch_dir("strata-batches");
    let separate = split_by_column(&demo_sales_csv(), 9, &dir);
    // 257 rows a batch: every area's rows straddle batches, and some batches lack an area.
    let set = fit_batches_by(&demo_sales_csv(), &spec(), &FitOptions::default(), 257, NonFinite::Refuse, "district")
        .expect("fit by district in batches");
    assert_equals_separate_fits(&set, &separate, "in batches");
    let memory =
        fit_by_with(&load(demo_sales_csv()).expect("sales"), &spec(), "district", &extended()).expect("memory");
    let (a, b) = (set.summary(0.95).expect("summary"), memory.summary(0.95).expect("summary"));
    for (x, y) in a.tests.iter().zip(&b.tests) {
        assert_eq!(x.df_numerator, y.df_numerator);
        let (fx, fy) = (x.f_statistic.expect("F"), y.f_statistic.expect("F"));
        // F is a ratio of differences of sums of squares; agreement to 1e-9 relative.
        assert!((fx - fy).abs() <= 1e-9 * fy.abs(), "{:?}: F {fx} vs {fy}", x.hypothesis);
    }
}

/// An area too small to fit, and one where a category has one level, are
/// listed with their reasons — never dropped; the pooled model and the tests
/// use the remaining areas' rows only.
#[test]
fn an_area_that_cannot_be_fitted_is_listed_with_its_reason() {
    let dir = scratch_dir("strata-small");
    let text = std::fs::read_to_string(demo_sales_csv()).expect("sales");
    let mut body = text.clone();
    // Three sales of a new area: fewer rows than coefficients.
    for (i, line) in text.lines().skip(1).take(3).enumerate() {
        let mut cells: Vec<&str> = line.split(',').collect();
        let id = format!("WM-9{i:05}");
        cells[0] = &id;
        cells[9] = "Foxhollow";
        body.push_str(&format!("{}\n", cells.join(",")));
    }
    // Twenty sales of another new area, all of quality 3.
    for (i, line) in text.lines().skip(10).filter(|l| l.split(',').nth(7) == Some("3")).take(20).enumerate() {
        let mut cells: Vec<&str> = line.split(',').collect();
        let id = format!("WM-8{i:05}");
        cells[0] = &id;
        cells[9] = "Quillmere";
        body.push_str(&format!("{}\n", cells.join(",")));
    }
    let path = write_file(&dir, "sales.csv", &body);
    let sales = load(&path).expect("sales");
    let set = fit_by_with(&sales, &spec(), "district", &FitOptions::default()).expect("fit by district");
    assert_eq!(set.strata().len(), 8);
    let reason = |label: &str| match set.stratum(label).expect("listed").outcome() {
        StratumOutcome::NotFitted { reason } => reason.clone(),
        StratumOutcome::Fitted(_) => panic!("{label} cannot be fitted"),
    };
    assert!(reason("Foxhollow").starts_with("3 rows but"), "{}", reason("Foxhollow"));
    assert!(reason("Quillmere").contains("`quality` takes one value"), "{}", reason("Quillmere"));
    let summary = set.summary(0.95).expect("summary");
    assert_eq!(summary.fitted().count(), 6);
    assert_eq!(summary.pooled.as_ref().expect("pooled").n_obs, 3000, "the pooled model leaves the unfitted areas out");
    assert_eq!(summary.tests.first().expect("test").groups, 6);
    // The same in batches.
    let batched =
        fit_batches_by(&path, &spec(), &FitOptions::default(), 500, NonFinite::Refuse, "district").expect("batches");
    let names: Vec<&str> = batched.strata().iter().filter(|s| s.model().is_none()).map(|s| s.label()).collect();
    assert_eq!(names, ["Foxhollow", "Quillmere"]);
    for label in names {
        match batched.stratum(label).expect("listed").outcome() {
            StratumOutcome::NotFitted { reason: got } => assert_eq!(got, &reason(label), "{label}: the same reason"),
            StratumOutcome::Fitted(_) => unreachable!(),
        }
    }
}

#[test]
fn the_grouping_column_cannot_also_be_a_term() {
    let sales = load(demo_sales_csv()).expect("sales");
    let with_district = spec().term(Term::category("district"));
    let message = plumbline::strata::fit_by(&sales, &with_district, "district").expect_err("refused").to_string();
    assert!(message.contains("both the grouping column and read by a term"), "{message}");
}

/// Each parcel is valued by its own area's model: the same predictions as
/// the separate fit of that area; a parcel of an area without a model, or
/// without an area, is flagged and not valued.
#[test]
fn parcels_are_valued_by_their_own_area_model() {
    let dir = scratch_dir("strata-value");
    let separate = split_by_column(&demo_sales_csv(), 9, &dir);
    let sales = load(demo_sales_csv()).expect("sales");
    let set = fit_by_with(&sales, &spec(), "district", &extended()).expect("fit by district");
    let parcels_csv = plumbline_tests::repo_root().join("notebooks-demo/data/parcels.csv");
    let mut text = std::fs::read_to_string(&parcels_csv).expect("parcels");
    let template = text.lines().nth(1).expect("a parcel").to_string();
    let mut cells: Vec<String> = template.split(',').map(str::to_string).collect();
    cells[0] = "WM-X1".into();
    cells[7] = "Gallowmere".into(); // an area with no sales
    text.push_str(&format!("{}\n", cells.join(",")));
    cells[0] = "WM-X2".into();
    cells[7] = String::new(); // no area at all
    text.push_str(&format!("{}\n", cells.join(",")));
    let parcels_path = write_file(&dir, "parcels.csv", &text);
    let parcels = load(&parcels_path).expect("parcels");
    let valued = set.predict(&parcels, 0.95).expect("predict by area");
    assert_eq!(valued.rows.len(), parcels.height());
    let districts = parcels.label_column("district").expect("district");
    for (district, file) in &separate {
        let alone = fit_with(&load(file).expect("district file"), &spec(), &extended()).expect("separate fit");
        let rows: Vec<usize> =
            districts.iter().enumerate().filter(|(_, d)| d.as_deref() == Some(district)).map(|(i, _)| i).collect();
        let subset = parcels.subset(&rows, district).expect("subset");
        let expected = alone.predict(&subset, 0.95).expect("predict alone");
        assert_eq!(expected.rows.len(), rows.len(), "every parcel of {district} has its terms");
        for p in &expected.rows {
            let got = valued.rows[rows[p.row - 1]].prediction.as_ref().expect("valued");
            assert!(close(got.estimate, p.estimate), "{district}: {} vs {}", got.estimate, p.estimate);
            assert!(close(got.pi_high, p.pi_high), "{district}: interval");
        }
    }
    let last = valued.rows.len();
    let no_model = &valued.rows[last - 2];
    assert!(no_model.prediction.is_none());
    assert!(no_model.not_valued.as_deref().is_some_and(|r| r.contains("no model for district `Gallowmere`")));
    let no_area = &valued.rows[last - 1];
    assert!(
        no_area.prediction.is_none()
            && no_area.not_valued.as_deref().is_some_and(|r| r.contains("no `district` value"))
    );
    // The value roll carries the same flags.
    let roll = set.value_roll(&parcels, "parcel_id", "2026-01-01", Default::default()).expect("roll");
    assert_eq!(roll.valued(), parcels.height() - 2);
    assert!(roll.parcels[last - 2].not_valued.as_deref().is_some_and(|r| r.contains("Gallowmere")));
}

/// Models by group read in batches follow the in-memory precision rule.
///
/// Reference: NIST StRD's certified values (Linear Least Squares Regression),
/// scored by McCullough's LRE (1998). Each dataset's rows are written twice
/// to one CSV file, once under each of two group labels, so each group's
/// model is the certified fit; the second group's rows are read in 7-row
/// batches that straddle the first's. Before the rule, groups factored in
/// double only (Filip and Wampler5 fall far below 13 digits that way).
#[test]
fn groups_read_in_batches_meet_the_nist_lre_bar() {
    use plumbline::accuracy::{score_all_with, ScoredFit};
    use plumbline::strata::StratumModel;
    let reference = plumbline_tests::reference_dir().join("nist-strd");
    let scratch = scratch_dir("strata-nist");
    let scores = score_all_with(&reference, |csv, spec| {
        let text = std::fs::read_to_string(csv).map_err(|e| Error::ReferenceData(e.to_string()))?;
        let mut lines = text.lines();
        let header = lines.next().unwrap_or_default();
        let rows: Vec<&str> = lines.filter(|l| !l.trim().is_empty()).collect();
        let mut body = format!("{header},area\n");
        for area in ["North", "South"] {
            for row in &rows {
                body += &format!("{row},{area}\n");
            }
        }
        let path =
            write_file(&scratch, &format!("{}.csv", csv.file_stem().unwrap_or_default().to_string_lossy()), &body);
        let set = fit_batches_by(&path, spec, &FitOptions::default(), 7, NonFinite::Refuse, "area")?;
        match set.stratum("South").and_then(|s| s.model()) {
            Some(StratumModel::Assembled(fit)) => ScoredFit::of_assembled(fit),
            _ => Err(Error::ReferenceData(format!("{}: the South group was not fitted", csv.display()))),
        }
    })
    .expect("every dataset fits by group");
    plumbline_tests::assert_nist_bar(&scores, "a group read in batches");
}
