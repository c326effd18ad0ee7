//! Every input failure a user can hit gets a message that names what to fix.
//! (Behavioural checks of our own messages; no external reference applies.)

use plumbline::prelude::*;
use plumbline_tests::{scratch_dir, write_file};

fn message<T: std::fmt::Debug>(r: Result<T>) -> String {
    r.expect_err("expected an error").to_string()
}

#[test]
fn missing_file_names_the_path() {
    let m = message(load_csv("/definitely/not/here.csv", &CsvOptions::default()));
    assert!(m.contains("/definitely/not/here.csv") && m.contains("cannot open"), "{m}");
}

#[test]
fn ragged_csv_names_the_line() {
    let dir = scratch_dir("ragged");
    let p = write_file(&dir, "r.csv", "a,b,c\n1,2,3\n4,5\n6,7,8\n");
    let m = message(load_csv(&p, &CsvOptions::default()));
    assert!(m.contains("line 3") && m.contains("2 fields") && m.contains("3"), "{m}");
}

#[test]
fn unreadable_csv_names_the_line() {
    let dir = scratch_dir("utf8");
    let path = dir.join("bad.csv");
    std::fs::write(&path, b"a,b\n1,2\n3,\xff\xfe\n").expect("write");
    let m = message(load_csv(&path, &CsvOptions::default()));
    assert!(m.contains("line 3"), "{m}");
}

#[test]
fn unknown_extension_is_explained() {
    // An OpenDocument spreadsheet is not among the formats read; the message lists those that are.
    let m = message(load("sales.ods"));
    assert!(m.contains("cannot tell the format of `sales.ods`"), "{m}");
    for format in [".csv", ".parquet", ".arrow", ".xlsx", ".sqlite", ".gpkg"] {
        assert!(m.contains(format), "{format} missing from: {m}");
    }
}

#[test]
fn column_not_found_suggests_close_names() {
    let dir = scratch_dir("colname");
    let p = write_file(&dir, "s.csv", "sale_price,living_area,district\n1,2,A\n3,4,B\n5,7,A\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("sale_price").numeric("livng_area")));
    assert!(m.contains("no column `livng_area`") && m.contains("did you mean `living_area`"), "{m}");
}

#[test]
fn non_numeric_value_names_row_line_and_value() {
    let dir = scratch_dir("nonnum");
    let p = write_file(&dir, "s.csv", "price,area\n100,10\n200,2O\n300,30\n400,41\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("price").numeric("area")));
    assert!(m.contains("`area`") && m.contains("data row 2") && m.contains("file line 3") && m.contains("`2O`"), "{m}");
}

#[test]
fn forced_numeric_type_reports_bad_value_at_load() {
    let dir = scratch_dir("forced");
    let p = write_file(&dir, "s.csv", "price,area\n100,10\n200,n/a\n");
    let m = message(load_csv(&p, &CsvOptions::default().column_type("area", ColumnType::Number)));
    assert!(m.contains("`n/a`") && m.contains("null marker"), "{m}");
    // With the marker declared, the same file loads.
    let ok = load_csv(&p, &CsvOptions::default().column_type("area", ColumnType::Number).null_marker("n/a"));
    assert!(ok.is_ok());
}

#[test]
fn entirely_missing_column_is_named() {
    let dir = scratch_dir("allmissing");
    let p = write_file(&dir, "s.csv", "price,area,lot\n100,10,\n200,20,\n300,35,\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("price").numeric("area").numeric("lot")));
    assert!(m.contains("`lot`") && m.contains("missing on every row"), "{m}");
}

#[test]
fn all_rows_dropped_says_which_columns() {
    let dir = scratch_dir("alldropped");
    let p = write_file(&dir, "s.csv", "price,area,lot\n100,,1\n200,20,\n,35,3\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("price").numeric("area").numeric("lot")));
    assert!(
        m.contains("no rows left") && m.contains("area: 1") && m.contains("lot: 1") && m.contains("price: 1"),
        "{m}"
    );
}

#[test]
fn too_few_rows_is_explained() {
    let dir = scratch_dir("fewrows");
    let p = write_file(&dir, "s.csv", "y,a,b\n1,2,3\n2,5,1\n4,1,1\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("y").numeric("a").numeric("b")));
    assert!(m.contains("3 rows but 3 coefficients"), "{m}");
}

#[test]
fn constant_target_is_explained() {
    let dir = scratch_dir("consty");
    let p = write_file(&dir, "s.csv", "y,a\n5,1\n5,2\n5,3\n5,4\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("y").numeric("a")));
    assert!(m.contains("same value (5) on every row"), "{m}");
}

#[test]
fn log_of_non_positive_names_row() {
    let dir = scratch_dir("logneg");
    let p = write_file(&dir, "s.csv", "y,a\n5,1\n6,0\n7,3\n9,4\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("y").term(Term::numeric("a").log())));
    assert!(m.contains("log") && m.contains("positive") && m.contains("data row 2"), "{m}");
    let m = message(fit(&frame, &ModelSpec::new("a").log_target().numeric("y")));
    assert!(m.contains("log of the target") && m.contains("data row 2"), "{m}");
}

#[test]
fn unknown_reference_level_lists_levels() {
    let dir = scratch_dir("reflevel");
    let p = write_file(&dir, "s.csv", "y,d\n1,North\n2,South\n3,North\n5,South\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("y").term(Term::category("d").reference("East"))));
    assert!(m.contains("`East`") && m.contains("North, South"), "{m}");
}

#[test]
fn all_zero_design_is_singular() {
    let dir = scratch_dir("singular");
    let p = write_file(&dir, "s.csv", "y,a\n1,0\n2,0\n3,0\n5,0\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("y").numeric("a").without_intercept()));
    assert!(m.contains("no linearly independent column"), "{m}");
}

#[test]
fn bad_weight_names_row() {
    let dir = scratch_dir("weights");
    let p = write_file(&dir, "s.csv", "y,a,w\n1,1,1\n2,2,0\n3,3.5,1\n5,4,2\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let m = message(fit(&frame, &ModelSpec::new("y").numeric("a").weights("w")));
    assert!(m.contains("positive") && m.contains("data row 2"), "{m}");
}

#[test]
fn bad_confidence_level_is_rejected() {
    let dir = scratch_dir("level");
    let p = write_file(&dir, "s.csv", "y,a\n1,1\n2,2\n3,3.5\n5,4\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let model = fit(&frame, &ModelSpec::new("y").numeric("a")).expect("fit");
    let m = message(model.coefficients(95.0));
    assert!(m.contains("between 0 and 1"), "{m}");
}

/// Limits a user can hit (issue "hostile input"): a category of 10⁵ levels
/// on 2·10⁵ sales would make a dense design of 2·10⁵ × 10⁵ numbers (160 GB,
/// about 480 GB with the solver's copies). It must be refused before any
/// column is built, naming the term, not end in the process being killed.
#[test]
fn a_category_of_a_hundred_thousand_levels_is_refused_before_memory_runs_out() {
    use plumbline::polars::prelude::{Column, DataFrame};
    let rows = 200_000usize;
    let price: Vec<f64> = (0..rows).map(|i| 100_000.0 + (i % 977) as f64 * 250.0).collect();
    let area: Vec<f64> = (0..rows).map(|i| 900.0 + (i % 1_301) as f64).collect();
    let street: Vec<String> = (0..rows).map(|i| format!("street {:05}", i / 2)).collect();
    let data = DataFrame::new(
        rows,
        vec![
            Column::new("price".into(), price),
            Column::new("area".into(), area),
            Column::new("street".into(), street),
        ],
    )
    .expect("frame");
    let frame = Frame::from_dataframe(data, "a town of 100,000 streets");
    let started = std::time::Instant::now();
    let m = message(fit(&frame, &ModelSpec::new("price").numeric("area").category("street")));
    assert!(m.contains("a design of 200000 rows and 100001 columns") && m.contains("of memory"), "{m}");
    assert!(m.contains("`street` alone makes 99999 columns"), "{m}");
    // Refused before the columns are built (building them takes minutes).
    eprintln!("refused in {:.2} s", started.elapsed().as_secs_f64());
}

/// A model with more columns than rows: refused with both counts, whatever
/// the design's rank.
#[test]
fn more_columns_than_rows_is_explained() {
    let dir = scratch_dir("widemodel");
    let columns = 40;
    let mut text = (0..columns).map(|c| format!("x{c}")).collect::<Vec<_>>().join(",") + ",y\n";
    for r in 0..30u64 {
        let row: Vec<String> = (0..columns as u64).map(|c| ((r * 7919 + c * 104_729) % 1_000).to_string()).collect();
        text += &format!("{},{}\n", row.join(","), r * r % 97);
    }
    let p = write_file(&dir, "wide.csv", &text);
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let mut spec = ModelSpec::new("y");
    for c in 0..columns {
        spec = spec.numeric(format!("x{c}"));
    }
    let m = message(fit(&frame, &spec));
    assert!(m.contains("30 rows but 41 coefficients"), "{m}");
}

/// Every row's line is the one an editor shows, whatever ends the lines:
/// `\r\n` (Windows exports), a lone `\r` (old Mac files, some spreadsheet
/// exports), a mixture, a quoted field across lines. A finding of the CSV
/// fuzz target, which saw two rows claim line 1; with `\r\n` every row named
/// the line before its own.
#[test]
fn lines_ended_by_a_lone_carriage_return_are_counted() {
    let dir = scratch_dir("lonecr");
    for (name, text, expected) in [
        ("mac.csv", "y,a\r1,2\r2,x\r3,4\r", [2, 3, 4]),
        ("windows.csv", "y,a\r\n1,2\r\n2,x\r\n3,4\r\n", [2, 3, 4]),
        ("mixed.csv", "y,a\r\n1,2\r2,x\n3,4\r\n", [2, 3, 4]),
        // The second row's quoted field holds a line end: the third row is on line 5.
        ("quoted.csv", "y,a\r\n1,2\r\n2,\"x\r\n\"\r\n3,4\r\n", [2, 3, 5]),
    ] {
        let p = write_file(&dir, name, text);
        let frame = load_csv(&p, &CsvOptions::default()).expect("load");
        let lines: Vec<Option<u64>> = (0..frame.height()).map(|r| frame.source_line(r)).collect();
        assert_eq!(lines, expected.map(Some), "{name}");
        let m = message(fit(&frame, &ModelSpec::new("y").numeric("a")));
        assert!(m.contains("line 3"), "{name}: {m}");
    }
}
