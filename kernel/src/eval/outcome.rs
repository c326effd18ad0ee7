//! What a cell's run means: the engine's result and what the output pump
//! noticed, turned into the outcome people read.

use super::cell::ExecOutcome;
use super::diagnostics;
use super::output_pump::CellSignals;
use super::runtime_relay::STDERR_LINE_MARKER;
use super::startup::{install_cell_process_hooks, CellProcessHooks, PANIC_MIME, WARM_PREFIX};
use super::termination::Termination;
use std::collections::BTreeMap;

/// Names of the variables the user's cells defined (the session's own left out).
pub(super) fn user_variables(engine: &evcxr::CommandContext) -> Vec<String> {
    engine.variables_and_types().map(|(n, _)| n.to_string()).filter(|n| !n.starts_with(WARM_PREFIX)).collect()
}

/// The outcome of one cell from the engine's result and what the pump saw.
/// After the cell process ended, the session hooks are installed again in
/// the new one.
pub(super) fn cell_outcome(
    engine: &mut evcxr::CommandContext,
    code: &str,
    result: Result<evcxr::EvalOutputs, evcxr::Error>,
    signals: &CellSignals,
    before: &[String],
    interrupted: bool,
    hooks: &CellProcessHooks,
) -> ExecOutcome {
    match result {
        Ok(_) if signals.stopped_at_question_mark => {
            let message = signals.question_mark_message();
            ExecOutcome::failure(
                "Error",
                message.clone(),
                vec![
                    format!("The cell stopped at a `?`: {message}"),
                    "Statements after it did not run, and variables it would have defined were not kept.".into(),
                ],
            )
        }
        Ok(outputs) => {
            let mut data: BTreeMap<String, String> = outputs.content_by_mime_type.into_iter().collect();
            match data.remove(PANIC_MIME) {
                Some(panic) => {
                    let message = panic.lines().skip(1).collect::<Vec<_>>().join("\n");
                    let message = if message.is_empty() { panic.clone() } else { message };
                    ExecOutcome::failure(
                        "panic",
                        message.clone(),
                        vec![format!("The cell panicked: {message}"), "Variables from earlier cells are kept.".into()],
                    )
                }
                None => ExecOutcome { data, ..ExecOutcome::default() },
            }
        }
        Err(evcxr::Error::CompilationErrors(errors)) => {
            let mut traceback = Vec::new();
            for e in errors.iter().filter(|e| e.is_from_user_code() || errors.len() == 1) {
                traceback.extend(diagnostics::render(e, code));
            }
            if traceback.is_empty() {
                for e in &errors {
                    traceback.extend(diagnostics::render(e, code));
                }
            }
            let first = errors.first().map(|e| e.message()).unwrap_or_default();
            ExecOutcome::failure("CompileError", first, traceback)
        }
        Err(evcxr::Error::SubprocessTerminated(reason)) => {
            let termination = Termination::classify(&reason, interrupted, signals.aborted);
            let after = user_variables(engine);
            let lost: Vec<String> = before.iter().filter(|n| !after.contains(n)).cloned().collect();
            let kept: Vec<String> = before.iter().filter(|n| after.contains(n)).cloned().collect();
            let mut last_lines = signals.recent_stderr.clone();
            last_lines.extend(reason.lines().filter_map(|l| l.strip_prefix(STDERR_LINE_MARKER)).map(str::to_string));
            let error = termination.to_error(&lost, &kept, &last_lines);
            // The new cell process has none of the session hooks yet.
            if let Err(problem) = install_cell_process_hooks(engine, hooks) {
                eprintln!("plumbline kernel: the restarted cell process lacks its hooks: {problem}");
            }
            ExecOutcome { error: Some(error), ..ExecOutcome::default() }
        }
        Err(evcxr::Error::TypeRedefinedVariablesLost(names)) => ExecOutcome::failure(
            "VariablesLost",
            format!("redefining a type dropped variables: {}", names.join(", ")),
            vec![format!("Redefining a type dropped these variables: {}.", names.join(", "))],
        ),
        Err(other) => {
            let text = other.to_string();
            ExecOutcome::failure(
                "Error",
                text.lines().next().unwrap_or("").to_string(),
                text.lines().map(str::to_string).collect(),
            )
        }
    }
}
