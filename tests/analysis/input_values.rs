//! Bad values never become a wrong answer without a word: non-finite numbers,
//! spreadsheet-formatted numbers, legacy encodings and dates, from every
//! source type (CSV, Parquet, frames built in code).
//!
//! The messages are our own (no external reference); the date arithmetic is
//! checked against a calendar computed by hand in the test, and the decoded
//! characters against the ISO 8859-1 and Windows-1252 code charts.

use plumbline::compare::split_by_cutoff;
use plumbline::data::{parse_formatted_number, NonFinite, TextEncoding};
use plumbline::polars::prelude::{Column, DataFrame, ParquetWriter};
use plumbline::prelude::*;
use plumbline::value::time_adjust;
use plumbline_tests::{scratch_dir, write_file};

fn message<T: std::fmt::Debug>(r: Result<T>) -> String {
    r.expect_err("expected an error").to_string()
}

/// Twelve rows of an exact linear relation y = 2 + 3·area − quality, so that a
/// good fit is recognisable; `last` is appended as a thirteenth data row
/// (file line 14).
fn sales_with_last_row(last: &str) -> String {
    let mut body = String::from("price,area,quality\n");
    for i in 1..=12 {
        let (area, quality) = (i as f64, (i % 3) as f64);
        body.push_str(&format!("{},{area},{quality}\n", 2.0 + 3.0 * area - quality + 0.01 * ((i * 7) % 5) as f64));
    }
    body.push_str(last);
    body.push('\n');
    body
}

fn spec() -> ModelSpec {
    ModelSpec::new("price").numeric("area").numeric("quality")
}

#[test]
fn nan_and_infinity_in_a_used_column_name_the_column_and_line() {
    let dir = scratch_dir("nonfinite");
    // The report that prompted this rule: a last row `NaN,inf,1` used to fit
    // 13 rows silently, with the intercept and `area` called aliased.
    let p = write_file(&dir, "s.csv", &sales_with_last_row("NaN,inf,1"));
    let frame = load_csv(&p, &CsvOptions::default()).expect("the file loads; the values are refused where used");
    let m = message(fit(&frame, &spec()));
    assert!(
        m.contains("`price`") && m.contains("data row 13") && m.contains("file line 14") && m.contains("NaN"),
        "{m}"
    );
    assert!(m.contains("--non-finite missing"), "the message names the option: {m}");

    for (last, column) in [("5,inf,1", "area"), ("5,-Infinity,1", "area"), ("5,2,-inf", "quality")] {
        let p = write_file(&dir, "t.csv", &sales_with_last_row(last));
        let m = message(fit(&load_csv(&p, &CsvOptions::default()).expect("load"), &spec()));
        assert!(
            m.contains(&format!("`{column}`")) && m.contains("file line 14") && m.contains("not a finite number"),
            "{last}: {m}"
        );
    }
}

#[test]
fn an_overflowing_literal_is_refused_not_read_as_infinity() {
    let dir = scratch_dir("overflow");
    let huge = format!("9{}", "0".repeat(400));
    let p = write_file(&dir, "s.csv", &sales_with_last_row(&format!("{huge},5,1")));
    let m = message(fit(&load_csv(&p, &CsvOptions::default()).expect("load"), &spec()));
    assert!(m.contains("`price`") && m.contains("file line 14") && m.contains("beyond ±1.8e308"), "{m}");
}

#[test]
fn non_finite_values_can_be_read_as_missing_and_the_account_says_so() {
    let dir = scratch_dir("asmissing");
    let p = write_file(&dir, "s.csv", &sales_with_last_row("NaN,inf,1"));
    let clean = write_file(&dir, "clean.csv", &sales_with_last_row(""));
    let frame = load_csv(&p, &CsvOptions::default().non_finite_as_missing()).expect("load");
    let model = fit(&frame, &spec()).expect("fit");
    let reference = fit(&load_csv(&clean, &CsvOptions::default()).expect("load"), &spec()).expect("fit");
    assert_eq!(model.solution().coefficients(), reference.solution().coefficients(), "same rows, same fit");
    let dropped = model.design().dropped();
    assert_eq!(dropped.total, 1);
    assert_eq!(dropped.non_finite_by_column, vec![("price".to_string(), 1), ("area".to_string(), 1)]);
    assert!(
        dropped.describe().contains("price: 1, of which 1 not finite and read as missing"),
        "{}",
        dropped.describe()
    );
    let summary = model.summary(0.95).expect("summary");
    assert_eq!(summary.non_finite_by_column.len(), 2);
    let report = plumbline::render::fit_text(&model, 0.95).expect("text");
    assert!(report.contains("not finite and read as missing"), "{report}");
}

#[test]
fn parquet_and_in_memory_frames_follow_the_same_rule() {
    let dir = scratch_dir("nonfinite-sources");
    let price: Vec<f64> = (0..12).map(|i| 2.0 + 3.0 * i as f64 + 0.1 * (i % 4) as f64).chain([f64::NAN]).collect();
    let area: Vec<f64> = (0..13).map(|i| i as f64).collect();
    let quality: Vec<f64> = (0..13).map(|i| (i % 3) as f64).collect();
    let mut df = DataFrame::new(
        13,
        vec![
            Column::new("price".into(), price),
            Column::new("area".into(), area),
            Column::new("quality".into(), quality),
        ],
    )
    .expect("frame");
    let path = dir.join("s.parquet");
    ParquetWriter::new(std::fs::File::create(&path).expect("create")).finish(&mut df).expect("write");
    let parquet = load_parquet(&path).expect("load");
    let m = message(fit(&parquet, &spec()));
    assert!(m.contains("`price`") && m.contains("data row 13"), "{m}");
    assert_eq!(fit(&parquet.non_finite_as_missing(), &spec()).expect("fit").design().dropped().total, 1);

    let in_memory = Frame::from_dataframe(df, "built in a test");
    let m = message(fit(&in_memory, &spec()));
    assert!(m.contains("`price`") && m.contains("data row 13"), "{m}");
    assert_eq!(in_memory.with_non_finite(NonFinite::AsMissing).non_finite_rule(), NonFinite::AsMissing);
}

#[test]
fn predictions_refuse_non_finite_values_too() {
    let dir = scratch_dir("nonfinite-predict");
    let p = write_file(&dir, "s.csv", &sales_with_last_row(""));
    let model = fit(&load_csv(&p, &CsvOptions::default()).expect("load"), &spec()).expect("fit");
    let new = write_file(&dir, "new.csv", "area,quality\n3,1\nnan,2\n");
    let m = message(model.predict(&load_csv(&new, &CsvOptions::default()).expect("load"), 0.95));
    assert!(m.contains("`area`") && m.contains("file line 3"), "{m}");
}

#[test]
fn spreadsheet_numbers_are_refused_with_the_option_that_reads_them() {
    let dir = scratch_dir("formatted");
    let body = "price,area\n\"$250,000\",1200\n\"$310,500\",1500\n\"$199,900\",1000\n\"$402,000\",2100\n";
    let p = write_file(&dir, "s.csv", body);
    let m =
        message(fit(&load_csv(&p, &CsvOptions::default()).expect("load"), &ModelSpec::new("price").numeric("area")));
    assert!(m.contains("`price`") && m.contains("`$250,000`") && m.contains("file line 2"), "{m}");
    assert!(m.contains("--column-type price=formatted-number"), "{m}");

    let read = load_csv(&p, &CsvOptions::default().column_type("price", ColumnType::FormattedNumber)).expect("load");
    assert_eq!(
        read.numeric_column("price").expect("numbers"),
        vec![Some(250_000.0), Some(310_500.0), Some(199_900.0), Some(402_000.0)]
    );

    // Thousands separated by spaces, and percentages (read as fractions).
    let p = write_file(&dir, "t.csv", "price,share\n250 000,12.5%\n1 250 000,3%\n");
    let m =
        message(fit(&load_csv(&p, &CsvOptions::default()).expect("load"), &ModelSpec::new("price").numeric("share")));
    assert!(m.contains("`250 000`") && m.contains("formatted-number"), "{m}");
    let options = CsvOptions::default()
        .column_type("price", ColumnType::FormattedNumber)
        .column_type("share", ColumnType::FormattedNumber);
    let read = load_csv(&p, &options).expect("load");
    assert_eq!(read.numeric_column("price").expect("numbers"), vec![Some(250_000.0), Some(1_250_000.0)]);
    assert_eq!(read.numeric_column("share").expect("numbers"), vec![Some(0.125), Some(0.03)]);

    // A decimal-comma amount is ambiguous under this reading and is refused at its line.
    let p = write_file(&dir, "u.csv", "price\n\"250.000,50\"\n");
    let m = message(load_csv(&p, &CsvOptions::default().column_type("price", ColumnType::FormattedNumber)));
    assert!(m.contains("`250.000,50`") && m.contains("file line 2"), "{m}");
    assert_eq!(parse_formatted_number("(1,200)"), Some(-1200.0));
}

#[test]
fn latin1_files_are_refused_with_line_and_byte_and_read_with_the_option() {
    let dir = scratch_dir("latin1");
    let path = dir.join("s.csv");
    // "Café Row" and "Müller Lane" in ISO 8859-1 (é = 0xE9, ü = 0xFC).
    std::fs::write(&path, b"price,area,street\n100,10,Caf\xe9 Row\n200,21,M\xfcller Lane\n310,29,Caf\xe9 Row\n")
        .expect("write");
    let m = message(load_csv(&path, &CsvOptions::default()));
    assert!(m.contains("line 2") && m.contains("column `street`") && m.contains("byte 4") && m.contains("0xE9"), "{m}");
    assert!(m.contains("--encoding windows-1252"), "{m}");
    for encoding in [TextEncoding::Latin1, TextEncoding::Windows1252] {
        let frame = load_csv(&path, &CsvOptions::default().encoding(encoding)).expect("load");
        let streets = frame.label_column("street").expect("labels");
        assert_eq!(streets[0].as_deref(), Some("Café Row"));
        assert_eq!(streets[1].as_deref(), Some("Müller Lane"));
    }
}

#[test]
fn dates_are_read_as_dates_in_iso_and_custom_formats() {
    let dir = scratch_dir("dates");
    let p = write_file(&dir, "s.csv", "sale_date,price\n2024-02-29,100\n2025-12-31,200\n,150\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    assert_eq!(frame.data().column("sale_date").expect("column").dtype(), &plumbline::polars::prelude::DataType::Date);
    let profile = profile(&frame).expect("profile");
    assert_eq!(profile[0].earliest.as_deref(), Some("2024-02-29"));
    assert_eq!(profile[0].latest.as_deref(), Some("2025-12-31"));
    assert_eq!(profile[0].missing, 1);

    let p = write_file(&dir, "t.csv", "sale_date,price\n29/02/2024,100\n31/12/2025,200\n");
    let frame = load_csv(&p, &CsvOptions::default().date_format("sale_date", "%d/%m/%Y")).expect("load");
    assert_eq!(frame.label_column("sale_date").expect("labels")[0].as_deref(), Some("2024-02-29"));

    let p = write_file(&dir, "u.csv", "sale_date,price\n29/02/2024,100\n31/02/2025,200\n");
    let m = message(load_csv(&p, &CsvOptions::default().date_format("sale_date", "%d/%m/%Y")));
    assert!(
        m.contains("`sale_date`") && m.contains("`31/02/2025`") && m.contains("file line 3") && m.contains("%d/%m/%Y"),
        "{m}"
    );

    // A date column used as a number is refused with the date terms named.
    let p = write_file(&dir, "v.csv", "sale_date,price\n2024-01-01,1\n2024-02-01,2\n2024-03-01,4\n");
    let m = message(fit(
        &load_csv(&p, &CsvOptions::default()).expect("load"),
        &ModelSpec::new("price").numeric("sale_date"),
    ));
    assert!(m.contains("holds dates") && m.contains("months_since"), "{m}");
}

/// Months since 2023-01-01 by the documented convention, computed by hand
/// from the Gregorian calendar: whole months plus (day − 1) / days in month.
const HAND_CALENDAR: [(&str, f64); 6] = [
    ("2023-01-01", 0.0),
    ("2023-01-16", 15.0 / 31.0),
    ("2023-03-01", 2.0),
    ("2024-02-15", 13.0 + 14.0 / 29.0), // 2024 is a leap year
    ("2024-07-31", 18.0 + 30.0 / 31.0),
    ("2025-11-10", 34.0 + 9.0 / 30.0),
];

#[test]
fn months_since_terms_follow_the_hand_computed_calendar() {
    let dir = scratch_dir("months");
    // price = 100 + 2·months exactly, so the fitted slope is 2 and the
    // intercept 100 only if every month position is the hand-computed one.
    let mut body = String::from("sale_date,price\n");
    for (date, months) in HAND_CALENDAR {
        body.push_str(&format!("{date},{}\n", 100.0 + 2.0 * months));
    }
    let p = write_file(&dir, "s.csv", &body);
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let model = fit(&frame, &ModelSpec::new("price").term(Term::months_since("sale_date", "2023-01-01"))).expect("fit");
    let names = model.estimated_names();
    assert_eq!(names[1], "sale_date (months since 2023-01-01)");
    let b = model.solution().coefficients();
    assert!((b[0] - 100.0).abs() < 1e-10 && (b[1] - 2.0).abs() < 1e-12, "{b:?}");

    // Days since, year, quarter and month of the year.
    let days = fit(&frame, &ModelSpec::new("price").term(Term::days_since("sale_date", "2023-01-01"))).expect("fit");
    assert_eq!(days.estimated_names()[1], "sale_date (days since 2023-01-01)");
    let quarters =
        fit(&frame, &ModelSpec::new("price").term(Term::sale_quarter("sale_date").reference("2023 Q1"))).expect("fit");
    let q: Vec<&str> = quarters.estimated_names();
    assert_eq!(q[1..], ["sale_date (quarter)=2024 Q1", "sale_date (quarter)=2024 Q3", "sale_date (quarter)=2025 Q4"]);
    let months =
        plumbline::model::build_design(&frame, &ModelSpec::new("price").term(Term::month_of_year("sale_date")), &[])
            .expect("design");
    assert!(
        months.column_names().contains(&"sale_date (month of year)=07 Jul".to_string()),
        "{:?}",
        months.column_names()
    );
    let years =
        plumbline::model::build_design(&frame, &ModelSpec::new("price").term(Term::sale_year("sale_date")), &[])
            .expect("design");
    assert_eq!(years.column_names(), ["intercept", "sale_date (year)=2024", "sale_date (year)=2025"]);

    let m = message(fit(&frame, &ModelSpec::new("price").term(Term::months_since("sale_date", "2023-13-01"))));
    assert!(m.contains("reference date") && m.contains("2023-13-01"), "{m}");
}

#[test]
fn time_adjustment_and_holdout_take_dates() {
    let dir = scratch_dir("adjust-dates");
    // ln(price) = 12 + 0.01·months exactly: a price moved to 2025-01-01 is
    // price · exp(0.01 · (24 − months)).
    let mut body = String::from("sale_date,price\n");
    for (date, months) in HAND_CALENDAR {
        body.push_str(&format!("{date},{}\n", (12.0 + 0.01 * months).exp()));
    }
    let p = write_file(&dir, "s.csv", &body);
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let spec = ModelSpec::new("price").log_target().term(Term::months_since("sale_date", "2023-01-01"));
    let model = fit(&frame, &spec).expect("fit");
    let adjusted = time_adjust(&model, &frame, "sale_date", "price", "2025-01-01").expect("adjust");
    for a in adjusted.iter().flatten() {
        assert!((a / (12.0f64 + 0.24).exp() - 1.0).abs() < 1e-12, "{a}");
    }
    let m = message(time_adjust(&model, &frame, "sale_date", "price", 24.0));
    assert!(m.contains("must be a date"), "{m}");
    let m = message(time_adjust(&model, &frame, "sale_date", "price", "1 Jan 2025"));
    assert!(m.contains("YYYY-MM-DD"), "{m}");

    let (train, test) = split_by_cutoff(&frame, "sale_date", "2024-07-31").expect("split");
    assert_eq!((train.height(), test.height()), (4, 2));
    let m = message(split_by_cutoff(&frame, "sale_date", "July 2024"));
    assert!(m.contains("YYYY-MM-DD"), "{m}");

    // Subjects valued as of a date.
    let subjects = write_file(&dir, "subjects.csv", "parcel\nA\nB\n");
    let at =
        load_csv(&subjects, &CsvOptions::default()).expect("load").with_date("sale_date", "2025-01-01").expect("date");
    let predicted = model.predict(&at, 0.95).expect("predict");
    assert!((predicted.rows[0].estimate - 12.24).abs() < 1e-9, "{}", predicted.rows[0].estimate);
}

#[test]
fn late_text_in_a_numeric_looking_column_keeps_every_value_as_written() {
    let dir = scratch_dir("late-text");
    let p = write_file(&dir, "s.csv", "parcel,price\n007,1\n0012,2\n12A,3\n,4\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let parcels = frame.label_column("parcel").expect("labels");
    assert_eq!(parcels, vec![Some("007".into()), Some("0012".into()), Some("12A".into()), None]);
    assert_eq!(frame.source_line(2), Some(4));
}

#[test]
fn the_plain_words_view_reads_a_date_trend_in_months() {
    let dir = scratch_dir("explain-dates");
    let mut body = String::from("sale_date,price\n");
    for (i, (date, months)) in HAND_CALENDAR.iter().enumerate() {
        body.push_str(&format!("{date},{}\n", (12.0 + 0.01 * months + 0.001 * (i % 2) as f64).exp()));
    }
    let p = write_file(&dir, "s.csv", &body);
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let spec = ModelSpec::new("price").log_target().term(Term::months_since("sale_date", "2023-01-01"));
    let model = fit(&frame, &spec).expect("fit");
    let sentences = plumbline::render::explanations(&model, 0.95).expect("explain");
    let (_, trend) = sentences.iter().find(|(term, _)| term.starts_with("sale_date")).expect("trend sentence");
    assert!(trend.starts_with("A sale one month later (by sale_date) goes with about 1.0"), "{trend}");
}
