//! Fits inside DataFusion and on a Ballista cluster equal the fits in memory.
//!
//! References: the in-memory fit with the double-double solver
//! (`Precision::Extended`), itself certified against NIST StRD; NIST StRD's
//! certified values directly (NIST/ITL Statistical Reference Datasets, Linear
//! Least Squares Regression; scored by McCullough's LRE, 1998). Agreement to
//! 1e-12 relative and min LRE ≥ 13 are the acceptance bars.

use plumbline::accuracy::{score_all_with, ScoredFit};
use plumbline::documents::{to_pretty_json, FitDocument};
use plumbline::polars::prelude::ParquetWriter;
use plumbline::prelude::*;
use plumbline::strata::StratumOutcome;
use plumbline_engine::{cluster, driver, DataSource};
use plumbline_tests::{assert_summaries_agree, demo_sales_csv, demo_spec, scratch_dir, write_file};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::Duration;

/// The demo sales as `parts` Parquet files of consecutive rows.
fn parquet_folder(name: &str, parts: usize) -> PathBuf {
    let dir = scratch_dir(name);
    let sales = load(demo_sales_csv()).expect("demo sales");
    let n = sales.height();
    for k in 0..parts {
        let rows: Vec<usize> = (k * n / parts..(k + 1) * n / parts).collect();
        let mut data = sales.subset(&rows, "part").expect("part").data().clone();
        let file = std::fs::File::create(dir.join(format!("sales-{k:02}.parquet"))).expect("create part");
        ParquetWriter::new(file).finish(&mut data).expect("write part");
    }
    dir
}

/// Rows per batch in most tests: a few hundred, so that every partition
/// reads several batches and the states merge many pieces (the engine's
/// default batch holds all of a test file).
const SMALL_BATCHES: usize = 150;

fn extended(covariance: CovarianceKind) -> FitOptions {
    FitOptions { covariance, precision: Precision::Extended, rank_tolerance: None }
}

/// The model by market area: a log, a category with each area's own levels,
/// a date trend.
fn area_spec() -> ModelSpec {
    ModelSpec::new("sale_price")
        .log_target()
        .term(Term::numeric("living_area").log())
        .numeric("age")
        .term(Term::category("quality"))
        .numeric("bathrooms")
        .term(Term::months_since("sale_date", "2023-01-01"))
}

/// A model of numbers only: its coding needs no level, so the engine learns
/// it in round one (two passes over the rows instead of three).
fn numbers_only_spec() -> ModelSpec {
    ModelSpec::new("sale_price")
        .log_target()
        .term(Term::numeric("living_area").log())
        .numeric("age")
        .numeric("quality")
        .numeric("bathrooms")
}

fn runtime() -> tokio::runtime::Runtime {
    tokio::runtime::Builder::new_multi_thread().worker_threads(2).enable_all().build().expect("runtime")
}

fn assert_sets_agree(expected: &StratifiedFit, got: &StratifiedFit, how: &str) {
    let (e, g) = (expected.summary(0.95).expect("summary"), got.summary(0.95).expect("summary"));
    assert_eq!(expected.strata().len(), got.strata().len(), "{how}: areas");
    for (x, y) in expected.strata().iter().zip(got.strata()) {
        assert_eq!(x.label(), y.label(), "{how}: area order");
        assert_eq!(x.rows(), y.rows(), "{how}: {} rows", x.label());
        match (x.model(), y.model()) {
            (Some(a), Some(b)) => assert_summaries_agree(
                &a.summary(0.95).expect("summary"),
                &b.summary(0.95).expect("summary"),
                &format!("{how}, {}", x.label()),
            ),
            (None, None) => {}
            _ => panic!("{how}: {} fitted in one and not the other", x.label()),
        }
    }
    assert_summaries_agree(
        &expected.pooled().expect("pooled").summary(0.95).expect("summary"),
        &got.pooled().expect("pooled").summary(0.95).expect("summary"),
        &format!("{how}, pooled"),
    );
    for (x, y) in e.tests.iter().zip(&g.tests) {
        let (fx, fy) = (x.f_statistic.expect("F"), y.f_statistic.expect("F"));
        // A ratio of differences of sums of squares: agreement to 1e-9.
        assert!((fx - fy).abs() <= 1e-9 * fy.abs(), "{how}: {:?} F {fx} vs {fy}", x.hypothesis);
    }
}

#[test]
fn a_fit_in_datafusion_equals_the_fit_in_memory_for_any_partitioning() {
    let dir = parquet_folder("engine-fit", 10);
    let source = DataSource::open(&dir).expect("source");
    assert_eq!(source.files().len(), 10);
    let sales = load(demo_sales_csv()).expect("sales");
    let rt = runtime();
    for (spec, name) in [(demo_spec(), "three passes"), (numbers_only_spec(), "numbers only, two passes")] {
        for covariance in [CovarianceKind::Classical, CovarianceKind::Hc1] {
            let memory = fit_with(&sales, &spec, &extended(covariance.clone())).expect("in memory");
            for partitions in [1, 3, 8] {
                let context = driver::local_context_with_batches(Some(partitions), SMALL_BATCHES);
                let fitted = rt
                    .block_on(driver::fit(&context, &source, &spec, &extended(covariance.clone()), NonFinite::Refuse))
                    .expect("fit in DataFusion");
                assert_summaries_agree(
                    &memory.summary(0.95).expect("summary"),
                    &fitted.summary(0.95).expect("summary"),
                    &format!("{name}, {covariance:?}, {partitions} partitions"),
                );
            }
        }
    }
}

#[test]
fn the_same_files_give_the_same_document_byte_for_byte() {
    let dir = parquet_folder("engine-bytes", 9);
    let source = DataSource::open(&dir).expect("source");
    let rt = runtime();
    let document = |spec: &ModelSpec, partitions: usize| {
        let context = driver::local_context_with_batches(Some(partitions), SMALL_BATCHES);
        let fitted =
            rt.block_on(driver::fit(&context, &source, spec, &FitOptions::default(), NonFinite::Refuse)).expect("fit");
        let mut summary = fitted.summary(0.95).expect("summary");
        // The one field that names the moment of the run, not the data.
        summary.data.loaded_at.clear();
        to_pretty_json(&FitDocument::from(summary), "fit").expect("json")
    };
    for spec in [demo_spec(), numbers_only_spec()] {
        let first = document(&spec, 4);
        for _ in 0..3 {
            assert_eq!(document(&spec, 4), first, "a rerun moved the document");
        }
        // And on another number of partitions: the pieces are the batches,
        // whichever partition read them.
        assert_eq!(document(&spec, 1), first, "one partition moved it");
        // The same stamp as a fit in batches of the same folder.
        let batches =
            plumbline::fit::fit_batches(&dir, &spec, &FitOptions::default(), 500, NonFinite::Refuse).expect("batches");
        assert!(first.contains(&batches.provenance.sha256), "the provenance stamp differs from the batched fit's");
    }
}

#[test]
fn a_fit_by_market_area_in_datafusion_equals_the_fit_by_area_in_memory() {
    let dir = parquet_folder("engine-by", 8);
    let source = DataSource::open(&dir).expect("source");
    let sales = load(demo_sales_csv()).expect("sales");
    let rt = runtime();
    for (spec, name) in [(area_spec(), "three passes"), (numbers_only_spec(), "numbers only, two passes")] {
        let memory = fit_by_with(&sales, &spec, "district", &extended(CovarianceKind::Classical)).expect("memory");
        for partitions in [1, 4] {
            let context = driver::local_context_with_batches(Some(partitions), SMALL_BATCHES);
            let set = rt
                .block_on(driver::fit_by(
                    &context,
                    &source,
                    &spec,
                    &FitOptions::default(),
                    NonFinite::Refuse,
                    "district",
                ))
                .expect("fit by district");
            assert_sets_agree(&memory, &set, &format!("{name}, {partitions} partitions"));
        }
    }
}

/// A group too small to fit is listed with the same reason as in memory.
#[test]
fn an_area_that_cannot_be_fitted_keeps_its_reason() {
    let dir = scratch_dir("engine-small");
    let text = std::fs::read_to_string(demo_sales_csv()).expect("sales");
    let mut body = text.clone();
    for (i, line) in text.lines().skip(1).take(3).enumerate() {
        let mut cells: Vec<&str> = line.split(',').collect();
        let id = format!("WM-9{i:05}");
        cells[0] = &id;
        cells[9] = "Foxhollow";
        body.push_str(&format!("{}\n", cells.join(",")));
    }
    let path = write_file(&dir, "sales.csv", &body);
    let reason = |set: &StratifiedFit| match set.stratum("Foxhollow").expect("listed").outcome() {
        StratumOutcome::NotFitted { reason } => reason.clone(),
        StratumOutcome::Fitted(_) => panic!("Foxhollow has 3 rows"),
    };
    // Three rows and six columns (three passes) or five (two passes).
    for spec in [area_spec(), numbers_only_spec()] {
        let memory =
            fit_by_with(&load(&path).expect("sales"), &spec, "district", &FitOptions::default()).expect("memory");
        let set = runtime()
            .block_on(driver::fit_by(
                &driver::local_context(Some(2)),
                &DataSource::open(&path).expect("source"),
                &spec,
                &FitOptions::default(),
                NonFinite::Refuse,
                "district",
            ))
            .expect("engine");
        assert_eq!(reason(&set), reason(&memory));
        assert_sets_agree(&memory, &set, "with an unfittable area");
    }
}

#[test]
fn refusals_match_the_fits_in_memory() {
    let dir = scratch_dir("engine-refusals");
    let rt = runtime();
    let fit = |path: &Path, spec: &ModelSpec| {
        rt.block_on(async {
            let source = DataSource::open(path)?;
            driver::fit(&driver::local_context(Some(2)), &source, spec, &FitOptions::default(), NonFinite::Refuse).await
        })
    };
    // A value that is not a finite number names its column.
    let nan = write_file(&dir, "nan.csv", "price,area\n1,2\n2,NaN\n3,5\n4,4\n");
    let message = fit(&nan, &ModelSpec::new("price").numeric("area")).expect_err("NaN refused").to_string();
    assert!(message.contains("`area`") && message.contains("not a finite number"), "{message}");
    // Too few rows: the same words as in memory.
    let few = write_file(&dir, "few.csv", "price,area,age\n1,2,3\n2,3,1\n3,5,2\n");
    let spec = ModelSpec::new("price").numeric("area").numeric("age");
    let message = fit(&few, &spec).expect_err("too few rows").to_string();
    let memory = fit_with(&load(&few).expect("few"), &spec, &FitOptions::default()).expect_err("refused").to_string();
    assert_eq!(message, memory);
    // A misspelt column is named.
    let message = fit(&few, &ModelSpec::new("price").numeric("aera")).expect_err("unknown column").to_string();
    assert!(message.contains("aera"), "{message}");
    // Mixed formats and empty patterns are refused before any query.
    write_file(&dir, "other.parquet", "");
    let message = DataSource::open(&dir).expect_err("mixed").to_string();
    assert!(message.contains("mixes Parquet and CSV"), "{message}");
    let message = DataSource::open(&dir.join("none-*.parquet")).expect_err("no match").to_string();
    assert!(message.contains("no file matches"), "{message}");
}

#[test]
fn a_glob_reads_the_files_it_matches() {
    let dir = parquet_folder("engine-glob", 8);
    let pattern = dir.join("sales-0[0-3].parquet");
    let source = DataSource::open(&pattern).expect("glob");
    assert_eq!(source.files().len(), 4);
    let fitted = runtime()
        .block_on(driver::fit(
            &driver::local_context(None),
            &source,
            &demo_spec(),
            &FitOptions::default(),
            NonFinite::Refuse,
        ))
        .expect("fit");
    assert_eq!(fitted.rows, 1500);
}

/// Every NIST StRD linear dataset through DataFusion, in one partition and
/// in three (the file split in three): min LRE ≥ 13, as in memory.
#[test]
fn nist_datasets_through_datafusion_meet_the_lre_bar() {
    let reference = plumbline_tests::reference_dir().join("nist-strd");
    let rt = runtime();
    for parts in [1usize, 3] {
        let scratch = scratch_dir(&format!("engine-nist-{parts}"));
        let scores = score_all_with(&reference, |csv, spec| {
            let text = std::fs::read_to_string(csv).map_err(|e| Error::ReferenceData(e.to_string()))?;
            let mut lines = text.lines();
            let header = lines.next().unwrap_or_default();
            let rows: Vec<&str> = lines.filter(|l| !l.trim().is_empty()).collect();
            let folder = scratch.join(csv.file_stem().unwrap_or_default());
            std::fs::create_dir_all(&folder).map_err(|e| Error::ReferenceData(e.to_string()))?;
            for (k, chunk) in rows.chunks(rows.len().div_ceil(parts)).enumerate() {
                std::fs::write(folder.join(format!("part-{k}.csv")), format!("{header}\n{}\n", chunk.join("\n")))
                    .map_err(|e| Error::ReferenceData(e.to_string()))?;
            }
            let fitted = rt
                .block_on(async {
                    let source = DataSource::open(&folder)?;
                    driver::fit(
                        &driver::local_context(Some(parts)),
                        &source,
                        spec,
                        &FitOptions::default(),
                        NonFinite::Refuse,
                    )
                    .await
                })
                .map_err(|e| Error::ReferenceData(e.to_string()))?;
            ScoredFit::of_assembled(&fitted)
        })
        .expect("every dataset fits");
        plumbline_tests::assert_nist_bar(&scores, &format!("DataFusion, {parts} partition(s)"));
    }
}

/// A Ballista scheduler and executors, each a process of our binary, on loopback.
struct Cluster {
    scheduler: Child,
    executors: Vec<Child>,
    address: String,
}

impl Drop for Cluster {
    fn drop(&mut self) {
        for child in self.executors.iter_mut().chain(std::iter::once(&mut self.scheduler)) {
            let _ = child.kill();
            let _ = child.wait();
        }
    }
}

fn free_port() -> u16 {
    std::net::TcpListener::bind("127.0.0.1:0").expect("bind").local_addr().expect("address").port()
}

fn wait_for_port(port: u16) {
    for _ in 0..300 {
        if std::net::TcpStream::connect(("127.0.0.1", port)).is_ok() {
            return;
        }
        std::thread::sleep(Duration::from_millis(100));
    }
    panic!("nothing listens on port {port} after 30 s");
}

impl Cluster {
    fn start(executors: usize, slow_batch_ms: u64) -> Self {
        let binary = env!("CARGO_BIN_EXE_plumbline-engine");
        let port = free_port();
        let scheduler = Command::new(binary)
            .args(["scheduler", "--port", &port.to_string(), "--executor-timeout", "3"])
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .expect("start the scheduler");
        wait_for_port(port);
        let work = scratch_dir("ballista-work");
        let executors = (0..executors)
            .map(|k| {
                let (flight, grpc) = (free_port(), free_port());
                let dir = work.join(format!("executor-{k}"));
                std::fs::create_dir_all(&dir).expect("work dir");
                let child = Command::new(binary)
                    .args(["executor", "--port", &flight.to_string(), "--grpc-port", &grpc.to_string()])
                    .args(["--scheduler", &format!("127.0.0.1:{port}"), "--slots", "2"])
                    .arg("--work-dir")
                    .arg(&dir)
                    .env(plumbline_engine::aggregates::SLOW_BATCH_VARIABLE, slow_batch_ms.to_string())
                    .stdout(Stdio::null())
                    .stderr(Stdio::null())
                    .spawn()
                    .expect("start an executor");
                wait_for_port(flight);
                child
            })
            .collect();
        // Executors register with a heartbeat; give them a moment.
        std::thread::sleep(Duration::from_secs(2));
        Self { scheduler, executors, address: format!("127.0.0.1:{port}") }
    }
}

#[test]
fn a_ballista_cluster_fits_as_in_memory_and_a_killed_executor_never_gives_a_partial_answer() {
    let dir = parquet_folder("engine-ballista", 8);
    let source = DataSource::open(&dir).expect("source");
    let sales = load(demo_sales_csv()).expect("sales");
    let rt = runtime();
    let options = extended(CovarianceKind::Classical);
    let memory = fit_with(&sales, &demo_spec(), &options).expect("in memory");
    let expected = memory.summary(0.95).expect("summary");
    {
        let cluster = Cluster::start(2, 0);
        let context = rt.block_on(cluster::remote_context(&cluster.address, Some(4), SMALL_BATCHES)).expect("client");
        let fitted = rt
            .block_on(driver::fit(&context, &source, &demo_spec(), &options, NonFinite::Refuse))
            .expect("cluster fit");
        assert_summaries_agree(&expected, &fitted.summary(0.95).expect("summary"), "on the cluster");
        // A model of numbers only: its coding learned in round one, on the executors.
        let numbers_memory = fit_with(&sales, &numbers_only_spec(), &options).expect("in memory");
        let numbers_cluster = rt
            .block_on(driver::fit(&context, &source, &numbers_only_spec(), &options, NonFinite::Refuse))
            .expect("cluster fit of numbers only");
        assert_summaries_agree(
            &numbers_memory.summary(0.95).expect("summary"),
            &numbers_cluster.summary(0.95).expect("summary"),
            "numbers only, on the cluster",
        );
        let by_memory = fit_by_with(&sales, &area_spec(), "district", &options).expect("memory by area");
        let by_cluster = rt
            .block_on(driver::fit_by(&context, &source, &area_spec(), &options, NonFinite::Refuse, "district"))
            .expect("cluster fit by area");
        assert_sets_agree(&by_memory, &by_cluster, "on the cluster");
    }
    // An executor killed while the job runs: every batch takes 500 ms, so the
    // three rounds run for several seconds; one executor is killed 1.5 s in.
    let mut cluster = Cluster::start(2, 500);
    // One batch per file (the default size), so each slowed batch is one file.
    let context = rt.block_on(cluster::remote_context(&cluster.address, Some(8), driver::BATCH_ROWS)).expect("client");
    let job = rt.spawn({
        let source = source.clone();
        let options = options.clone();
        async move { driver::fit(&context, &source, &demo_spec(), &options, NonFinite::Refuse).await }
    });
    std::thread::sleep(Duration::from_millis(1500));
    assert!(!job.is_finished(), "the job ended before the executor was killed: slow the batches further");
    let victim = &mut cluster.executors[1];
    victim.kill().expect("kill an executor");
    victim.wait().expect("reap it");
    let outcome = rt.block_on(async { tokio::time::timeout(Duration::from_secs(180), job).await });
    match outcome {
        Err(_) => panic!("the job neither finished nor failed within 180 s of losing an executor"),
        Ok(joined) => match joined.expect("the job's task") {
            Ok(fitted) => {
                assert_summaries_agree(&expected, &fitted.summary(0.95).expect("summary"), "after losing an executor");
                println!("the lost executor's tasks were run again: the answer is right");
            }
            Err(error) => {
                let message = error.to_string();
                assert!(!message.trim().is_empty(), "an empty error");
                println!("the job failed clearly after losing an executor: {message}");
            }
        },
    }
}
