//! `plumbline fit` from parsed arguments to printed report, through the same
//! code the binary runs. Expected numbers come from NIST StRD (Norris,
//! certified B0/B1) so the command line is checked against an outside source.

use clap::Parser;
use plumbline_kernel::cli::{Cli, Command};
use plumbline_kernel::commands::{fit, CommandError};
use plumbline_tests::{reference_dir, scratch_dir, write_file};

fn run(args: &[&str]) -> Result<String, CommandError> {
    let cli = Cli::try_parse_from(std::iter::once("plumbline").chain(args.iter().copied())).expect("arguments parse");
    match cli.command {
        Command::Fit(a) => fit::run(&a),
        other => panic!("expected a fit command, got {other:?}"),
    }
}

#[test]
fn json_has_the_documented_fields_and_nist_values() {
    let norris = reference_dir().join("nist-strd").join("Norris.csv");
    let text = run(&["fit", norris.to_str().expect("utf8"), "--target", "y", "--terms", "x", "--format", "json"])
        .expect("fit");
    let doc: serde_json::Value = serde_json::from_str(&text).expect("valid JSON");
    for key in [
        "n_obs",
        "n_dropped",
        "model_df",
        "residual_df",
        "intercept",
        "coefficients",
        "r_squared",
        "adj_r_squared",
        "residual_std_error",
        "f_statistic",
        "f_p_value",
        "ss_regression",
        "ss_residual",
        "log_likelihood",
        "aic",
        "bic",
        "condition_number",
        "aliased",
        "data",
    ] {
        assert!(doc.get(key).is_some(), "missing `{key}` in {text}");
    }
    for key in ["path", "sha256", "rows", "cols"] {
        assert!(doc["data"].get(key).is_some(), "missing data.{key}");
    }
    let coefs = doc["coefficients"].as_array().expect("array");
    assert_eq!(coefs[0]["term"], "intercept");
    // NIST StRD Norris certified values: B0 = -0.262323073774029, B1 = 1.00211681802045.
    let b0 = coefs[0]["estimate"].as_f64().expect("number");
    let b1 = coefs[1]["estimate"].as_f64().expect("number");
    assert!((b0 - -0.262323073774029).abs() < 1e-12 * 0.27, "{b0}");
    assert!((b1 - 1.00211681802045).abs() < 1e-12, "{b1}");
    for key in ["term", "estimate", "std_error", "t", "p_value", "ci_low", "ci_high"] {
        assert!(coefs[1].get(key).is_some(), "coefficient lacks `{key}`");
    }
    assert_eq!(doc["n_obs"], 36);
}

#[test]
fn filip_through_poly_flag_keeps_certified_digits() {
    // NIST StRD Filip certified values: B0 = -1467.48961422980, B10 = -0.402962525080404E-04.
    let filip = reference_dir().join("nist-strd").join("Filip.csv");
    let text = run(&["fit", filip.to_str().expect("utf8"), "--target", "y", "--poly", "x:10", "--format", "json"])
        .expect("fit");
    let doc: serde_json::Value = serde_json::from_str(&text).expect("json");
    let coefs = doc["coefficients"].as_array().expect("array");
    assert_eq!(coefs.len(), 11);
    assert_eq!(coefs[10]["term"], "x^10");
    let b0 = coefs[0]["estimate"].as_f64().expect("number");
    let b10 = coefs[10]["estimate"].as_f64().expect("number");
    assert!(((b0 - -1467.48961422980) / 1467.48961422980).abs() < 1e-11, "{b0}");
    assert!(((b10 - -0.402962525080404e-04) / 0.402962525080404e-04).abs() < 1e-11, "{b10}");
}

#[test]
fn text_report_fits_in_a_terminal() {
    let norris = reference_dir().join("nist-strd").join("Norris.csv");
    let text = run(&["fit", norris.to_str().expect("utf8"), "--target", "y", "--terms", "x"]).expect("fit");
    assert!(text.contains("intercept") && text.contains("R²"));
    // Every line but the one naming the file (paths are printed whole) fits 100 columns.
    for line in text.lines().filter(|l| !l.trim_start().starts_with("file ")) {
        assert!(line.chars().count() < 100, "line too wide: {line}");
    }
}

#[test]
fn flag_mistakes_are_explained() {
    let dir = scratch_dir("cliflags");
    let p = write_file(&dir, "d.csv", "y,x,d\n1,2,a\n2,3,b\n3,5,a\n4,4,b\n");
    let path = p.to_str().expect("utf8");
    let m = run(&["fit", path, "--target", "y", "--poly", "x"]).expect_err("bad poly").to_string();
    assert!(m.contains("COL:DEGREE"), "{m}");
    let m =
        run(&["fit", path, "--target", "y", "--reference", "d=a"]).expect_err("reference without category").to_string();
    assert!(m.contains("not listed in --category"), "{m}");
    let m = run(&["fit", path, "--target", "y", "--terms", "x", "--delimiter", ";;"])
        .expect_err("bad delimiter")
        .to_string();
    assert!(m.contains("one character"), "{m}");
    let m = run(&["fit", path, "--target", "y", "--terms", "x", "--column-type", "x=weekday"])
        .expect_err("bad type")
        .to_string();
    assert!(m.contains("number, integer, text, date, formatted-number"), "{m}");
}

#[test]
fn categories_and_interactions_are_named() {
    let dir = scratch_dir("clicat");
    let p = write_file(
        &dir,
        "d.csv",
        "y,x,d\n1,2,North\n2,3,South\n3,5,North\n4,4,South\n5,7,East\n6,6,East\n7,9,North\n9,8,South\n",
    );
    let text = run(&[
        "fit",
        p.to_str().expect("utf8"),
        "--target",
        "y",
        "--terms",
        "x",
        "--category",
        "d",
        "--reference",
        "d=North",
        "--interact",
        "x*d",
        "--format",
        "json",
    ])
    .expect("fit");
    let doc: serde_json::Value = serde_json::from_str(&text).expect("json");
    let terms: Vec<&str> =
        doc["coefficients"].as_array().expect("a").iter().map(|c| c["term"].as_str().expect("s")).collect();
    assert_eq!(terms, vec!["intercept", "x", "d=East", "d=South", "x*d=East", "x*d=South"]);
}

#[test]
fn a_source_flag_that_does_not_apply_is_refused_not_ignored() {
    let norris = reference_dir().join("nist-strd").join("Norris.csv");
    let norris = norris.to_str().expect("utf8");
    let sheet =
        run(&["fit", norris, "--target", "y", "--terms", "x", "--sheet", "Q3"]).expect_err("a CSV has no sheets");
    assert!(sheet.to_string().contains("--sheet applies to an Excel workbook"), "{sheet}");
    let query =
        run(&["fit", norris, "--target", "y", "--terms", "x", "--query", "SELECT 1"]).expect_err("no query on CSV");
    assert!(query.to_string().contains("--query applies to a PostgreSQL server or an SQLite file"), "{query}");
    let server = run(&["fit", "postgresql://analyst@127.0.0.1:1/assessor", "--target", "y", "--terms", "x"])
        .expect_err("a server needs a query");
    assert!(server.to_string().contains("say what to read with --query"), "{server}");
}

#[test]
fn an_sqlite_table_fits_on_the_command_line_as_its_csv_does() {
    // NIST StRD Norris written into an SQLite table; both fits must agree to the last bit.
    let norris = reference_dir().join("nist-strd").join("Norris.csv");
    let text = std::fs::read_to_string(&norris).expect("Norris.csv");
    let dir = scratch_dir("cli-sqlite");
    let database = dir.join("norris.sqlite");
    let connection = rusqlite::Connection::open(&database).expect("create");
    connection.execute_batch("CREATE TABLE norris (y REAL, x REAL)").expect("table");
    for line in text.lines().skip(1) {
        let (y, x) = line.split_once(',').expect("two fields");
        connection
            .execute("INSERT INTO norris VALUES (?1, ?2)", [y.parse::<f64>().expect("y"), x.parse::<f64>().expect("x")])
            .expect("insert");
    }
    drop(connection);
    let json = |data: &str, extra: &[&str]| -> serde_json::Value {
        let mut args = vec!["fit", data, "--target", "y", "--terms", "x", "--format", "json"];
        args.extend_from_slice(extra);
        serde_json::from_str(&run(&args).expect("fit")).expect("JSON")
    };
    let from_csv = json(norris.to_str().expect("utf8"), &[]);
    let from_table = json(database.to_str().expect("utf8"), &["--table", "norris"]);
    assert_eq!(from_csv["coefficients"], from_table["coefficients"]);
    assert_eq!(from_table["data"]["source"]["table"], "norris");
}

fn run_value(args: &[&str]) -> Result<String, CommandError> {
    let cli = Cli::try_parse_from(std::iter::once("plumbline").chain(args.iter().copied())).expect("arguments parse");
    match cli.command {
        Command::Value(a) => plumbline_kernel::commands::value::run(&a),
        other => panic!("expected a value command, got {other:?}"),
    }
}

/// `plumbline value` writes one row per parcel, in input order, whose numbers
/// are the library's predictions to the last digit (the library's prediction
/// intervals follow Weisberg, *Applied Linear Regression*, 4th ed., §3.7, and
/// are checked against numpy in `tests/python/test_prediction_against_numpy.py`).
#[test]
fn value_writes_every_parcel_with_the_library_predictions_in_batches() {
    use plumbline::prelude::*;
    let dir = scratch_dir("value-command");
    let sales = plumbline_tests::demo_sales_csv();
    let parcels = sales.with_file_name("parcels.csv");
    let out = dir.join("values.csv");
    let (sales_arg, parcels_arg, out_arg) =
        (sales.to_str().expect("utf8"), parcels.to_str().expect("utf8"), out.to_str().expect("utf8"));
    let model_flags = [
        "--target",
        "sale_price",
        "--log-target",
        "--log",
        "living_area",
        "--terms",
        "age,quality",
        "--category",
        "district",
    ];
    let mut args = vec!["value", sales_arg];
    args.extend(model_flags);
    args.extend(["--id", "parcel_id", "--parcels", parcels_arg, "--out", out_arg, "--parcel-batch-rows", "700"]);
    let summary = run_value(&args).expect("value");
    assert!(summary.contains("3340 parcels valued") && summary.contains("not appraisals"), "{summary}");

    // The command line orders terms as `--terms`, `--log`, `--category`.
    let spec = ModelSpec::new("sale_price")
        .log_target()
        .numeric("age")
        .numeric("quality")
        .term(Term::numeric("living_area").log())
        .category("district");
    let fit = fit(&load(&sales).expect("sales"), &spec).expect("fit");
    let parcel_frame = load(&parcels).expect("parcels");
    let expected = fit.predict(&parcel_frame, 0.95).expect("predict");
    let ids = parcel_frame.label_column("parcel_id").expect("ids");
    let mut reader = csv::Reader::from_path(&out).expect("values file");
    let header: Vec<String> = reader.headers().expect("header").iter().map(str::to_string).collect();
    assert_eq!(header[..4], ["row", "id", "estimate", "se_fit"]);
    let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.expect("record")).collect();
    assert_eq!(rows.len(), expected.rows.len());
    for (record, p) in rows.iter().zip(&expected.rows) {
        assert_eq!(record[0].parse::<usize>().expect("row"), p.row);
        assert_eq!(Some(record[1].to_string()), ids[p.row - 1]);
        assert_eq!(record[2].parse::<f64>().expect("estimate"), p.estimate);
        assert_eq!(record[7].parse::<f64>().expect("pi_high"), p.pi_high);
        assert_eq!(record[8].parse::<f64>().expect("median"), p.median_original.expect("log target"));
    }

    // A failure leaves no file behind, not even a partial one.
    let broken = write_file(&dir, "broken-parcels.csv", "parcel_id,living_area,age\nA,1200,10\n");
    let failed_out = dir.join("never.csv");
    let mut args = vec!["value", sales_arg];
    args.extend(model_flags);
    args.extend(["--parcels", broken.to_str().expect("utf8"), "--out", failed_out.to_str().expect("utf8")]);
    let error = run_value(&args).expect_err("parcels lack quality and district").to_string();
    assert!(error.contains("quality"), "{error}");
    assert!(!failed_out.exists());
    assert!(std::fs::read_dir(&dir).expect("dir").all(|e| !e
        .expect("entry")
        .file_name()
        .to_string_lossy()
        .contains("partial")));
}
