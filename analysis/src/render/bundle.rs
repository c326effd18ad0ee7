//! MIME bundles and the one display trait.
//!
//! A [`MimeBundle`] maps MIME types to text (`text/plain`, `text/html`,
//! `image/svg+xml`, `application/vnd.plumbline.fit+json`, …). [`Report`] is the
//! single trait that gives a result its bundle; its `evcxr_display` method is
//! what the notebook engine calls on a cell's last value, so a value shows
//! richly without any other trait in scope (two traits with that method would
//! make the engine's call ambiguous).

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
pub trait Report {
    /// Every rendering of the value.
    fn bundle(&self) -> MimeBundle;

    /// Writes the bundle in the notebook engine's content-block format on
    /// standard output. Called by the engine on a cell's last value.
    fn evcxr_display(&self) {
        emit(&self.bundle());
    }
}

/// Writes a bundle as engine content blocks (`EVCXR_BEGIN_CONTENT mime` …
/// `EVCXR_END_CONTENT`), one per MIME type.
pub fn emit(bundle: &MimeBundle) {
    let mut out = std::io::stdout().lock();
    for (mime, content) in &bundle.entries {
        let _ = write!(out, "EVCXR_BEGIN_CONTENT {mime}\n{content}\nEVCXR_END_CONTENT\n");
    }
    let _ = out.flush();
}
