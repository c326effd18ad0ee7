//! The engine session thread.

use super::diagnostics;
use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::Child;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc;
use std::sync::{Arc, Mutex};
use std::time::Duration;

/// MIME type our panic hook uses to report a panic as content.
const PANIC_MIME: &str = "application/vnd.plumbline.panic+text";

/// Where and how the engine builds.
#[derive(Debug, Clone)]
pub struct EngineConfig {
    /// Path of the `plumbline` analysis crate to preload.
    pub analysis_path: PathBuf,
    /// The engine's build directory (kept between kernels so the dependency
    /// build happens once).
    pub build_dir: PathBuf,
    /// Optimisation level of cells and dependencies (`0`–`3`); `None` keeps the
    /// engine's default (2).
    pub opt_level: Option<String>,
}

impl EngineConfig {
    /// The defaults: the analysis crate this kernel was built from (or
    /// `$PLUMBLINE_ANALYSIS_PATH`), the build directory
    /// `$PLUMBLINE_ENGINE_DIR` or `~/.cache/plumbline/engine-<version>`, and
    /// `$PLUMBLINE_ENGINE_OPT` as the optimisation level.
    pub fn from_environment() -> Self {
        let analysis_path = std::env::var_os("PLUMBLINE_ANALYSIS_PATH")
            .map(PathBuf::from)
            .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..").join("analysis"));
        let analysis_path = analysis_path.canonicalize().unwrap_or(analysis_path);
        let build_dir = std::env::var_os("PLUMBLINE_ENGINE_DIR").map(PathBuf::from).unwrap_or_else(|| {
            let home = std::env::var_os("HOME").map(PathBuf::from).unwrap_or_else(std::env::temp_dir);
            home.join(".cache").join("plumbline").join(format!("engine-{}", env!("CARGO_PKG_VERSION")))
        });
        let opt_level = std::env::var("PLUMBLINE_ENGINE_OPT").ok().filter(|s| !s.is_empty());
        Self { analysis_path, build_dir, opt_level }
    }
}

/// A line of cell output.
#[derive(Debug, Clone)]
pub struct StreamLine {
    /// `stdout` or `stderr`.
    pub name: &'static str,
    /// The text, newline included.
    pub text: String,
}

/// A failed cell, in the protocol's terms.
#[derive(Debug, Clone)]
pub struct CellError {
    /// Short error name.
    pub ename: String,
    /// One-line description.
    pub evalue: String,
    /// Lines to show.
    pub traceback: Vec<String>,
}

/// What a cell produced.
#[derive(Debug, Clone, Default)]
pub struct ExecOutcome {
    /// The last value's MIME bundle (empty when the cell ends in a statement).
    pub data: BTreeMap<String, String>,
    /// The error, if the cell failed.
    pub error: Option<CellError>,
}

/// Completion candidates.
#[derive(Debug, Clone, Default)]
pub struct CompleteOutcome {
    /// Candidate texts.
    pub matches: Vec<String>,
    /// Byte offset where the replaced text starts.
    pub cursor_start: usize,
    /// Byte offset where it ends.
    pub cursor_end: usize,
}

enum Request {
    Execute { code: String, reply: mpsc::Sender<ExecOutcome> },
    Complete { code: String, cursor: usize, reply: mpsc::Sender<CompleteOutcome> },
    Inspect { code: String, cursor: usize, reply: mpsc::Sender<Option<(String, String)>> },
}

/// What the output readers noticed while a cell ran: whether it stopped at a
/// `?` (our relay's marker line, see `runtime_relay`), and its latest
/// standard-error lines, where the engine printed that error.
#[derive(Default)]
struct CellSignals {
    stopped_at_question_mark: AtomicBool,
    recent_stderr: Mutex<Vec<String>>,
}

impl CellSignals {
    fn reset(&self) {
        self.stopped_at_question_mark.store(false, Ordering::SeqCst);
        if let Ok(mut lines) = self.recent_stderr.lock() {
            lines.clear();
        }
    }

    /// Handles one output line of the cell process: our `?` marker sets the
    /// flag, anything else goes to `streams` (standard error is also kept for
    /// the error message). Returns false once nobody listens any more.
    fn route(
        &self,
        name: &'static str,
        line: String,
        streams: &tokio::sync::mpsc::UnboundedSender<StreamLine>,
    ) -> bool {
        if name == "stdout" && line == super::CELL_ERROR_MARKER {
            self.stopped_at_question_mark.store(true, Ordering::SeqCst);
            return true;
        }
        if name == "stderr" {
            if let Ok(mut recent) = self.recent_stderr.lock() {
                if recent.len() >= 64 {
                    recent.remove(0);
                }
                recent.push(line.clone());
            }
        }
        streams.send(StreamLine { name, text: line + "\n" }).is_ok()
    }

    /// The error message the engine printed, if the cell stopped at a `?`.
    fn question_mark_error(&self) -> Option<String> {
        if !self.stopped_at_question_mark.swap(false, Ordering::SeqCst) {
            return None;
        }
        let lines = self.recent_stderr.lock().map(|l| l.clone()).unwrap_or_default();
        let message = lines.iter().rev().find(|l| !l.trim().is_empty()).cloned();
        Some(message.unwrap_or_else(|| "a `?` in the cell returned an error".into()))
    }
}

/// Stops the running cell by killing the engine's worker process.
#[derive(Clone, Default)]
pub struct Interrupter {
    child: Arc<Mutex<Option<Arc<Mutex<Child>>>>>,
}

impl Interrupter {
    /// Kills the worker; the engine restarts it and its variables are lost.
    pub fn interrupt(&self) -> bool {
        let child = match self.child.lock() {
            Ok(slot) => slot.clone(),
            Err(_) => return false,
        };
        let Some(child) = child else { return false };
        let killed = match child.lock() {
            Ok(mut process) => process.kill().is_ok(),
            Err(_) => false,
        };
        killed
    }
}

/// Handle to the engine thread.
pub struct Session {
    requests: mpsc::Sender<Request>,
    interrupter: Interrupter,
}

impl Session {
    /// Starts the engine thread; it prepares the session (preloading
    /// `plumbline`) before taking the first request. `streams` receives cell
    /// output lines as they are printed.
    pub fn start(config: EngineConfig, streams: tokio::sync::mpsc::UnboundedSender<StreamLine>) -> Session {
        let (requests, inbox) = mpsc::channel::<Request>();
        let interrupter = Interrupter::default();
        let slot = interrupter.clone();
        std::thread::Builder::new()
            .name("plumbline-engine".into())
            .spawn(move || engine_thread(config, inbox, streams, slot))
            .expect("spawn the engine thread");
        Session { requests, interrupter }
    }

    /// The interrupter for this session.
    pub fn interrupter(&self) -> Interrupter {
        self.interrupter.clone()
    }

    /// Runs a cell, blocking until it finishes.
    pub fn execute(&self, code: &str) -> ExecOutcome {
        let (reply, answer) = mpsc::channel();
        if self.requests.send(Request::Execute { code: code.to_string(), reply }).is_err() {
            return engine_gone();
        }
        answer.recv().unwrap_or_else(|_| engine_gone())
    }

    /// Completion candidates at byte offset `cursor`.
    pub fn complete(&self, code: &str, cursor: usize) -> CompleteOutcome {
        let (reply, answer) = mpsc::channel();
        if self.requests.send(Request::Complete { code: code.to_string(), cursor, reply }).is_err() {
            return CompleteOutcome { cursor_start: cursor, cursor_end: cursor, ..Default::default() };
        }
        answer.recv().unwrap_or_default()
    }

    /// `(plain, html)` documentation of the item at byte offset `cursor`.
    pub fn inspect(&self, code: &str, cursor: usize) -> Option<(String, String)> {
        let (reply, answer) = mpsc::channel();
        self.requests.send(Request::Inspect { code: code.to_string(), cursor, reply }).ok()?;
        answer.recv().ok().flatten()
    }
}

fn engine_gone() -> ExecOutcome {
    ExecOutcome {
        data: BTreeMap::new(),
        error: Some(CellError {
            ename: "EngineStopped".into(),
            evalue: "the evaluation engine stopped; restart the kernel".into(),
            traceback: vec!["The evaluation engine stopped; restart the kernel to continue.".into()],
        }),
    }
}

fn failure(ename: &str, evalue: String, traceback: Vec<String>) -> ExecOutcome {
    ExecOutcome { data: BTreeMap::new(), error: Some(CellError { ename: ename.into(), evalue, traceback }) }
}

/// Checks that cargo and rustc are on the PATH (the engine compiles cells with them).
fn toolchain_problem() -> Option<String> {
    for tool in ["cargo", "rustc"] {
        let ok =
            std::process::Command::new(tool).arg("--version").output().map(|o| o.status.success()).unwrap_or(false);
        if !ok {
            return Some(format!(
                "`{tool}` was not found or does not run. Plumbline cells are compiled Rust: install the Rust toolchain \
                 with rustup (https://rustup.rs), make sure `{tool}` is on the PATH of the notebook server, and restart the kernel."
            ));
        }
    }
    None
}

fn engine_thread(
    config: EngineConfig,
    inbox: mpsc::Receiver<Request>,
    streams: tokio::sync::mpsc::UnboundedSender<StreamLine>,
    interrupter: Interrupter,
) {
    let signals = Arc::new(CellSignals::default());
    let startup = start_engine(&config, &streams, &interrupter, &signals);
    let (mut ctx, stdout, stderr) = match startup {
        Ok(parts) => parts,
        Err(message) => {
            // Every request gets the startup problem as its answer.
            for request in inbox {
                match request {
                    Request::Execute { reply, .. } => {
                        let _ = reply.send(failure("EngineUnavailable", message.clone(), vec![message.clone()]));
                    }
                    Request::Complete { cursor, reply, .. } => {
                        let _ = reply.send(CompleteOutcome {
                            cursor_start: cursor,
                            cursor_end: cursor,
                            ..Default::default()
                        });
                    }
                    Request::Inspect { reply, .. } => {
                        let _ = reply.send(None);
                    }
                }
            }
            return;
        }
    };
    let drain = |streams: &tokio::sync::mpsc::UnboundedSender<StreamLine>| {
        std::thread::sleep(Duration::from_millis(30));
        while let Ok(line) = stdout.try_recv() {
            signals.route("stdout", line, streams);
        }
        while let Ok(line) = stderr.try_recv() {
            signals.route("stderr", line, streams);
        }
    };
    for request in inbox {
        match request {
            Request::Execute { code, reply } => {
                let before: Vec<String> = ctx.variables_and_types().map(|(n, _)| n.to_string()).collect();
                signals.reset();
                let result = ctx.execute(&code);
                drain(&streams);
                if let Ok(mut slot) = interrupter.child.lock() {
                    *slot = Some(ctx.process_handle());
                }
                let question_mark_error = signals.question_mark_error();
                let outcome = match result {
                    Ok(_) if question_mark_error.is_some() => {
                        let message = question_mark_error.unwrap_or_default();
                        failure(
                            "Error",
                            message.clone(),
                            vec![
                                format!("The cell stopped at a `?`: {message}"),
                                "Statements after it did not run, and variables it would have defined were not kept."
                                    .into(),
                            ],
                        )
                    }
                    Ok(outputs) => {
                        let mut data: BTreeMap<String, String> = outputs.content_by_mime_type.into_iter().collect();
                        match data.remove(PANIC_MIME) {
                            Some(panic) => {
                                let message = panic.lines().skip(1).collect::<Vec<_>>().join("\n");
                                let message = if message.is_empty() { panic.clone() } else { message };
                                failure(
                                    "panic",
                                    message.clone(),
                                    vec![
                                        format!("The cell panicked: {message}"),
                                        "Variables from earlier cells are kept.".into(),
                                    ],
                                )
                            }
                            None => ExecOutcome { data, error: None },
                        }
                    }
                    Err(evcxr::Error::CompilationErrors(errors)) => {
                        let mut traceback = Vec::new();
                        for e in errors.iter().filter(|e| e.is_from_user_code() || errors.len() == 1) {
                            traceback.extend(diagnostics::render(e, &code));
                        }
                        if traceback.is_empty() {
                            for e in &errors {
                                traceback.extend(diagnostics::render(e, &code));
                            }
                        }
                        let first = errors.first().map(|e| e.message()).unwrap_or_default();
                        failure("CompileError", first, traceback)
                    }
                    Err(evcxr::Error::SubprocessTerminated(reason)) => {
                        let lost = if before.is_empty() { "none".to_string() } else { before.join(", ") };
                        failure(
                            "Interrupted",
                            format!("the cell was stopped ({reason})"),
                            vec![
                                "The cell was stopped and the evaluation process restarted.".into(),
                                format!("Variables lost: {lost}. Functions, types and `use` lines are kept."),
                                "Rerun the cells that defined the variables you still need.".into(),
                            ],
                        )
                    }
                    Err(evcxr::Error::TypeRedefinedVariablesLost(names)) => failure(
                        "VariablesLost",
                        format!("redefining a type dropped variables: {}", names.join(", ")),
                        vec![format!("Redefining a type dropped these variables: {}.", names.join(", "))],
                    ),
                    Err(other) => {
                        let text = other.to_string();
                        failure(
                            "Error",
                            text.lines().next().unwrap_or("").to_string(),
                            text.lines().map(str::to_string).collect(),
                        )
                    }
                };
                let _ = reply.send(outcome);
            }
            Request::Complete { code, cursor, reply } => {
                let outcome = match ctx.completions(&code, cursor.min(code.len())) {
                    Ok(c) => CompleteOutcome {
                        matches: c.completions.into_iter().map(|x| x.code).collect(),
                        cursor_start: c.start_offset,
                        cursor_end: c.end_offset,
                    },
                    Err(_) => CompleteOutcome { cursor_start: cursor, cursor_end: cursor, ..Default::default() },
                };
                let _ = reply.send(outcome);
            }
            Request::Inspect { code, cursor, reply } => {
                let answer =
                    ctx.hover_at(&code, cursor.min(code.len())).ok().filter(|(plain, _)| !plain.trim().is_empty());
                let _ = reply.send(answer);
            }
        }
    }
}

/// Package name of the crate through which cells see `plumbline`.
const SHARED_LIBRARY_PACKAGE: &str = "plumbline-session";

/// Writes, in the engine's build directory, a one-line crate of type `dylib`
/// that re-exports the analysis crate, and returns its folder. Cells depend on
/// it under the name `plumbline`, so `plumbline::…` paths are unchanged, but
/// polars, faer and the analysis code are linked once into this shared library
/// instead of into every cell's library: cells link faster, the cell process
/// does not grow by a polars copy (and its thread pools) per cell, and values
/// kept across cells are all built by the same copy of the code.
fn write_shared_library_crate(config: &EngineConfig) -> Result<PathBuf, String> {
    let dir = config.build_dir.join("shared-library");
    let source = dir.join("src");
    std::fs::create_dir_all(&source).map_err(|e| format!("cannot create `{}`: {e}", source.display()))?;
    let manifest = format!(
        "# Written by the Plumbline kernel: cells see the analysis crate through this shared library.\n\
         [package]\nname = \"{SHARED_LIBRARY_PACKAGE}\"\nversion = \"{}\"\nedition = \"2021\"\npublish = false\n\n\
         [lib]\npath = \"src/lib.rs\"\ncrate-type = [\"dylib\"]\n\n\
         [dependencies]\nplumbline = {{ path = \"{}\", package = \"plumbline-analysis\", default-features = false }}\n",
        env!("CARGO_PKG_VERSION"),
        config.analysis_path.display().to_string().replace('\\', "/")
    );
    let library =
        "//! The analysis crate, re-exported as one shared library for notebook cells.\npub use plumbline::*;\n";
    // Rewrite only on change, so cargo does not rebuild the library at every start.
    for (path, text) in [(dir.join("Cargo.toml"), manifest), (source.join("lib.rs"), library.to_string())] {
        if std::fs::read_to_string(&path).ok().as_deref() != Some(text.as_str()) {
            std::fs::write(&path, text).map_err(|e| format!("cannot write `{}`: {e}", path.display()))?;
        }
    }
    Ok(dir)
}

type EngineParts = (evcxr::CommandContext, crossbeam_channel::Receiver<String>, crossbeam_channel::Receiver<String>);

fn start_engine(
    config: &EngineConfig,
    streams: &tokio::sync::mpsc::UnboundedSender<StreamLine>,
    interrupter: &Interrupter,
    signals: &Arc<CellSignals>,
) -> Result<EngineParts, String> {
    if let Some(problem) = toolchain_problem() {
        return Err(problem);
    }
    std::fs::create_dir_all(&config.build_dir)
        .map_err(|e| format!("cannot create the engine build directory `{}`: {e}", config.build_dir.display()))?;
    let config_dir = config.build_dir.join("config");
    let _ = std::fs::create_dir_all(&config_dir);
    // SAFETY-free: set before the engine reads them, on this thread, before any other engine call.
    unsafe {
        std::env::set_var("EVCXR_TMPDIR", config.build_dir.join("work"));
        std::env::set_var("EVCXR_CONFIG_DIR", &config_dir);
        // `plumbline::render::show` then sends whole display bundles as marked lines.
        std::env::set_var(plumbline::render::KERNEL_DISPLAY_ENV, "1");
    }
    let (eval_context, outputs) =
        evcxr::EvalContext::new().map_err(|e| format!("the evaluation engine did not start: {e}"))?;
    let mut ctx = evcxr::CommandContext::with_eval_context(eval_context);
    let (stdout, stderr) = (outputs.stdout, outputs.stderr);
    for (name, channel) in [("stdout", stdout.clone()), ("stderr", stderr.clone())] {
        let streams = streams.clone();
        let signals = Arc::clone(signals);
        let name: &'static str = if name == "stdout" { "stdout" } else { "stderr" };
        std::thread::spawn(move || {
            while let Ok(line) = channel.recv() {
                if !signals.route(name, line, &streams) {
                    break;
                }
            }
        });
    }
    let mut prelude: Vec<String> = Vec::new();
    if let Some(level) = &config.opt_level {
        prelude.push(format!(":opt {level}"));
    }
    let shared_library = write_shared_library_crate(config)?;
    prelude.push(format!(
        ":dep plumbline = {{ path = \"{}\", package = \"{SHARED_LIBRARY_PACKAGE}\" }}",
        shared_library.display().to_string().replace('\\', "/")
    ));
    prelude.push("use plumbline::prelude::*;".into());
    prelude.push(format!(
        "std::panic::set_hook(Box::new(|info| {{ println!(\"EVCXR_BEGIN_CONTENT {PANIC_MIME}\\n{{}}\\nEVCXR_END_CONTENT\", info); }}));"
    ));
    // A `?` in the prelude: the engine enables `?` in cells only after a first
    // compile error caused by one, and if that first `?` sits in a cell's final
    // expression the engine also drops that cell's rich display for plain
    // `Debug` text. Paying that retry here keeps every user cell rich.
    prelude.push("let plumbline_session_ready: bool = \"true\".parse::<bool>()?;".into());
    for command in &prelude {
        ctx.execute(command).map_err(|e| format!("preparing the session failed at `{command}`: {e}"))?;
    }
    if let Ok(mut slot) = interrupter.child.lock() {
        *slot = Some(ctx.process_handle());
    }
    Ok((ctx, stdout, stderr))
}
