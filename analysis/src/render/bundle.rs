//! MIME bundles and the one display trait.
//!
//! A [`MimeBundle`] maps MIME types to text (`text/plain`, `text/html`,
//! `image/svg+xml`, `application/vnd.plumbline.fit+json`, …). [`Report`] is the
//! single trait that gives a result its bundle.
//!
//! **How a cell's last value is shown.** The notebook engine builds a cell
//! whose last line is a value `v` with the call `(v).evcxr_display()`; when
//! that does not compile it builds the cell a second time, printing `v` with
//! `Debug` — twice the build time for every cell that ends in a number, a
//! string or a vector. So every value has that method, found by Rust's
//! method lookup in this order:
//! 1. our results: an inherent `evcxr_display` (written by [`shown_in_cells!`](crate::shown_in_cells)
//!    for each [`Report`] type), which writes the whole bundle; inherent
//!    methods win over trait methods, so there is no ambiguity;
//! 2. every other value with `Debug`: the one blanket trait [`CellValue`],
//!    which writes its `Debug` text as `text/plain`, as the engine's second
//!    build would have (and nothing for `()`).
//!
//! A value with neither still falls back to the engine's second build (and
//! fails there too, for want of `Debug`). Exactly one trait in scope has an
//! `evcxr_display` method: a second would make the call ambiguous.

pub use crate::schema::{COMPARISON_JSON_MIME, DRIFT_JSON_MIME, FIT_JSON_MIME, RATIO_JSON_MIME};
use std::collections::BTreeMap;
use std::io::Write;

/// Renderings of one result, by MIME type, in a stable order.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct MimeBundle {
    /// MIME type → content.
    pub entries: BTreeMap<String, String>,
}

impl MimeBundle {
    /// A bundle with plain text and HTML — what every result has.
    pub fn text_and_html(plain: String, html: String) -> Self {
        let mut entries = BTreeMap::new();
        entries.insert("text/plain".to_string(), plain);
        entries.insert("text/html".to_string(), html);
        Self { entries }
    }

    /// Adds (or replaces) one rendering.
    pub fn with(mut self, mime: &str, content: String) -> Self {
        self.entries.insert(mime.to_string(), content);
        self
    }

    /// The rendering for `mime`, if present.
    pub fn get(&self, mime: &str) -> Option<&str> {
        self.entries.get(mime).map(String::as_str)
    }
}

/// Anything that can show itself in a notebook, a terminal or a report.
///
/// A type implementing it also gets its notebook display from
/// [`shown_in_cells!`](crate::shown_in_cells) (the supertrait [`ShownInCells`] makes forgetting
/// that a compile error): `shown_in_cells!(MyResult);`.
pub trait Report: ShownInCells {
    /// Every rendering of the value.
    fn bundle(&self) -> MimeBundle;
}

/// Marks a type that has the inherent `evcxr_display` written by
/// [`shown_in_cells!`](crate::shown_in_cells); implement it only through that macro.
pub trait ShownInCells {}

/// Gives each listed [`Report`] type an inherent `evcxr_display` that writes
/// its whole bundle in the notebook engine's content-block format (see the
/// module documentation), and marks it [`ShownInCells`]. Use in the crate
/// that defines the type (a notebook cell for a type defined in cells).
#[macro_export]
macro_rules! shown_in_cells {
    ($($shown:ty),+ $(,)?) => {
        $(
            impl $shown {
                /// Writes this result's bundle for the notebook engine, which
                /// calls it on a cell's last value.
                pub fn evcxr_display(&self) {
                    $crate::render::emit(&$crate::render::Report::bundle(self));
                }
            }
            impl $crate::render::ShownInCells for $shown {}
        )+
    };
}

/// The notebook engine's display call for every value that is not one of
/// our results: its `Debug` text as `text/plain` (nothing for `()`). See the
/// module documentation for why every value needs one.
pub trait CellValue {
    /// Writes the value's `Debug` text for the notebook engine.
    fn evcxr_display(&self);
}

impl<T: std::fmt::Debug + ?Sized> CellValue for T {
    // Compiled into every cell that ends in such a value, so it does no more
    // than format; the writing is `emit_plain_text`, compiled once here.
    fn evcxr_display(&self) {
        if std::any::type_name::<T>() != "()" {
            emit_plain_text(&format!("{self:?}"));
        }
    }
}

/// Writes `text` as the engine's `text/plain` content block (the one
/// rendering a value without a [`Report`] has).
pub fn emit_plain_text(text: &str) {
    let mut out = std::io::stdout().lock();
    write_block(&mut out, "text/plain", text);
    let _ = out.flush();
}

/// Writes a bundle as engine content blocks (`EVCXR_BEGIN_CONTENT mime` …
/// `EVCXR_END_CONTENT`), one per MIME type.
pub fn emit(bundle: &MimeBundle) {
    let mut out = std::io::stdout().lock();
    for (mime, content) in &bundle.entries {
        write_block(&mut out, mime, content);
    }
    let _ = out.flush();
}

/// One engine content block: `EVCXR_BEGIN_CONTENT mime`, the content, `EVCXR_END_CONTENT`.
fn write_block(out: &mut impl Write, mime: &str, content: &str) {
    let _ = write!(out, "EVCXR_BEGIN_CONTENT {mime}\n{content}\nEVCXR_END_CONTENT\n");
}
