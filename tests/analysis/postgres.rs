//! Sales from a real PostgreSQL server (the one `install/test.sh` starts on
//! loopback; `PLUMBLINE_TEST_POSTGRES_URL` names it): the demo sales written
//! into a table by the `postgres` crate must load into a frame whose fit
//! equals the CSV fit bit for bit; a parameterised query, a `numeric`
//! column, and each failure — a bad query, a wrong password, no server, the
//! connection dropped mid-read — must give a clear error and no frame.

use plumbline::data::{load_postgres, SourceKind};
use plumbline::prelude::*;
use plumbline_tests::{assert_same_fit, demo_sales_csv, demo_spec, frame_rows};
use std::sync::Once;

/// The test server's URL; without it the tests cannot run, and say how to start one.
fn server_url() -> String {
    std::env::var("PLUMBLINE_TEST_POSTGRES_URL").unwrap_or_else(|_| {
        panic!(
            "\n\n*** NO POSTGRESQL TEST SERVER ***\nPLUMBLINE_TEST_POSTGRES_URL is not set. The database tests run against a \
             real server;\n`install/test.sh` starts one. By hand: `source install/lib.sh && start_test_postgres` in the \
             shell that runs cargo test.\n"
        )
    })
}

fn client() -> postgres::Client {
    postgres::Client::connect(&server_url(), postgres::NoTls).expect("connect to the test server")
}

/// The demo sales as table `demo_sales`, with a `seq` column holding the CSV order.
fn demo_table() -> (Frame, Fit, Vec<String>) {
    static CREATE: Once = Once::new();
    let csv = load_csv(demo_sales_csv(), &CsvOptions::default()).expect("demo sales");
    let reference = fit(&csv, &demo_spec()).expect("CSV fit");
    let (columns, rows) = frame_rows(&csv);
    let names: Vec<String> = columns.iter().map(|(n, _)| n.clone()).collect();
    CREATE.call_once(|| {
        let mut client = client();
        let definition: Vec<String> = columns
            .iter()
            .map(|(n, ty)| {
                let ty = match *ty {
                    "INTEGER" => "bigint",
                    "REAL" => "double precision",
                    other => other,
                };
                format!("\"{n}\" {ty}")
            })
            .collect();
        client
            .batch_execute(&format!(
                "DROP TABLE IF EXISTS demo_sales; CREATE TABLE demo_sales (seq integer PRIMARY KEY, {});",
                definition.join(", ")
            ))
            .expect("create table");
        // COPY in PostgreSQL's text format: tab-separated, \N for missing.
        let mut body = String::new();
        for (i, row) in rows.iter().enumerate() {
            body.push_str(&i.to_string());
            for value in row {
                body.push('\t');
                match value {
                    (Some(v), _, _) => body.push_str(&v.to_string()),
                    (_, Some(x), _) => body.push_str(&format!("{x:?}")),
                    (_, _, Some(t)) => body.push_str(&t.replace('\\', "\\\\").replace('\t', "\\t")),
                    _ => body.push_str("\\N"),
                }
            }
            body.push('\n');
        }
        let mut writer = client.copy_in("COPY demo_sales FROM STDIN").expect("copy");
        std::io::Write::write_all(&mut writer, body.as_bytes()).expect("copy rows");
        writer.finish().expect("finish copy");
    });
    (csv, reference, names)
}

fn select_all(names: &[String]) -> String {
    let list: Vec<String> = names.iter().map(|n| format!("\"{n}\"")).collect();
    format!("SELECT {} FROM demo_sales", list.join(", "))
}

#[test]
fn a_table_loads_and_fits_exactly_as_the_csv_does() {
    let (csv, reference, names) = demo_table();
    let query = format!("{} ORDER BY seq", select_all(&names));
    let frame = load_postgres(&server_url(), &query, &[]).expect("load");
    assert_eq!((frame.height(), frame.width()), (csv.height(), csv.width()));
    assert_same_fit(&reference, &fit(&frame, &demo_spec()).expect("fit"), "PostgreSQL");

    let provenance = frame.provenance();
    let stamp = provenance.source.clone().expect("a source stamp");
    assert_eq!(stamp.kind, SourceKind::Postgresql);
    assert_eq!(stamp.database.as_deref(), Some("wrenmoor"));
    assert_eq!(stamp.user.as_deref(), Some("plumbline"));
    assert_eq!(stamp.query.as_deref(), Some(query.as_str()));
    assert_eq!(stamp.hash_of, "result values");
    assert!(stamp.server.as_deref().is_some_and(|s| s.starts_with("127.0.0.1:")));
    let url = server_url();
    let password = url.split_once('@').and_then(|(head, _)| head.rsplit_once(':')).map(|(_, p)| p).expect("password");
    assert!(!provenance.path.contains(password), "the password must never be stamped: {}", provenance.path);

    // The same rows give the same stamp; a changed price gives another.
    let again = load_postgres(&server_url(), &query, &[]).expect("reload");
    assert_eq!(again.provenance().sha256, provenance.sha256);
    let changed = format!(
        "{} ORDER BY seq",
        select_all(&names)
            .replace("\"sale_price\"", "CASE WHEN seq = 7 THEN sale_price + 1 ELSE sale_price END AS sale_price")
    );
    let other = load_postgres(&server_url(), &changed, &[]).expect("load changed");
    assert_ne!(other.provenance().sha256, provenance.sha256);
}

#[test]
fn a_parameterised_query_reads_only_its_rows() {
    let (csv, _, names) = demo_table();
    let query = format!("{} WHERE sale_date >= $1 AND district = $2 ORDER BY seq", select_all(&names));
    let frame = load_postgres(&server_url(), &query, &["2025-01-01", "Wickerholm"]).expect("query with parameters");
    let dates = csv.date_column("sale_date").expect("dates");
    let districts = csv.label_column("district").expect("districts");
    let cutoff = plumbline::data::dates::parse_iso_date("2025-01-01").expect("date");
    let expected = dates
        .iter()
        .zip(&districts)
        .filter(|(d, g)| d.is_some_and(|d| d >= cutoff) && g.as_deref() == Some("Wickerholm"))
        .count();
    assert!(expected > 0);
    assert_eq!(frame.height(), expected);
    assert_eq!(frame.provenance().source.clone().expect("stamp").parameters, vec!["2025-01-01", "Wickerholm"]);

    let mistyped =
        load_postgres(&server_url(), &query, &["last spring", "Wickerholm"]).expect_err("not a date").to_string();
    assert!(mistyped.contains("parameter 1") && mistyped.contains("YYYY-MM-DD"), "{mistyped}");
}

#[test]
fn numeric_columns_read_as_their_nearest_doubles() {
    let frame = load_postgres(
        &server_url(),
        "SELECT v::numeric AS exact, v AS double FROM (VALUES (312500.0::float8), (-1234.5678), (0.1), (1e-7), (123456789.125)) AS t(v)",
        &[],
    )
    .expect("numeric query");
    assert_eq!(frame.numeric_column("exact").expect("numeric"), frame.numeric_column("double").expect("double"));
}

#[test]
fn a_bad_query_is_reported_with_the_servers_message() {
    let message = load_postgres(&server_url(), "SELECT * FROM no_such_sales", &[]).expect_err("bad query").to_string();
    assert!(message.contains("could not prepare the query") && message.contains("no_such_sales"), "{message}");
    let unsupported = load_postgres(&server_url(), "SELECT now() AS stamp", &[]).expect_err("timestamp").to_string();
    assert!(unsupported.contains("column `stamp`") && unsupported.contains("cast it in the query"), "{unsupported}");
}

#[test]
fn a_wrong_password_is_reported_and_never_shown() {
    let url = server_url();
    let (head, host) = url.split_once('@').expect("USER:PASSWORD@HOST");
    let (user, _) = head.rsplit_once(':').expect("a password in the test URL");
    let wrong = format!("{user}:not-the-password@{host}");
    let message = load_postgres(&wrong, "SELECT 1 AS one", &[]).expect_err("wrong password").to_string();
    assert!(
        message.contains("password authentication failed") && message.contains("Check the user and password"),
        "{message}"
    );
    assert!(!message.contains("not-the-password"), "{message}");
}

#[test]
fn no_server_is_reported_with_what_to_check() {
    let message = load_postgres("postgresql://plumbline@127.0.0.1:1/wrenmoor", "SELECT 1 AS one", &[])
        .expect_err("nothing listens on port 1")
        .to_string();
    assert!(message.contains("could not connect") && message.contains("server is running"), "{message}");
}

#[test]
fn a_connection_dropped_mid_read_gives_an_error_and_no_frame() {
    let url = server_url();
    let marker = "plumbline-drop-test";
    let killer = {
        let url = url.clone();
        std::thread::spawn(move || {
            let mut admin = postgres::Client::connect(&url, postgres::NoTls).expect("second connection");
            // Wait until the slow query is running, then end its backend (as an administrator would).
            for _ in 0..200 {
                let ended: bool = admin
                    .query_one(
                        "SELECT count(pg_terminate_backend(pid)) > 0 FROM pg_stat_activity \
                         WHERE query LIKE '%' || $1 || '%' AND pid <> pg_backend_pid() AND state = 'active'",
                        &[&marker],
                    )
                    .expect("terminate")
                    .get(0);
                if ended {
                    return;
                }
                std::thread::sleep(std::time::Duration::from_millis(50));
            }
            panic!("the slow query never started");
        })
    };
    // 20,000 rows, the server pausing 30 s after the first half has been sent.
    let query = format!(
        "SELECT g, (CASE WHEN g = 10000 THEN pg_sleep(30) END) IS NULL AS waited \
         FROM generate_series(1, 20000) AS g /* {marker} */"
    );
    let started = std::time::Instant::now();
    let result = load_postgres(&url, &query, &[]);
    killer.join().expect("the terminating thread");
    let message = result.expect_err("the connection was ended").to_string();
    assert!(started.elapsed().as_secs() < 25, "the read should stop when the connection ends");
    assert!(message.contains("nothing was loaded"), "{message}");
}
