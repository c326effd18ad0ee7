//! Sales from SQLite, GeoPackage, Excel workbooks and Arrow IPC files: the
//! same demo sales written into each (by general-purpose libraries —
//! `rusqlite`, `rust_xlsxwriter`, polars' IPC writer) must load into a frame
//! whose fit equals the CSV fit bit for bit, and each frame's stamp must say
//! what was read.

use plumbline::data::{load_arrow, load_sqlite, load_workbook, SourceKind, SqlRead};
use plumbline::polars::prelude::IpcWriter;
use plumbline::polars::prelude::SerWriter;
use plumbline::prelude::*;
use plumbline_tests::{assert_same_fit, demo_sales_csv, demo_spec, frame_rows, scratch_dir};
use std::path::{Path, PathBuf};

fn csv_frame_and_fit() -> (Frame, Fit) {
    let frame = load_csv(demo_sales_csv(), &CsvOptions::default()).expect("demo sales CSV");
    let fit = fit(&frame, &demo_spec()).expect("CSV fit");
    (frame, fit)
}

/// Writes the frame's rows into table `name` of an SQLite file, with an
/// extra binary column when `geometry` (as a GeoPackage feature table has).
fn write_sqlite(path: &Path, frame: &Frame, name: &str, geometry: bool) {
    let connection = rusqlite::Connection::open(path).expect("create SQLite file");
    let (columns, rows) = frame_rows(frame);
    let mut definition: Vec<String> = columns.iter().map(|(c, ty)| format!("\"{c}\" {ty}")).collect();
    if geometry {
        // The GeoPackage bookkeeping table (OGC 12-128r18, §1.1.3.1) and a geometry column.
        connection
            .execute_batch(
                "CREATE TABLE gpkg_contents (table_name TEXT PRIMARY KEY, data_type TEXT NOT NULL);
                 INSERT INTO gpkg_contents VALUES ('parcels', 'features');",
            )
            .expect("gpkg_contents");
        definition.push("geom BLOB".into());
    }
    connection.execute_batch(&format!("CREATE TABLE \"{name}\" ({});", definition.join(", "))).expect("create table");
    let width = columns.len() + usize::from(geometry);
    let placeholders: Vec<String> = (1..=width).map(|i| format!("?{i}")).collect();
    let insert = format!("INSERT INTO \"{name}\" VALUES ({})", placeholders.join(", "));
    let transaction = connection.unchecked_transaction().expect("transaction");
    {
        let mut statement = transaction.prepare(&insert).expect("prepare insert");
        for row in rows {
            let mut values: Vec<rusqlite::types::Value> = row
                .into_iter()
                .map(|value| match value {
                    (Some(i), _, _) => rusqlite::types::Value::Integer(i),
                    (_, Some(x), _) => rusqlite::types::Value::Real(x),
                    (_, _, Some(t)) => rusqlite::types::Value::Text(t),
                    _ => rusqlite::types::Value::Null,
                })
                .collect();
            if geometry {
                values.push(rusqlite::types::Value::Blob(vec![0x47, 0x50, 0, 1]));
            }
            statement.execute(rusqlite::params_from_iter(values)).expect("insert");
        }
    }
    transaction.commit().expect("commit");
}

#[test]
fn an_sqlite_table_fits_exactly_as_the_csv_does() {
    let (csv, reference) = csv_frame_and_fit();
    let path = scratch_dir("sqlite").join("sales.sqlite");
    write_sqlite(&path, &csv, "sales", false);

    let frame = load_sqlite(&path, &SqlRead::table("sales")).expect("load the table");
    assert_same_fit(&reference, &fit(&frame, &demo_spec()).expect("SQLite fit"), "SQLite table");
    let stamp = frame.provenance().source.clone().expect("a source stamp");
    assert_eq!(stamp.kind, SourceKind::Sqlite);
    assert_eq!(stamp.table.as_deref(), Some("sales"));
    assert_eq!(stamp.hash_of, "result values");
    assert_eq!(frame.provenance().rows, csv.height());

    // The one table is found without naming it, and the same values give the same stamp.
    let again = load(&path).expect("load by extension");
    assert_eq!(again.provenance().sha256, frame.provenance().sha256);

    // A query with a parameter: only that district's sales.
    let query = SqlRead::query("SELECT * FROM sales WHERE district = ?1").parameter("Wickerholm");
    let district = load_sqlite(&path, &query).expect("parameterised query");
    let expected =
        csv.label_column("district").expect("labels").iter().filter(|l| l.as_deref() == Some("Wickerholm")).count();
    assert_eq!(district.height(), expected);
    let stamp = district.provenance().source.clone().expect("stamp");
    assert_eq!(stamp.query.as_deref(), Some("SELECT * FROM sales WHERE district = ?1"));
    assert_eq!(stamp.parameters, vec!["Wickerholm".to_string()]);
    assert_ne!(district.provenance().sha256, frame.provenance().sha256);
}

#[test]
fn sqlite_failures_name_the_table_or_the_query() {
    let (csv, _) = csv_frame_and_fit();
    let path = scratch_dir("sqlite-errors").join("sales.db");
    write_sqlite(&path, &csv, "sales", false);
    let missing = load_sqlite(&path, &SqlRead::table("sale")).expect_err("no such table").to_string();
    assert!(missing.contains("no table `sale`") && missing.contains("sales"), "{missing}");
    let bad = load_sqlite(&path, &SqlRead::query("SELECT * FROM sales WHERE")).expect_err("bad SQL").to_string();
    assert!(bad.contains("could not prepare the query"), "{bad}");
    let absent =
        load_sqlite(path.with_file_name("absent.db"), &SqlRead::table("sales")).expect_err("no file").to_string();
    assert!(absent.contains("cannot open data file"), "{absent}");
}

#[test]
fn a_geopackage_layer_fits_exactly_and_its_geometry_is_on_record() {
    let (csv, reference) = csv_frame_and_fit();
    let path = scratch_dir("gpkg").join("parcels.gpkg");
    write_sqlite(&path, &csv, "parcels", true);
    let frame = load(&path).expect("the only feature table");
    assert_same_fit(&reference, &fit(&frame, &demo_spec()).expect("GeoPackage fit"), "GeoPackage");
    let stamp = frame.provenance().source.clone().expect("stamp");
    assert_eq!(stamp.table.as_deref(), Some("parcels"));
    assert_eq!(stamp.not_read, vec!["geom".to_string()]);
}

fn write_workbook(path: &Path, frame: &Frame, sheet: &str) {
    use rust_xlsxwriter::{ExcelDateTime, Format, Workbook};
    let mut workbook = Workbook::new();
    // A first sheet of notes, as offices keep them, so the sheet must be named.
    workbook.add_worksheet().set_name("Notes").expect("name").write_string(0, 0, "Invented data").expect("note");
    let worksheet = workbook.add_worksheet();
    worksheet.set_name(sheet).expect("sheet name");
    let date_format = Format::new().set_num_format("yyyy-mm-dd");
    let (columns, rows) = frame_rows(frame);
    for (c, (name, _)) in columns.iter().enumerate() {
        worksheet.write_string(0, c as u16, name).expect("header");
    }
    for (r, row) in rows.into_iter().enumerate() {
        let r = r as u32 + 1;
        for (c, value) in row.into_iter().enumerate() {
            let c = c as u16;
            match (value, columns[c as usize].1) {
                ((Some(i), _, _), _) => worksheet.write_number(r, c, i as f64).map(|_| ()),
                ((_, Some(x), _), _) => worksheet.write_number(r, c, x).map(|_| ()),
                ((_, _, Some(t)), "DATE") => {
                    let date = ExcelDateTime::parse_from_str(&t).expect("ISO date");
                    worksheet.write_datetime_with_format(r, c, &date, &date_format).map(|_| ())
                }
                ((_, _, Some(t)), _) => worksheet.write_string(r, c, &t).map(|_| ()),
                _ => Ok(()),
            }
            .expect("cell");
        }
    }
    workbook.save(path).expect("save workbook");
}

#[test]
fn a_workbook_sheet_fits_exactly_as_the_csv_does() {
    let (csv, reference) = csv_frame_and_fit();
    let path = scratch_dir("xlsx").join("sales.xlsx");
    write_workbook(&path, &csv, "Q3 sales");
    let frame = load_workbook(&path, Some("Q3 sales")).expect("load the sheet");
    assert_same_fit(&reference, &fit(&frame, &demo_spec()).expect("workbook fit"), "workbook");
    let stamp = frame.provenance().source.clone().expect("stamp");
    assert_eq!(
        (stamp.kind, stamp.sheet.as_deref(), stamp.hash_of.as_str()),
        (SourceKind::Workbook, Some("Q3 sales"), "file bytes")
    );
    assert_eq!(frame.provenance().sha256, plumbline::data::sha256_hex(&std::fs::read(&path).expect("bytes")));

    let unnamed = load(&path).expect_err("two sheets").to_string();
    assert!(
        unnamed.contains("several sheets") && unnamed.contains("Q3 sales") && unnamed.contains("--sheet"),
        "{unnamed}"
    );
    let wrong = load_workbook(&path, Some("Q4")).expect_err("no such sheet").to_string();
    assert!(wrong.contains("no sheet `Q4`"), "{wrong}");
}

#[test]
fn a_workbook_error_names_the_sheet_and_the_cell() {
    use rust_xlsxwriter::Workbook;
    let path: PathBuf = scratch_dir("xlsx-bad").join("bad.xlsx");
    let mut workbook = Workbook::new();
    let sheet = workbook.add_worksheet();
    sheet.set_name("Sales").expect("name");
    for (c, name) in ["sale_price", "living_area", "sale_price"].iter().enumerate() {
        sheet.write_string(0, c as u16, *name).expect("header");
    }
    sheet.write_number(1, 0, 250_000.0).expect("value");
    workbook.save(&path).expect("save");
    let message = load_workbook(&path, None).expect_err("duplicate header").to_string();
    assert!(message.contains("sheet `Sales`, cell C1") && message.contains("appears twice"), "{message}");
}

#[test]
fn an_arrow_file_fits_exactly_as_the_csv_does() {
    let (csv, reference) = csv_frame_and_fit();
    let path = scratch_dir("arrow").join("sales.arrow");
    let mut data = csv.data().clone();
    IpcWriter::new(std::fs::File::create(&path).expect("create")).finish(&mut data).expect("write Arrow IPC");
    let frame = load(&path).expect("load by extension");
    assert_same_fit(&reference, &fit(&frame, &demo_spec()).expect("Arrow fit"), "Arrow IPC");
    let stamp = frame.provenance().source.clone().expect("stamp");
    assert_eq!((stamp.kind, stamp.hash_of.as_str()), (SourceKind::ArrowIpc, "file bytes"));
    assert_eq!(frame.provenance().sha256, plumbline::data::sha256_hex(&std::fs::read(&path).expect("bytes")));
    let corrupt = scratch_dir("arrow-bad").join("x.feather");
    std::fs::write(&corrupt, b"not arrow").expect("write");
    let message = load_arrow(&corrupt).expect_err("corrupt").to_string();
    assert!(message.contains("cannot read Arrow IPC file"), "{message}");
}
