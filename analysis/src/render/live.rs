//! Displays shown mid-cell, and displays updated in place.
//!
//! Inside the Plumbline kernel a cell talks to the front end through typed
//! [`DisplayCommand`]s, each written as one output line: the marker
//! [`KERNEL_DISPLAY_MARKER`] (which carries the format's version), then the
//! command as JSON. The kernel reads the line back through the same type and
//! turns it into the protocol's `display_data` (with a `display_id` when the
//! display may change), `update_display_data` or `clear_output`. Outside the
//! kernel (a program, a terminal, the test runner) the same calls print plain
//! text instead.
//!
//! [`LiveProgress`] builds on this: long work (cross-validation, a batch of
//! fits) shows one progress display that is redrawn in place.

use super::bundle::{MimeBundle, Report};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::io::Write;
use std::sync::atomic::{AtomicU64, Ordering};
use std::time::Instant;

/// Environment variable set by the Plumbline kernel for its cells.
pub const KERNEL_DISPLAY_ENV: &str = "PLUMBLINE_KERNEL_DISPLAY";
/// Start of an output line carrying a [`DisplayCommand`] (version 2 of the
/// line format; version 1 carried a bare bundle).
pub const KERNEL_DISPLAY_MARKER: &str = "\u{1e}plumbline-display/2 ";

/// One instruction from a cell to the notebook front end.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "op", rename_all = "snake_case")]
pub enum DisplayCommand {
    /// Show a new display; with a `display_id` it can be updated later.
    Show {
        /// MIME type → content.
        data: BTreeMap<String, String>,
        /// Identifier for later updates.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        display_id: Option<String>,
    },
    /// Replace the content of the display shown with `display_id`.
    Update {
        /// MIME type → content.
        data: BTreeMap<String, String>,
        /// The display to replace.
        display_id: String,
    },
    /// Clear the cell's output; with `wait`, only when the next output comes
    /// (avoids flicker).
    Clear {
        /// Clear when the next output arrives rather than now.
        wait: bool,
    },
}

impl DisplayCommand {
    /// The output line carrying this command (marker + JSON, no newline).
    pub fn to_line(&self) -> String {
        // Maps of strings and a tag: serialising cannot fail.
        format!("{KERNEL_DISPLAY_MARKER}{}", serde_json::to_string(self).unwrap_or_default())
    }

    /// Reads a command back from an output line (newline allowed); `None`
    /// when the line is ordinary output.
    pub fn from_line(line: &str) -> Option<Self> {
        let json = line.trim_end_matches('\n').strip_prefix(KERNEL_DISPLAY_MARKER)?;
        serde_json::from_str(json).ok()
    }
}

fn in_kernel() -> bool {
    std::env::var_os(KERNEL_DISPLAY_ENV).is_some()
}

/// Writes `command` for the kernel, or `plain` (when given) elsewhere.
fn send(command: DisplayCommand, plain: Option<&str>) {
    let mut out = std::io::stdout().lock();
    if in_kernel() {
        let _ = writeln!(out, "{}", command.to_line());
    } else if let Some(text) = plain {
        let _ = writeln!(out, "{text}");
    }
    let _ = out.flush();
}

/// Shows a value now, mid-cell, as its own display (a cell may show several).
/// Outside the kernel its plain-text rendering is printed.
pub fn show(value: &impl Report) {
    let bundle = value.bundle();
    let plain = bundle.get("text/plain").map(str::to_string);
    send(DisplayCommand::Show { data: bundle.entries, display_id: None }, plain.as_deref());
}

/// Shows a value as a display that [`update`] can replace later.
pub fn show_updatable(value: &impl Report, display_id: &str) {
    let bundle = value.bundle();
    let plain = bundle.get("text/plain").map(str::to_string);
    send(DisplayCommand::Show { data: bundle.entries, display_id: Some(display_id.to_string()) }, plain.as_deref());
}

/// Replaces the display shown with `display_id` (in the kernel); prints the
/// new plain text elsewhere.
pub fn update(value: &impl Report, display_id: &str) {
    let bundle = value.bundle();
    let plain = bundle.get("text/plain").map(str::to_string);
    send(DisplayCommand::Update { data: bundle.entries, display_id: display_id.to_string() }, plain.as_deref());
}

/// Clears the cell's output so far (in the kernel; nothing elsewhere).
pub fn clear_output() {
    send(DisplayCommand::Clear { wait: false }, None);
}

/// A display id unique in this process.
fn fresh_display_id(kind: &str) -> String {
    static NEXT: AtomicU64 = AtomicU64::new(1);
    format!("plumbline-{kind}-{}-{}", std::process::id(), NEXT.fetch_add(1, Ordering::Relaxed))
}

/// One progress display for long work, redrawn in place in the kernel.
///
/// ```
/// use plumbline::render::LiveProgress;
/// let mut progress = LiveProgress::new("Cross-validation", "folds");
/// for fold in 1..=5 {
///     progress.update(fold, 5);
/// }
/// progress.finish();
/// ```
/// Outside the kernel each update prints one line.
#[derive(Debug)]
pub struct LiveProgress {
    title: String,
    unit: String,
    display_id: String,
    started: Instant,
    shown: bool,
    done: usize,
    total: usize,
}

impl LiveProgress {
    /// A progress display for `title`, counting `unit` (e.g. "folds").
    pub fn new(title: &str, unit: &str) -> Self {
        Self {
            title: title.to_string(),
            unit: unit.to_string(),
            display_id: fresh_display_id("progress"),
            started: Instant::now(),
            shown: false,
            done: 0,
            total: 0,
        }
    }

    /// Reports `done` of `total`; the first call shows the display, later
    /// calls replace it.
    pub fn update(&mut self, done: usize, total: usize) {
        self.done = done;
        self.total = total;
        if self.shown {
            update(self, &self.display_id);
        } else {
            self.shown = true;
            show_updatable(self, &self.display_id);
        }
    }

    /// A callback for library functions that report `(done, total)`, such as
    /// `cross_validate`.
    pub fn callback(&mut self) -> impl FnMut(usize, usize) + '_ {
        move |done, total| self.update(done, total)
    }

    /// Marks the work finished (the display then says how long it took).
    pub fn finish(&mut self) {
        self.total = self.total.max(self.done);
        self.done = self.total;
        self.update(self.done, self.total);
    }

    fn fraction(&self) -> f64 {
        if self.total == 0 {
            0.0
        } else {
            (self.done as f64 / self.total as f64).clamp(0.0, 1.0)
        }
    }

    fn clock(&self) -> String {
        let s = self.started.elapsed().as_secs();
        format!("{}:{:02}", s / 60, s % 60)
    }
}

impl Report for LiveProgress {
    fn bundle(&self) -> MimeBundle {
        let percent = 100.0 * self.fraction();
        let plain =
            format!("{}: {} of {} {} ({percent:.0}%), {}", self.title, self.done, self.total, self.unit, self.clock());
        let html = format!(
            "<div class=\"plumbline-progress\" style=\"font:13px sans-serif;max-width:28em\">\
             <div>{} — {} of {} {} · {}</div>\
             <div style=\"background:#e6e1d8;height:6px;border-radius:3px\">\
             <div style=\"background:#3d6b5a;height:6px;border-radius:3px;width:{percent:.1}%\"></div></div></div>",
            super::html::escape(&self.title),
            self.done,
            self.total,
            super::html::escape(&self.unit),
            self.clock()
        );
        MimeBundle::text_and_html(plain, html)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn commands_read_back_through_the_same_type() {
        let mut data = BTreeMap::new();
        data.insert("text/plain".to_string(), "3 of 10".to_string());
        for command in [
            DisplayCommand::Show { data: data.clone(), display_id: None },
            DisplayCommand::Show { data: data.clone(), display_id: Some("p-1".into()) },
            DisplayCommand::Update { data, display_id: "p-1".into() },
            DisplayCommand::Clear { wait: true },
        ] {
            let line = command.to_line() + "\n";
            assert_eq!(DisplayCommand::from_line(&line), Some(command));
        }
        assert_eq!(DisplayCommand::from_line("ordinary output"), None);
    }

    #[test]
    fn progress_says_how_far() {
        let mut progress = LiveProgress::new("Cross-validation", "folds");
        progress.done = 3;
        progress.total = 10;
        let plain = progress.bundle().get("text/plain").unwrap_or_default().to_string();
        assert!(plain.starts_with("Cross-validation: 3 of 10 folds (30%)"), "{plain}");
    }
}
