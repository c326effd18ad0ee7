//! Notebook documents (nbformat 4): reading, the pieces the runner changes,
//! and an atomic write.
//!
//! The document is kept as JSON so that every field we do not touch (cell ids,
//! attachments, front-end metadata) survives a run unchanged.

use serde_json::{json, Map, Value};
use std::path::{Path, PathBuf};

/// Why a notebook could not be read or written.
#[derive(Debug, thiserror::Error)]
pub enum NotebookError {
    /// The file could not be read.
    #[error("cannot read the notebook `{path}`: {reason}")]
    Unreadable { path: PathBuf, reason: String },
    /// The file is not a JSON notebook of format 4.
    #[error("`{path}` is not a Jupyter notebook of format 4: {reason}")]
    NotANotebook { path: PathBuf, reason: String },
    /// The output could not be written; nothing at the destination changed.
    #[error("cannot write `{path}`: {reason} (nothing at that path was changed)")]
    Unwritable { path: PathBuf, reason: String },
}

/// Kind of a notebook cell.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CellKind {
    /// Code to execute.
    Code,
    /// Markdown prose.
    Markdown,
    /// Raw text, passed through.
    Raw,
}

/// A notebook of format 4, kept as its JSON document.
#[derive(Debug, Clone)]
pub struct Notebook {
    root: Value,
}

/// Joins a multiline field that nbformat stores as a string or a list of lines.
pub fn multiline(value: &Value) -> String {
    match value {
        Value::String(s) => s.clone(),
        Value::Array(parts) => parts.iter().filter_map(Value::as_str).collect(),
        _ => String::new(),
    }
}

impl Notebook {
    /// Reads and checks a notebook file.
    pub fn read(path: &Path) -> Result<Notebook, NotebookError> {
        let text = std::fs::read_to_string(path)
            .map_err(|e| NotebookError::Unreadable { path: path.to_path_buf(), reason: e.to_string() })?;
        Self::parse(&text).map_err(|reason| NotebookError::NotANotebook { path: path.to_path_buf(), reason })
    }

    /// Parses a notebook document.
    pub fn parse(text: &str) -> Result<Notebook, String> {
        Self::from_json(serde_json::from_str(text).map_err(|e| format!("invalid JSON ({e})"))?)
    }

    /// Checks an already parsed document is a notebook of format 4.
    pub fn from_json(root: Value) -> Result<Notebook, String> {
        match root.get("nbformat").and_then(Value::as_u64) {
            Some(4) => {}
            Some(other) => return Err(format!("format {other} (convert it to format 4 first)")),
            None => return Err("no `nbformat` field".into()),
        }
        if !root.get("cells").is_some_and(Value::is_array) {
            return Err("no `cells` list".into());
        }
        Ok(Notebook { root })
    }

    fn cells_value(&self) -> &[Value] {
        self.root["cells"].as_array().map(Vec::as_slice).unwrap_or(&[])
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.cells_value().len()
    }

    /// True when the notebook has no cells.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The kind of cell `index`.
    pub fn kind(&self, index: usize) -> CellKind {
        match self.cells_value().get(index).and_then(|c| c["cell_type"].as_str()) {
            Some("code") => CellKind::Code,
            Some("markdown") => CellKind::Markdown,
            _ => CellKind::Raw,
        }
    }

    /// The source text of cell `index`.
    pub fn source(&self, index: usize) -> String {
        self.cells_value().get(index).map(|c| multiline(&c["source"])).unwrap_or_default()
    }

    /// The outputs of cell `index` (empty for non-code cells).
    pub fn outputs(&self, index: usize) -> &[Value] {
        self.cells_value().get(index).and_then(|c| c["outputs"].as_array()).map(Vec::as_slice).unwrap_or(&[])
    }

    /// The execution count of cell `index`, if it ran.
    pub fn execution_count(&self, index: usize) -> Option<u64> {
        self.cells_value().get(index).and_then(|c| c["execution_count"].as_u64())
    }

    fn cell_mut(&mut self, index: usize) -> Option<&mut Map<String, Value>> {
        self.root["cells"].as_array_mut()?.get_mut(index)?.as_object_mut()
    }

    /// Replaces the source text of cell `index`.
    pub fn set_source(&mut self, index: usize, source: &str) {
        if let Some(cell) = self.cell_mut(index) {
            cell.insert("source".into(), Value::String(source.to_string()));
        }
    }

    /// Replaces the outputs and execution count of code cell `index`.
    pub fn set_outputs(&mut self, index: usize, outputs: Vec<Value>, execution_count: Option<u64>) {
        if let Some(cell) = self.cell_mut(index) {
            cell.insert("outputs".into(), Value::Array(outputs));
            cell.insert("execution_count".into(), execution_count.map_or(Value::Null, Value::from));
        }
    }

    /// The notebook-level metadata entry `key`, if any.
    pub fn metadata(&self, key: &str) -> Option<&Value> {
        self.root.get("metadata").and_then(|m| m.get(key))
    }

    /// Sets the notebook-level metadata entry `key`.
    pub fn set_metadata(&mut self, key: &str, value: Value) {
        if !self.root["metadata"].is_object() {
            self.root["metadata"] = json!({});
        }
        self.root["metadata"][key] = value;
    }

    /// The notebook's title: its first Markdown heading, else `fallback`.
    pub fn title(&self, fallback: &str) -> String {
        (0..self.len())
            .filter(|&i| self.kind(i) == CellKind::Markdown)
            .flat_map(|i| self.source(i).lines().map(str::to_string).collect::<Vec<_>>())
            .find_map(|line| line.strip_prefix("# ").map(|t| t.trim().to_string()))
            .unwrap_or_else(|| fallback.to_string())
    }

    /// Writes the notebook to `path` atomically: to a temporary file in the
    /// same folder, flushed, then renamed over the destination, so a crash or
    /// a full disk never leaves a half-written notebook.
    pub fn write_atomic(&self, path: &Path) -> Result<(), NotebookError> {
        let mut text = serde_json::to_string_pretty(&self.root)
            .map_err(|e| NotebookError::Unwritable { path: path.to_path_buf(), reason: e.to_string() })?;
        text.push('\n');
        write_file_atomic(path, text.as_bytes())
    }
}

/// Writes `bytes` to `path` through a temporary file in the same folder and a rename.
///
/// The temporary file is created private (mode 0600); before the rename it
/// gets the permissions of the file it replaces, or for a new file the usual
/// 0666 less the process's umask (0644 under the common umask 022), so a
/// written notebook or report is as readable as any file the user creates.
pub fn write_file_atomic(path: &Path, bytes: &[u8]) -> Result<(), NotebookError> {
    use std::io::Write;
    let unwritable = |reason: String| NotebookError::Unwritable { path: path.to_path_buf(), reason };
    let folder = match path.parent() {
        Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
        _ => PathBuf::from("."),
    };
    std::fs::create_dir_all(&folder).map_err(|e| unwritable(format!("cannot create the folder: {e}")))?;
    let mut file = tempfile::NamedTempFile::new_in(&folder).map_err(|e| unwritable(e.to_string()))?;
    file.write_all(bytes).map_err(|e| unwritable(e.to_string()))?;
    let permissions = match std::fs::metadata(path) {
        Ok(existing) => existing.permissions(),
        Err(_) => new_file_permissions(),
    };
    file.as_file().set_permissions(permissions).map_err(|e| unwritable(e.to_string()))?;
    file.as_file().sync_all().map_err(|e| unwritable(e.to_string()))?;
    file.persist(path).map_err(|e| unwritable(e.error.to_string()))?;
    Ok(())
}

/// 0666 less the process's umask: what `open(2)` gives a new file. The mask
/// is read from `/proc/self/status` (Linux 4.7+) rather than by setting it and
/// putting it back, which would race with other threads creating files; where
/// it cannot be read, the common mask 022 is assumed.
fn new_file_permissions() -> std::fs::Permissions {
    use std::os::unix::fs::PermissionsExt;
    let mask = std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|status| {
            let line = status.lines().find(|l| l.starts_with("Umask:"))?;
            u32::from_str_radix(line.trim_start_matches("Umask:").trim(), 8).ok()
        })
        .unwrap_or(0o022);
    std::fs::Permissions::from_mode(0o666 & !mask)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sources_given_as_line_lists_are_joined() {
        let nb = Notebook::parse(
            r##"{"nbformat":4,"nbformat_minor":5,"metadata":{},"cells":[
            {"cell_type":"markdown","metadata":{},"source":["# Study\n","text"]},
            {"cell_type":"code","metadata":{},"source":"let x = 1;","outputs":[],"execution_count":null}]}"##,
        )
        .unwrap();
        assert_eq!(nb.source(0), "# Study\ntext");
        assert_eq!(nb.kind(1), CellKind::Code);
        assert_eq!(nb.title("fallback"), "Study");
    }

    #[test]
    fn written_files_get_the_usual_permissions_not_the_temporary_files() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let fresh = dir.path().join("report.html");
        write_file_atomic(&fresh, b"<p>x</p>").unwrap();
        let mode = std::fs::metadata(&fresh).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode, new_file_permissions().mode() & 0o777);
        assert_ne!(mode, 0o600, "the temporary file's private mode leaked");
        assert_eq!(mode & 0o044, 0o044 & new_file_permissions().mode(), "group/other read as the umask allows");

        // Replacing a file keeps its permissions (here an unusual 0640).
        let kept = dir.path().join("study.ipynb");
        std::fs::write(&kept, "{}").unwrap();
        std::fs::set_permissions(&kept, std::fs::Permissions::from_mode(0o640)).unwrap();
        write_file_atomic(&kept, b"{\"new\": true}").unwrap();
        assert_eq!(std::fs::metadata(&kept).unwrap().permissions().mode() & 0o777, 0o640);
        assert_eq!(std::fs::read_to_string(&kept).unwrap(), "{\"new\": true}");
    }

    #[test]
    fn other_formats_are_refused_with_the_reason() {
        assert!(Notebook::parse(r#"{"nbformat":3,"worksheets":[]}"#).unwrap_err().contains("format 3"));
        assert!(Notebook::parse("not json").unwrap_err().contains("invalid JSON"));
    }
}
