//! Executing a notebook headlessly with our engine (`plumbline run`).
//!
//! The runner drives the same engine session as the kernel, in process (no
//! sockets): each code cell in order, outputs gathered as nbformat outputs —
//! streams (consecutive lines of one stream merged), `show` displays, the
//! cell's value as `execute_result`, and the error. The run stops at the
//! first failing cell; the notebook written then holds every output up to and
//! including the error, and the later cells without outputs, so nothing that
//! ran is lost and nothing stale is shown. Cells run with the notebook's
//! folder as the working directory, as in a notebook front end.

use super::document::{CellKind, Notebook};
use super::inputs::AppliedInput;
use super::record::{RunRecord, RunStatus, RUN_RECORD_SCHEMA, RUN_RECORD_SCHEMA_VERSION};
use crate::eval::{bundle_json, display_command, CellError, DisplayCommand, EngineConfig, Session, StreamLine};
use serde_json::{json, Value};
use std::collections::HashMap;
use std::io::Write;
use std::time::{Duration, Instant};

/// A cell that failed, as the runner reports it.
#[derive(Debug, Clone)]
pub struct FailedCell {
    /// 1-based cell number in the notebook (counting every cell).
    pub cell: usize,
    /// The first line of its source.
    pub first_line: String,
    /// The engine's error.
    pub error: CellError,
}

/// What a run did.
#[derive(Debug, Clone)]
pub struct RunOutcome {
    /// When the run started (UTC, RFC 3339, whole seconds).
    pub started_at: String,
    /// Code cells executed (including a failed one).
    pub executed: usize,
    /// Code cells in the notebook.
    pub code_cells: usize,
    /// Wall-clock time of the run.
    pub elapsed: Duration,
    /// The failure that stopped the run, if any.
    pub failure: Option<FailedCell>,
}

/// Where the runner reports progress: one line per cell.
pub trait Progress {
    /// Cell `position` of `total` code cells (notebook cell `cell`) starts.
    fn cell_started(&mut self, position: usize, total: usize, cell: usize, first_line: &str, elapsed: Duration);

    /// Whether to print the engine's preparation (its first build takes
    /// minutes) as progress lines on standard error.
    fn wants_engine_progress(&self) -> bool;
}

/// Progress lines on standard error: `[3/27  0:42] cell 5  let model = …`.
pub struct StderrProgress;

/// `m:ss` of a duration.
pub fn clock(elapsed: Duration) -> String {
    let s = elapsed.as_secs();
    format!("{}:{:02}", s / 60, s % 60)
}

impl Progress for StderrProgress {
    fn cell_started(&mut self, position: usize, total: usize, cell: usize, first_line: &str, elapsed: Duration) {
        let shown: String = first_line.chars().take(60).collect();
        let mut err = std::io::stderr().lock();
        let _ = writeln!(err, "[{position:>2}/{total}  {}] cell {cell:<3} {shown}", clock(elapsed));
        let _ = err.flush();
    }

    fn wants_engine_progress(&self) -> bool {
        true
    }
}

/// Progress that reports nothing.
pub struct NoProgress;

impl Progress for NoProgress {
    fn cell_started(&mut self, _: usize, _: usize, _: usize, _: &str, _: Duration) {}

    fn wants_engine_progress(&self) -> bool {
        false
    }
}

fn first_code_line(source: &str) -> String {
    source.lines().map(str::trim).find(|l| !l.is_empty()).unwrap_or("").to_string()
}

/// Turns the output lines of one cell into nbformat outputs: streams merged,
/// displays kept, an updated display replaced where it stands, a clear
/// removing what came before.
fn stream_outputs(lines: Vec<StreamLine>) -> Vec<Value> {
    let mut outputs: Vec<Value> = Vec::new();
    let mut by_display_id: HashMap<String, usize> = HashMap::new();
    for line in lines {
        match display_command(&line.text) {
            Some(DisplayCommand::Show { data, display_id }) => {
                if let Some(id) = display_id {
                    by_display_id.insert(id, outputs.len());
                }
                outputs.push(json!({ "output_type": "display_data", "data": bundle_json(data), "metadata": {} }));
                continue;
            }
            Some(DisplayCommand::Update { data, display_id }) => {
                if let Some(&at) = by_display_id.get(&display_id) {
                    outputs[at]["data"] = Value::Object(bundle_json(data));
                }
                continue;
            }
            Some(DisplayCommand::Clear { .. }) => {
                outputs.clear();
                by_display_id.clear();
                continue;
            }
            None => {}
        }
        if let Some(last) = outputs.last_mut() {
            if last["output_type"] == "stream" && last["name"] == line.name {
                let text = format!("{}{}", last["text"].as_str().unwrap_or(""), line.text);
                last["text"] = Value::String(text);
                continue;
            }
        }
        outputs.push(json!({ "output_type": "stream", "name": line.name, "text": line.text }));
    }
    outputs
}

/// Runs every code cell of `notebook` in a fresh engine session and fills in
/// the outputs. `applied` (the inputs set for this run) is recorded in the
/// notebook's metadata with the run's time and outcome.
pub fn execute(
    notebook: &mut Notebook,
    config: EngineConfig,
    applied: &[AppliedInput],
    progress: &mut dyn Progress,
) -> RunOutcome {
    let started = Instant::now();
    let started_at = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Secs, true);
    // Lines printed after their cell ended (by threads it started) join the next cell's output.
    let (stray_tx, mut stray_rx) = tokio::sync::mpsc::unbounded_channel::<StreamLine>();
    let session =
        Session::start(config, stray_tx, crate::eval::preparation::lines_on_stderr(progress.wants_engine_progress()));
    let code_cells: Vec<usize> = (0..notebook.len()).filter(|&i| notebook.kind(i) == CellKind::Code).collect();
    let mut outcome =
        RunOutcome { started_at, executed: 0, code_cells: code_cells.len(), elapsed: Duration::ZERO, failure: None };
    let mut execution_count = 0u64;
    for (position, &cell) in code_cells.iter().enumerate() {
        if outcome.failure.is_some() {
            notebook.set_outputs(cell, Vec::new(), None);
            continue;
        }
        let source = notebook.source(cell);
        if source.trim().is_empty() {
            notebook.set_outputs(cell, Vec::new(), None);
            continue;
        }
        progress.cell_started(position + 1, code_cells.len(), cell + 1, &first_code_line(&source), started.elapsed());
        execution_count += 1;
        let mut lines = Vec::new();
        while let Ok(line) = stray_rx.try_recv() {
            lines.push(line);
        }
        let (cell_lines, result) = session.execute_to_end(&source);
        lines.extend(cell_lines);
        outcome.executed += 1;
        let mut outputs = stream_outputs(lines);
        if !result.data.is_empty() {
            let data = bundle_json(result.data);
            outputs.push(json!({ "output_type": "execute_result", "data": data, "metadata": {}, "execution_count": execution_count }));
        }
        if let Some(error) = result.error {
            outputs.push(json!({
                "output_type": "error",
                "ename": error.ename,
                "evalue": error.evalue,
                "traceback": error.traceback,
            }));
            outcome.failure = Some(FailedCell { cell: cell + 1, first_line: first_code_line(&source), error });
        }
        notebook.set_outputs(cell, outputs, Some(execution_count));
    }
    outcome.elapsed = started.elapsed();
    let record = RunRecord {
        schema: RUN_RECORD_SCHEMA.into(),
        schema_version: RUN_RECORD_SCHEMA_VERSION,
        started_at: outcome.started_at.clone(),
        seconds: (outcome.elapsed.as_secs_f64() * 10.0).round() / 10.0,
        plumbline_version: env!("CARGO_PKG_VERSION").into(),
        inputs_set: applied.to_vec(),
        cells_executed: outcome.executed,
        status: if outcome.failure.is_some() { RunStatus::StoppedAtError } else { RunStatus::Complete },
    };
    // The record holds strings and numbers only; serializing it cannot fail.
    if let Err(e) = record.write_into(notebook) {
        eprintln!("warning: the run record could not be written into the notebook's metadata: {e}");
    }
    outcome
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn stream_lines_merge_and_display_lines_become_displays() {
        let line = |name: &'static str, text: &str| StreamLine { name, text: text.to_string() };
        let mut data = std::collections::BTreeMap::new();
        data.insert("text/plain".to_string(), "fit".to_string());
        data.insert("application/vnd.plumbline.fit+json".to_string(), "{\"a\":1}".to_string());
        let display = DisplayCommand::Show { data, display_id: None }.to_line() + "\n";
        let outputs = stream_outputs(vec![
            line("stdout", "a\n"),
            line("stdout", "b\n"),
            line("stdout", &display),
            line("stderr", "c\n"),
        ]);
        assert_eq!(outputs.len(), 3);
        assert_eq!(outputs[0]["text"], "a\nb\n");
        assert_eq!(outputs[1]["output_type"], "display_data");
        assert_eq!(outputs[1]["data"]["application/vnd.plumbline.fit+json"]["a"], 1);
        assert_eq!(outputs[2]["name"], "stderr");
    }

    #[test]
    fn clock_reads_minutes_and_seconds() {
        assert_eq!(clock(Duration::from_secs(83)), "1:23");
    }
}
