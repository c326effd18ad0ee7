//! Contract of the compact term syntax (`--terms`, quick cells).
//!
//! Any text either is refused naming the term at fault (`term `…``), or
//! parses into terms with names, which fitted to a small fixed table of
//! sales end in finite estimates and standard errors or a typed refusal
//! (an unknown column, a transform outside its domain, a singular design…).

use crate::fitting::fits_with_finite_numbers_or_refuses;
use plumbline::data::{load_csv, CsvOptions, Frame};
use plumbline::model::{parse_term_list, ModelSpec};
use std::sync::OnceLock;

/// The fixed table: 24 sales with every kind of column a term can use
/// (numbers, integers, a category, a date, planar and geographic places).
fn sales() -> &'static Frame {
    static SALES: OnceLock<Frame> = OnceLock::new();
    SALES.get_or_init(|| {
        let mut text = String::from("price,area,age,lot,district,sale_date,x,y,lon,lat\n");
        for i in 0..24u32 {
            let f = f64::from(i);
            let district = ["Alder Rise", "Brackenfold", "Cinder Row"][i as usize % 3];
            text += &format!(
                "{},{},{},{},{district},2024-{:02}-{:02},{},{},{},{}\n",
                150_000.0 + 1_000.0 * f + 7_919.0 * f64::from((i * 7) % 11),
                900.0 + 35.0 * f + 13.0 * f64::from((i * 5) % 7),
                (i * 3) % 40,
                4_000.0 + 170.0 * f64::from((i * 11) % 13),
                1 + i % 12,
                1 + (i * 7) % 28,
                0.5 + 0.25 * f64::from(i % 6),
                0.75 + 0.2 * f64::from((i * 5) % 8),
                -93.6 + 0.01 * f64::from(i % 5),
                42.0 + 0.01 * f64::from((i * 3) % 7),
            );
        }
        let path = crate::scratch::file_with(text.as_bytes(), "terms-sales.csv");
        load_csv(&path, &CsvOptions::default()).unwrap_or_else(|e| panic!("the fixed sales table does not load: {e}"))
    })
}

/// Parses `data` (UTF-8) as a term list and fits log price on it.
pub fn term_syntax(data: &[u8]) {
    let Ok(text) = std::str::from_utf8(data) else { return };
    let terms = match parse_term_list(text) {
        Err(error) => {
            let message = error.to_string();
            assert!(message.contains("term `"), "a refused term list names no term: {message}");
            return;
        }
        Ok(terms) => terms,
    };
    let mut spec = ModelSpec::new("price").log_target();
    for term in terms {
        assert!(!term.label().is_empty(), "a parsed term has no name: {term:?}");
        assert!(term.columns().iter().all(|c| !c.is_empty()), "a parsed term names an empty column: {term:?}");
        spec = spec.term(term);
    }
    fits_with_finite_numbers_or_refuses(sales(), &spec, &format!("`{text}`"));
}
