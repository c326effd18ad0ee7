//! The first half of every contract: a refusal names the place of the fault.
//!
//! A user who meets a refusal must be able to open the input at the fault: a
//! file line, a data row, a workbook cell, a column, a term, a document field
//! — or, for a binary file that cannot be decoded at all, the file itself.

use plumbline::Error;

/// The words by which a message names a place, besides the file's own name.
const PLACE_WORDS: &[&str] =
    &["line ", "row ", "cell ", "column `", "column ", "term `", "field", "sheet", "schema", "version", "document"];

/// Panics unless `error` is a typed refusal whose message names a place:
/// `file` (the name of the input file, if there is one) or one of the place
/// words (a line, row, cell, column, term, field…). An internal error that
/// reached the user unexplained (`Error::Frame`, a polars error passed
/// through) breaks the contract.
pub fn assert_names_a_place(error: &Error, file: Option<&str>, input: &str) {
    let message = error.to_string();
    if let Error::Frame(inner) = error {
        panic!("{input}: an internal frame error reached the user without a place: {inner}");
    }
    let named_file = file.is_some_and(|name| message.contains(name));
    let named_place = PLACE_WORDS.iter().any(|word| message.contains(word));
    assert!(named_file || named_place, "{input}: the refusal names no place: {message}");
}
