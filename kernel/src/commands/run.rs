//! `plumbline run NOTEBOOK`: execute a study headlessly, save the executed
//! notebook (atomically, never over the input unless asked) and an HTML report.

use super::CommandError;
use crate::cli::RunArgs;
use crate::eval::EngineConfig;
use crate::notebook::document::{write_file_atomic, Notebook};
use crate::notebook::inputs::{apply, parse_assignment};
use crate::notebook::report::{report_html, RunFacts};
use crate::notebook::runner::{clock, execute, NoProgress, Progress, StderrProgress};
use std::path::{Path, PathBuf};

/// `path` made absolute against the current directory (the run changes it).
fn absolute(path: &Path) -> Result<PathBuf, CommandError> {
    std::path::absolute(path).map_err(|e| CommandError::Run(format!("cannot resolve `{}`: {e}", path.display())))
}

/// The default output: `study.ipynb` → `study.run.ipynb` beside it.
fn default_output(notebook: &Path) -> PathBuf {
    let stem = notebook.file_stem().map(|s| s.to_string_lossy().into_owned()).unwrap_or_else(|| "notebook".into());
    notebook.with_file_name(format!("{stem}.run.ipynb"))
}

/// Whether two paths name the same file (the second may not exist yet).
fn same_file(a: &Path, b: &Path) -> bool {
    let canonical = |p: &Path| -> Option<PathBuf> {
        let parent = p.parent()?.canonicalize().ok()?;
        Some(parent.join(p.file_name()?))
    };
    canonical(a).is_some_and(|x| Some(x) == canonical(b))
}

/// Runs `plumbline run`.
pub fn run(args: &RunArgs, config: EngineConfig) -> Result<String, CommandError> {
    let notebook_path = absolute(&args.notebook)?;
    let output = match (&args.output, args.in_place) {
        (_, true) => notebook_path.clone(),
        (Some(path), false) => absolute(path)?,
        (None, false) => default_output(&notebook_path),
    };
    if !args.in_place && same_file(&output, &notebook_path) {
        return Err(CommandError::Run(format!(
            "the output `{}` is the input notebook; choose another -o path, or pass --in-place to replace the input",
            output.display()
        )));
    }
    let html = args.html.as_deref().map(absolute).transpose()?;
    let mut notebook = Notebook::read(&notebook_path).map_err(|e| CommandError::Run(e.to_string()))?;
    let assignments = args
        .set
        .iter()
        .map(|s| parse_assignment(s))
        .collect::<Result<Vec<_>, _>>()
        .map_err(|e| CommandError::Run(e.to_string()))?;
    let applied = apply(&mut notebook, &assignments).map_err(|e| CommandError::Run(e.to_string()))?;

    // `config`'s paths are absolute (`EngineConfig::from_environment`), so
    // moving to the notebook's folder leaves them pointing where they did.
    if let Some(folder) = notebook_path.parent() {
        std::env::set_current_dir(folder).map_err(|e| {
            CommandError::Run(format!("cannot enter the notebook's folder `{}`: {e}", folder.display()))
        })?;
    }
    let mut progress: Box<dyn Progress> = if args.quiet { Box::new(NoProgress) } else { Box::new(StderrProgress) };
    let outcome = execute(&mut notebook, config, &applied, progress.as_mut());
    notebook.write_atomic(&output).map_err(|e| CommandError::Run(e.to_string()))?;

    let failure = outcome.failure.as_ref().map(|f| {
        let detail = if f.error.traceback.is_empty() { f.error.evalue.clone() } else { f.error.traceback.join("\n") };
        format!("cell {} (`{}`) failed — {}: {}\n{detail}", f.cell, f.first_line, f.error.ename, f.error.evalue)
    });
    let mut summary = format!(
        "ran {} of {} code cells in {}\nexecuted notebook: {}\n",
        outcome.executed,
        outcome.code_cells,
        clock(outcome.elapsed),
        output.display()
    );
    if let Some(path) = &html {
        let facts = RunFacts {
            notebook: args.notebook.display().to_string(),
            started_at: outcome.started_at.clone(),
            duration: clock(outcome.elapsed),
            inputs: applied.iter().map(|a| format!("{} = {} (was {})", a.name, a.new, a.old)).collect(),
            cells: format!("{} of {}", outcome.executed, outcome.code_cells),
            stopped: outcome
                .failure
                .as_ref()
                .map(|f| format!("Cell {} failed: {}: {}", f.cell, f.error.ename, f.error.evalue)),
        };
        write_file_atomic(path, report_html(&notebook, &facts).as_bytes())
            .map_err(|e| CommandError::Run(e.to_string()))?;
        summary.push_str(&format!("report: {}\n", path.display()));
    }
    match failure {
        Some(message) => Err(CommandError::Run(format!(
            "the run stopped at {message}\nThe outputs up to the failure are saved in {}.",
            output.display()
        ))),
        None => Ok(summary),
    }
}
