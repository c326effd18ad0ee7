//! Contract of the typed document readers (`plumbline diff` and every reader
//! of a document we emit).
//!
//! The input is a JSON text. Its `schema` field chooses the reader, as
//! `plumbline diff` chooses it; a document of no known schema is offered to
//! every reader, and each must refuse it naming the schema. A reader:
//! - refuses with [`plumbline::Error::Document`] naming the document and the
//!   fault (a field, the schema, the version), or
//! - returns a typed document that, written out again and read back through
//!   the same reader, gives the same JSON.
//!
//! Documents that `plumbline diff` compares (fits, ratio studies, value rolls,
//! models by group) are then filed into a run; that run compared with itself
//! must show nothing moved and no threshold crossed, and its drift report
//! must render as text and HTML.

use crate::places::assert_names_a_place;
use plumbline::appeal::ParcelPages;
use plumbline::diagnose::SpatialCheck;
use plumbline::documents::{
    read_comparison, read_document, read_fit, read_ratio_study, DocumentKind, COMPARISON_SCHEMA, FIT_SCHEMA,
    RATIO_STUDY_SCHEMA,
};
use plumbline::drift::{drift, RunResults};
use plumbline::local::LocalSummary;
use plumbline::strata::StratifiedSummary;
use plumbline::value::{HoldoutAccuracy, SalesChasingCheck, TierStudy, ValueAccuracy, ValueRoll};
use plumbline::{Error, Result};
use serde::Serialize;
use serde_json::Value;

const ORIGIN: &str = "fuzzed.json";

/// Reads `data` as a JSON document through the reader its schema names.
pub fn documents(data: &[u8]) {
    let Ok(document) = serde_json::from_slice::<Value>(data) else { return };
    let schema = document.get("schema").and_then(Value::as_str).map(str::to_owned);
    for reader in readers() {
        // A ratio study written before versioning had no schema, and reads as version 1.
        let chosen = match schema.as_deref() {
            Some(name) => name == reader.schema,
            None => reader.schema == RATIO_STUDY_SCHEMA,
        };
        match (reader.read)(document.clone()) {
            Err(error) => assert_names_a_place(&error, Some(ORIGIN), reader.schema),
            Ok(_) if !chosen => panic!("the {} reader accepted a document of schema {schema:?}", reader.schema),
            Ok(first) => {
                let again = (reader.read)(first.clone())
                    .unwrap_or_else(|e| panic!("the {} reader refuses what it wrote: {e}\n{first}", reader.schema));
                assert_eq!(first, again, "the {} document changed when written and read again", reader.schema);
            }
        }
    }
    compared_with_itself(&document);
}

/// One reader: its schema and a function that reads and writes back.
struct Reader {
    schema: &'static str,
    read: fn(Value) -> Result<Value>,
}

fn written<T: Serialize>(document: T) -> Result<Value> {
    serde_json::to_value(document).map_err(|e| Error::Document {
        what: "the document read".into(),
        reason: format!("cannot be written again: {e}"),
    })
}

fn kind<T: DocumentKind + Serialize>(document: Value) -> Result<Value> {
    written(read_document::<T>(document, ORIGIN)?)
}

fn readers() -> Vec<Reader> {
    vec![
        Reader { schema: FIT_SCHEMA, read: |d| written(read_fit(d, ORIGIN)?) },
        Reader { schema: COMPARISON_SCHEMA, read: |d| written(read_comparison(d, ORIGIN)?) },
        Reader { schema: RATIO_STUDY_SCHEMA, read: |d| written(read_ratio_study(d, ORIGIN)?) },
        Reader { schema: SpatialCheck::SCHEMA, read: kind::<SpatialCheck> },
        Reader { schema: TierStudy::SCHEMA, read: kind::<TierStudy> },
        Reader { schema: ValueAccuracy::SCHEMA, read: kind::<ValueAccuracy> },
        Reader { schema: HoldoutAccuracy::SCHEMA, read: kind::<HoldoutAccuracy> },
        Reader { schema: ValueRoll::SCHEMA, read: kind::<ValueRoll> },
        Reader { schema: SalesChasingCheck::SCHEMA, read: kind::<SalesChasingCheck> },
        Reader { schema: ParcelPages::SCHEMA, read: kind::<ParcelPages> },
        Reader { schema: StratifiedSummary::SCHEMA, read: kind::<StratifiedSummary> },
        Reader { schema: LocalSummary::SCHEMA, read: kind::<LocalSummary> },
    ]
}

/// Files the document into a run as `plumbline diff` does and compares the
/// run with itself: nothing may move, no threshold may be crossed.
fn compared_with_itself(document: &Value) {
    let mimes = [
        plumbline::schema::FIT_JSON_MIME,
        plumbline::schema::RATIO_JSON_MIME,
        plumbline::schema::VALUE_ROLL_JSON_MIME,
        plumbline::schema::STRATIFIED_FIT_JSON_MIME,
    ];
    for mime in mimes {
        let mut run = RunResults::new(ORIGIN);
        match run.add_document(mime, document) {
            Err(error) => assert_names_a_place(&error, Some(ORIGIN), mime),
            Ok(false) => panic!("`{mime}` is a type the run files, yet it was passed over"),
            Ok(true) => {
                let report = drift(&run, &run);
                if let Some(c) = report.moved_coefficients().next() {
                    panic!("a run compared with itself moved `{}`: {c:?}", c.term);
                }
                if let Some((group, c)) = report.moved_group_coefficients().next() {
                    panic!("a run compared with itself moved `{}` in `{group}`", c.term);
                }
                if let Some(s) = report.crossed_thresholds().next() {
                    panic!("a run compared with itself crossed a threshold: {s:?}");
                }
                let _ = plumbline::render::drift_text(&report);
                let _ = plumbline::render::drift_html(&report);
                serde_json::to_string(&report).unwrap_or_else(|e| panic!("the drift report cannot be written: {e}"));
            }
        }
    }
}
