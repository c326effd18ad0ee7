//! Shared helpers of the cross-crate tests: where the external reference data
//! live, and scratch files.

use std::path::PathBuf;

/// The repository root.
pub fn repo_root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..")
}

/// The external reference folder (`../shared/reference` beside the checkout,
/// or `$PLUMBLINE_REFERENCE_DIR`). Panics with instructions when it is absent:
/// a check against external data must never pass silently without the data.
pub fn reference_dir() -> PathBuf {
    let dir = std::env::var_os("PLUMBLINE_REFERENCE_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| repo_root().join("..").join("shared").join("reference"));
    if !dir.join("nist-strd").join("certified.json").is_file() {
        panic!(
            "\n\n*** EXTERNAL REFERENCE DATA MISSING ***\nexpected {}/nist-strd/certified.json.\n\
             The accuracy tests check against NIST StRD certified values and cannot run without them.\n\
             Place the shared/ folder beside the checkout or set PLUMBLINE_REFERENCE_DIR.\n",
            dir.display()
        );
    }
    dir
}

/// A fresh scratch folder, unique to this call (tests run in parallel threads).
pub fn scratch_dir(name: &str) -> PathBuf {
    static CALLS: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
    let call = CALLS.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
    let dir = std::env::temp_dir().join(format!("plumbline-test-{}-{call}-{name}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).expect("create scratch dir");
    dir
}

/// Writes `body` to `dir/name` and returns the path.
pub fn write_file(dir: &std::path::Path, name: &str, body: &str) -> PathBuf {
    let path = dir.join(name);
    std::fs::write(&path, body).expect("write scratch file");
    path
}

/// The demo sales (`notebooks-demo/data/sales.csv`, from our documented
/// generator) loaded from CSV: the reference every other source must match.
pub fn demo_sales_csv() -> PathBuf {
    repo_root().join("notebooks-demo").join("data").join("sales.csv")
}

/// The model the source tests fit: log price on log living area, age,
/// quality, district and months since 2023-01-01 — every kind of column a
/// source must deliver (integers, text categories, dates).
pub fn demo_spec() -> plumbline::prelude::ModelSpec {
    use plumbline::prelude::{ModelSpec, Term};
    ModelSpec::new("sale_price")
        .log_target()
        .term(Term::numeric("living_area").log())
        .numeric("age")
        .numeric("quality")
        .term(Term::category("district"))
        .term(Term::months_since("sale_date", "2023-01-01"))
}

/// The demo study's screened sales (valuation-study.ipynb, section 3):
/// arm's-length sales with a living area of at most 8,000 sq ft.
pub fn demo_study_sales() -> plumbline::prelude::Frame {
    let sales = plumbline::prelude::load(demo_sales_csv()).expect("demo sales");
    let arms_length =
        sales.keep_where_text("sale_type", "arm's-length", |t| t == Some("arms-length")).expect("screen").kept;
    arms_length
        .keep_where_number("living_area", "at most 8,000 sq ft", |a| a.is_none_or(|a| a <= 8000.0))
        .expect("screen")
        .kept
}

/// The demo study's hedonic terms and monthly trend with no location term
/// (the terms its local fit lets vary over the map).
pub fn demo_hedonic_with_trend() -> plumbline::prelude::ModelSpec {
    use plumbline::prelude::{ModelSpec, Term};
    ModelSpec::new("sale_price")
        .log_target()
        .term(Term::numeric("living_area").log())
        .term(Term::numeric("lot_size").log())
        .numeric("age")
        .numeric("quality")
        .numeric("bathrooms")
        .term(Term::months_since("sale_date", "2023-01-01"))
}

/// The demo study's model C: log price on the hedonic terms, district
/// (reference Wickerholm) and a monthly trend — location by district only.
pub fn demo_model_c() -> plumbline::prelude::ModelSpec {
    use plumbline::prelude::Term;
    demo_hedonic_with_trend().term(Term::category("district").reference("Wickerholm"))
}

/// Asserts two fits agree bit for bit: every estimate and standard error,
/// and the residual sum of squares.
pub fn assert_same_fit(reference: &plumbline::prelude::Fit, other: &plumbline::prelude::Fit, what: &str) {
    let (a, b) = (reference.coefficients(0.95).expect("reference"), other.coefficients(0.95).expect(what));
    assert_eq!(a.len(), b.len(), "{what}: coefficient count");
    for (x, y) in a.iter().zip(&b) {
        assert_eq!(x.term, y.term, "{what}: term order");
        assert_eq!(x.estimate.to_bits(), y.estimate.to_bits(), "{what}: {} {} vs {}", x.term, x.estimate, y.estimate);
        assert_eq!(x.std_error.to_bits(), y.std_error.to_bits(), "{what}: SE of {}", x.term);
    }
    assert_eq!(reference.statistics().ss_residual.to_bits(), other.statistics().ss_residual.to_bits(), "{what}: RSS");
}

/// One value of a frame as an SQL literal-free value for the source tests:
/// `(integer, real, text)` — exactly one is `Some`, or none for a missing value.
pub type SqlValue = (Option<i64>, Option<f64>, Option<String>);

/// The rows of a frame as SQL-ready values (dates as ISO 8601 text), with the
/// SQL type of each column (`INTEGER`, `REAL`, `TEXT`, or `DATE` for dates).
pub fn frame_rows(frame: &plumbline::prelude::Frame) -> (Vec<(String, &'static str)>, Vec<Vec<SqlValue>>) {
    use plumbline::polars::prelude::{AnyValue, DataType};
    let data = frame.data();
    let columns: Vec<(String, &'static str)> = data
        .columns()
        .iter()
        .map(|c| {
            let ty = match c.dtype() {
                DataType::Int64 => "INTEGER",
                DataType::Float64 => "REAL",
                DataType::Date => "DATE",
                _ => "TEXT",
            };
            (c.name().to_string(), ty)
        })
        .collect();
    let rows = (0..frame.height())
        .map(|r| {
            data.columns()
                .iter()
                .map(|c| match c.get(r).expect("row in range") {
                    AnyValue::Null => (None, None, None),
                    AnyValue::Int64(v) => (Some(v), None, None),
                    AnyValue::Float64(v) => (None, Some(v), None),
                    AnyValue::Date(days) => (
                        None,
                        None,
                        Some(
                            plumbline::data::dates::from_epoch_days(days)
                                .expect("a date")
                                .format("%Y-%m-%d")
                                .to_string(),
                        ),
                    ),
                    other => (None, None, Some(other.str_value().to_string())),
                })
                .collect()
        })
        .collect();
    (columns, rows)
}

/// Relative agreement of fits assembled in different ways (issue acceptance
/// of the fits from pieces and in query engines): 1e-12.
pub const ASSEMBLED_TOLERANCE: f64 = 1e-12;

/// Whether `a` and `b` agree to [`ASSEMBLED_TOLERANCE`] relative.
pub fn close(a: f64, b: f64) -> bool {
    (a - b).abs() <= ASSEMBLED_TOLERANCE * a.abs().max(b.abs()).max(f64::MIN_POSITIVE)
}

/// Asserts two fit summaries agree to [`ASSEMBLED_TOLERANCE`]: rows, dropped
/// rows, aliased columns, every estimate and standard error, RSS, R² and F.
pub fn assert_summaries_agree(
    expected: &plumbline::inference::FitSummary,
    got: &plumbline::inference::FitSummary,
    what: &str,
) {
    assert_eq!(got.n_obs, expected.n_obs, "{what}: rows used");
    assert_eq!(got.n_dropped, expected.n_dropped, "{what}: dropped rows");
    assert_eq!(got.aliased, expected.aliased, "{what}: aliased columns");
    assert_eq!(got.coefficients.len(), expected.coefficients.len(), "{what}: coefficient count");
    for (e, g) in expected.coefficients.iter().zip(&got.coefficients) {
        assert_eq!(e.term, g.term, "{what}: term order");
        assert!(close(e.estimate, g.estimate), "{what}: {} estimate {} vs {}", e.term, g.estimate, e.estimate);
        assert!(close(e.std_error, g.std_error), "{what}: {} std error {} vs {}", e.term, g.std_error, e.std_error);
    }
    assert!(
        close(expected.ss_residual, got.ss_residual),
        "{what}: RSS {} vs {}",
        got.ss_residual,
        expected.ss_residual
    );
    assert!(close(expected.r_squared, got.r_squared), "{what}: R² {} vs {}", got.r_squared, expected.r_squared);
    assert!(close(expected.f_statistic.unwrap_or(0.0), got.f_statistic.unwrap_or(0.0)), "{what}: F");
}

/// The NIST StRD bar: minimum LRE (McCullough 1998) of the coefficients,
/// standard errors, residual SD and R² on every one of the 11 linear
/// datasets (issue acceptance, in memory and through every other route).
pub const NIST_LRE_BAR: f64 = 13.0;

/// Prints the scores of the 11 NIST StRD linear datasets fitted by `route`
/// and asserts each meets [`NIST_LRE_BAR`].
pub fn assert_nist_bar(scores: &[plumbline::accuracy::DatasetScore], route: &str) {
    println!("{route}:\n{}", plumbline::render::accuracy_table(scores));
    assert_eq!(scores.len(), 11, "{route}: expected the 11 NIST StRD linear datasets");
    for s in scores {
        let minimum = s.headline_minimum();
        assert!(minimum >= NIST_LRE_BAR, "{}, {route}: min LRE {minimum:.2} < {NIST_LRE_BAR}", s.dataset);
    }
}
