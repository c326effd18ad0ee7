//! Loading: Parquet round trip, headerless CSV, delimiters, provenance, profile.
//! Reference for the hash: FIPS 180-4 SHA-256 as computed by the `sha2` crate is
//! checked against the FIPS example in `analysis/src/data/provenance.rs`; here we
//! check that the stamp describes the bytes actually read.

use plumbline::data::NonFinite;
use plumbline::polars::prelude::{Column, DataFrame, ParquetWriter};
use plumbline::prelude::*;
use plumbline_tests::{scratch_dir, write_file};

#[test]
fn parquet_round_trip_keeps_values_and_stamps_provenance() {
    let dir = scratch_dir("parquet");
    let path = dir.join("sales.parquet");
    let mut df = DataFrame::new(
        4,
        vec![
            Column::new("price".into(), vec![100.0, 220.0, 310.0, 405.0]),
            Column::new("area".into(), vec![Some(10i64), Some(20), None, Some(40)]),
            Column::new("district".into(), vec!["North", "South", "North", "East"]),
        ],
    )
    .expect("frame");
    ParquetWriter::new(std::fs::File::create(&path).expect("create")).finish(&mut df).expect("write parquet");
    let frame = load(&path).expect("load parquet");
    assert_eq!((frame.height(), frame.width()), (4, 3));
    assert_eq!(frame.numeric_column("area").expect("numeric"), vec![Some(10.0), Some(20.0), None, Some(40.0)]);
    let bytes = std::fs::read(&path).expect("read");
    let prov = frame.provenance();
    assert_eq!(prov.sha256, plumbline::data::sha256_hex(&bytes));
    assert_eq!((prov.rows, prov.cols), (4, 3));
    assert!(prov.loaded_at.ends_with('Z'));
}

/// Database and warehouse exports store small counts (bedrooms, quality
/// grades, year parts) in 8- and 16-bit integer columns; each reads as its
/// exact value, and the batch reader fits them as the in-memory path does.
#[test]
fn small_integer_parquet_columns_read_exactly() {
    let dir = scratch_dir("parquet-small-ints");
    let path = dir.join("sales.parquet");
    let price = vec![101.5, 203.0, 298.25, 407.0, 488.5, 612.0];
    let mut df = DataFrame::new(
        6,
        vec![
            Column::new("price".into(), price.clone()),
            Column::new("beds".into(), vec![1i8, 2, 3, 4, 5, -6]),
            Column::new("grade".into(), vec![Some(7i16), Some(-300), None, Some(12), Some(32767), Some(9)]),
            Column::new("rooms".into(), vec![3u8, 4, 255, 6, 7, 8]),
            Column::new("year".into(), vec![1999u16, 2004, 65535, 2012, 2020, 2021]),
        ],
    )
    .expect("frame");
    ParquetWriter::new(std::fs::File::create(&path).expect("create")).finish(&mut df).expect("write parquet");
    let frame = load(&path).expect("load parquet");
    assert_eq!(frame.numeric_column("beds").expect("i8"), [1.0, 2.0, 3.0, 4.0, 5.0, -6.0].map(Some));
    assert_eq!(
        frame.numeric_column("grade").expect("i16"),
        vec![Some(7.0), Some(-300.0), None, Some(12.0), Some(32767.0), Some(9.0)]
    );
    assert_eq!(frame.numeric_column("rooms").expect("u8")[2], Some(255.0));
    assert_eq!(frame.numeric_column("year").expect("u16")[2], Some(65535.0));

    let spec = ModelSpec::new("price").numeric("beds").numeric("rooms");
    let whole = fit(&frame, &spec).expect("fit in memory");
    let pieces = plumbline::fit::fit_batches(&path, &spec, &FitOptions::default(), 2, NonFinite::Refuse)
        .expect("fit in batches");
    let (whole, pieces) = (whole.coefficients(0.95).expect("table"), pieces.coefficients(0.95).expect("table"));
    assert_eq!(whole.len(), 3);
    for (a, b) in whole.iter().zip(&pieces) {
        assert_eq!(a.term, b.term);
        assert!((a.estimate - b.estimate).abs() <= 1e-12 * a.estimate.abs(), "{} vs {}", a.estimate, b.estimate);
        assert!((a.std_error - b.std_error).abs() <= 1e-12 * a.std_error, "{} vs {}", a.std_error, b.std_error);
    }
}

#[test]
fn corrupt_parquet_is_reported() {
    let dir = scratch_dir("badparquet");
    let p = write_file(&dir, "x.parquet", "not parquet at all");
    let m = load(&p).expect_err("corrupt").to_string();
    assert!(m.contains("cannot read Parquet file"), "{m}");
}

#[test]
fn headerless_semicolon_csv_with_null_markers() {
    let dir = scratch_dir("headerless");
    let p = write_file(&dir, "d.txt", "1;2.5;a\n2;NA;b\n3;4.5;\n");
    let options = CsvOptions { delimiter: b';', has_header: false, ..CsvOptions::default() }.null_marker("NA");
    let frame = load_csv(&p, &options).expect("load");
    assert_eq!(frame.column_names(), vec!["column_1", "column_2", "column_3"]);
    assert_eq!(frame.numeric_column("column_2").expect("num"), vec![Some(2.5), None, Some(4.5)]);
    assert_eq!(frame.label_column("column_3").expect("labels"), vec![Some("a".into()), Some("b".into()), None]);
    assert_eq!(frame.source_line(2), Some(3));
}

#[test]
fn text_override_keeps_leading_zeros() {
    let dir = scratch_dir("textcol");
    let p = write_file(&dir, "d.csv", "parcel,price\n00123,5\n04567,6\n");
    let frame = load_csv(&p, &CsvOptions::default().column_type("parcel", ColumnType::Text)).expect("load");
    assert_eq!(frame.label_column("parcel").expect("labels")[0].as_deref(), Some("00123"));
}

#[test]
fn override_of_unknown_column_is_reported() {
    let dir = scratch_dir("overridename");
    let p = write_file(&dir, "d.csv", "parcel,price\n1,5\n");
    let m =
        load_csv(&p, &CsvOptions::default().column_type("prise", ColumnType::Number)).expect_err("typo").to_string();
    assert!(m.contains("`prise`") && m.contains("did you mean `price`"), "{m}");
}

#[test]
fn duplicate_header_names_are_rejected() {
    let dir = scratch_dir("dupheader");
    let p = write_file(&dir, "d.csv", "a,b,a\n1,2,3\n");
    let m = load_csv(&p, &CsvOptions::default()).expect_err("dup").to_string();
    assert!(m.contains("`a` twice"), "{m}");
}

#[test]
fn empty_file_is_reported() {
    let dir = scratch_dir("empty");
    let p = write_file(&dir, "d.csv", "");
    let m = load_csv(&p, &CsvOptions::default()).expect_err("empty").to_string();
    assert!(m.contains("holds no columns"), "{m}");
}

#[test]
fn profile_describes_numbers_and_levels() {
    // Median of 1, 3, 4, 10 is (3 + 4) / 2 = 3.5 by the usual definition for an even count.
    let dir = scratch_dir("profile");
    let p = write_file(&dir, "d.csv", "x,d\n10,b\n3,a\n,b\n1,c\n4,b\n");
    let frame = load_csv(&p, &CsvOptions::default()).expect("load");
    let prof = profile(&frame).expect("profile");
    assert_eq!(prof[0].missing, 1);
    assert_eq!((prof[0].min, prof[0].median, prof[0].max), (Some(1.0), Some(3.5), Some(10.0)));
    assert_eq!(prof[1].distinct, 3);
    assert_eq!(prof[1].top_levels[0], ("b".to_string(), 3));
}
