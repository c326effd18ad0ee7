//! The engine session thread.
//!
//! One thread owns the engine (`evcxr::CommandContext`) and takes requests in
//! order. A cell's output reaches its caller as one ordered event stream
//! ([`CellEvent`]): output lines while it runs, then exactly one `Finished`
//! with the outcome, after every line (see `output_pump`). Nothing here waits
//! on a clock.

use super::diagnostics;
use super::output_pump::{CellSignals, OutputPump};
use super::preparation::{watch_compilation, Preparation, PreparationObserver};
use super::termination::Termination;
use std::collections::BTreeMap;
use std::path::PathBuf;
use std::process::Child;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc;
use std::sync::{Arc, Mutex};
use std::time::Instant;
use tokio::sync::mpsc::{unbounded_channel, UnboundedReceiver, UnboundedSender};

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
    /// This engine's own work folder under `build_dir` (see `work_slots`).
    pub work_dir: PathBuf,
    /// Optimisation level of cells and dependencies (`0`–`3`); `None` keeps the
    /// engine's default (2).
    pub opt_level: Option<String>,
}

impl EngineConfig {
    /// The defaults: the analysis crate this kernel was built from (or
    /// `$PLUMBLINE_ANALYSIS_PATH`), the build directory
    /// `$PLUMBLINE_ENGINE_DIR` or `~/.cache/plumbline/engine-<version>`, and
    /// `$PLUMBLINE_ENGINE_OPT` as the optimisation level, and the work slot
    /// this process claimed (`work` when it claimed none). Paths are absolute.
    pub fn from_environment() -> Self {
        let analysis_path = std::env::var_os("PLUMBLINE_ANALYSIS_PATH")
            .map(PathBuf::from)
            .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..").join("analysis"));
        let absolute = |path: PathBuf| match std::env::current_dir() {
            Ok(here) if path.is_relative() => here.join(path),
            _ => path,
        };
        let analysis_path = absolute(analysis_path.canonicalize().unwrap_or(analysis_path));
        let build_dir = std::env::var_os("PLUMBLINE_ENGINE_DIR").map(PathBuf::from).unwrap_or_else(|| {
            let home = std::env::var_os("HOME").map(PathBuf::from).unwrap_or_else(std::env::temp_dir);
            home.join(".cache").join("plumbline").join(format!("engine-{}", env!("CARGO_PKG_VERSION")))
        });
        let build_dir = absolute(build_dir);
        let opt_level = std::env::var("PLUMBLINE_ENGINE_OPT").ok().filter(|s| !s.is_empty());
        let work_dir = super::work_slots::process_slot().map_or_else(|| build_dir.join("work"), |slot| slot.path());
        Self { analysis_path, build_dir, work_dir, opt_level }
    }
}

/// The variables [`export_engine_environment`] sets: whatever a process
/// inherited under these names is replaced by its own engine's settings.
pub const ENGINE_VARIABLES: [&str; 3] = ["EVCXR_TMPDIR", "EVCXR_CONFIG_DIR", plumbline::render::KERNEL_DISPLAY_ENV];

/// Puts the engine's settings into this process's environment, where the
/// engine reads them when it starts and the cell process inherits them:
/// `EVCXR_TMPDIR`, `EVCXR_CONFIG_DIR` and the kernel display switch of
/// `plumbline::render::show`.
///
/// Call from `main` before any thread starts: changing the environment
/// while other threads may read it is undefined behaviour on Unix.
pub fn export_engine_environment(config: &EngineConfig) {
    // SAFETY: `main` calls this while the process is single-threaded (the
    // contract above), so no other thread reads the environment meanwhile.
    unsafe {
        let [tmpdir, config_dir, display] = ENGINE_VARIABLES;
        std::env::set_var(tmpdir, &config.work_dir);
        std::env::set_var(config_dir, config.build_dir.join("config"));
        std::env::set_var(display, "1");
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

/// One event of a running cell, in the order it happened.
#[derive(Debug, Clone)]
pub enum CellEvent {
    /// A line the cell printed (display commands included, see `display`).
    Output(StreamLine),
    /// The cell ended; always the last event.
    Finished(ExecOutcome),
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
    Execute { code: String, events: UnboundedSender<CellEvent> },
    Complete { code: String, cursor: usize, reply: mpsc::Sender<CompleteOutcome> },
    Inspect { code: String, cursor: usize, reply: mpsc::Sender<Option<(String, String)>> },
}

/// Stops the running cell by killing the process that runs cells.
///
/// It acts only while a cell runs: an interrupt that arrives while the
/// session is idle (or busy with a completion) does nothing, so it cannot
/// throw away the variables of a session nobody asked to stop.
#[derive(Clone, Default)]
pub struct Interrupter {
    inner: Arc<InterruptState>,
}

#[derive(Default)]
struct InterruptState {
    /// The engine's handle to the cell process (valid across its restarts).
    process: Mutex<Option<Arc<Mutex<Child>>>>,
    /// A cell is running (set and cleared by the engine thread).
    running: AtomicBool,
    /// We killed the process during the running cell.
    fired: AtomicBool,
}

impl Interrupter {
    /// Kills the cell process if a cell is running; the engine restarts it
    /// and the variables are lost (the cell's error says which). Returns
    /// whether a cell was stopped.
    pub fn interrupt(&self) -> bool {
        let Ok(slot) = self.inner.process.lock() else { return false };
        if !self.inner.running.load(Ordering::SeqCst) {
            return false;
        }
        let Some(child) = slot.clone() else { return false };
        let killed = match child.lock() {
            Ok(mut process) => process.kill().is_ok(),
            Err(_) => false,
        };
        if killed {
            self.inner.fired.store(true, Ordering::SeqCst);
        }
        killed
    }

    /// Kills the cell process whether or not a cell runs (kernel shutdown).
    pub fn terminate(&self) {
        let Ok(slot) = self.inner.process.lock() else { return };
        if let Some(child) = slot.clone() {
            if let Ok(mut process) = child.lock() {
                let _ = process.kill();
            }
        }
    }

    fn set_process(&self, process: Arc<Mutex<Child>>) {
        if let Ok(mut slot) = self.inner.process.lock() {
            *slot = Some(process);
        }
    }

    /// Marks a cell as running (under the same lock `interrupt` takes, so an
    /// interrupt sees either the whole cell or none of it).
    fn set_running(&self, running: bool) {
        let _guard = self.inner.process.lock();
        self.inner.running.store(running, Ordering::SeqCst);
        if running {
            self.inner.fired.store(false, Ordering::SeqCst);
        }
    }

    fn fired(&self) -> bool {
        self.inner.fired.swap(false, Ordering::SeqCst)
    }
}

/// Handle to the engine thread.
pub struct Session {
    requests: mpsc::Sender<Request>,
    interrupter: Interrupter,
}

impl Session {
    /// Starts the engine thread; it prepares the session (preloading
    /// `plumbline`) before taking the first request, reporting how far it got
    /// to `observer`. Lines printed while no cell runs go to `stray`.
    pub fn start(
        config: EngineConfig,
        stray: UnboundedSender<StreamLine>,
        observer: Arc<PreparationObserver>,
    ) -> Session {
        let (requests, inbox) = mpsc::channel::<Request>();
        let interrupter = Interrupter::default();
        let engine_interrupter = interrupter.clone();
        let spawned = std::thread::Builder::new()
            .name("plumbline-engine".into())
            .spawn(move || engine_thread(config, inbox, stray, engine_interrupter, observer));
        if let Err(e) = spawned {
            eprintln!("plumbline kernel: cannot start the engine thread: {e}");
        }
        Session { requests, interrupter }
    }

    /// Ends the cell process (shutdown); the session answers no more cells.
    pub fn terminate(&self) {
        self.interrupter.terminate();
    }

    /// The interrupter for this session.
    pub fn interrupter(&self) -> Interrupter {
        self.interrupter.clone()
    }

    /// Queues a cell; its events arrive on the returned channel, ending with
    /// exactly one [`CellEvent::Finished`].
    pub fn execute(&self, code: &str) -> UnboundedReceiver<CellEvent> {
        let (events, receiver) = unbounded_channel();
        if let Err(mpsc::SendError(Request::Execute { events, .. })) =
            self.requests.send(Request::Execute { code: code.to_string(), events })
        {
            let _ = events.send(CellEvent::Finished(engine_gone()));
        }
        receiver
    }

    /// Runs a cell to the end, blocking: its output lines and its outcome.
    /// For callers outside an async runtime (the runner, install).
    pub fn execute_to_end(&self, code: &str) -> (Vec<StreamLine>, ExecOutcome) {
        let mut events = self.execute(code);
        let mut lines = Vec::new();
        while let Some(event) = events.blocking_recv() {
            match event {
                CellEvent::Output(line) => lines.push(line),
                CellEvent::Finished(outcome) => return (lines, outcome),
            }
        }
        (lines, engine_gone())
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
    failure(
        "EngineStopped",
        "the evaluation engine stopped; restart the kernel".into(),
        vec!["The evaluation engine stopped; restart the kernel to continue.".into()],
    )
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

/// Answers every request with the startup problem.
fn refuse_all(inbox: mpsc::Receiver<Request>, message: &str) {
    for request in inbox {
        match request {
            Request::Execute { events, .. } => {
                let _ = events.send(CellEvent::Finished(failure(
                    "EngineUnavailable",
                    message.to_string(),
                    vec![message.to_string()],
                )));
            }
            Request::Complete { cursor, reply, .. } => {
                let _ = reply.send(CompleteOutcome { cursor_start: cursor, cursor_end: cursor, ..Default::default() });
            }
            Request::Inspect { reply, .. } => {
                let _ = reply.send(None);
            }
        }
    }
}

fn engine_thread(
    config: EngineConfig,
    inbox: mpsc::Receiver<Request>,
    stray: UnboundedSender<StreamLine>,
    interrupter: Interrupter,
    observer: Arc<PreparationObserver>,
) {
    let started = Instant::now();
    observer(&Preparation::Starting);
    let startup = start_engine(&config, stray, &interrupter, Arc::clone(&observer));
    let (mut engine, pump) = match startup {
        Ok(parts) => parts,
        Err(message) => {
            observer(&Preparation::Failed(message.clone()));
            refuse_all(inbox, &message);
            return;
        }
    };
    observer(&Preparation::Ready(started.elapsed()));
    for request in inbox {
        match request {
            Request::Execute { code, events } => {
                let before = user_variables(&engine);
                pump.begin(events.clone());
                interrupter.set_running(true);
                let result = engine.execute(&code);
                interrupter.set_running(false);
                let signals = pump.finish();
                let outcome = cell_outcome(&mut engine, &code, result, &signals, &before, interrupter.fired());
                let _ = events.send(CellEvent::Finished(outcome));
            }
            Request::Complete { code, cursor, reply } => {
                let outcome = match engine.completions(&code, cursor.min(code.len())) {
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
                    engine.hover_at(&code, cursor.min(code.len())).ok().filter(|(plain, _)| !plain.trim().is_empty());
                let _ = reply.send(answer);
            }
        }
    }
}

/// Names of the variables the user's cells defined (the session's own left out).
fn user_variables(engine: &evcxr::CommandContext) -> Vec<String> {
    engine.variables_and_types().map(|(n, _)| n.to_string()).filter(|n| !n.starts_with(WARM_PREFIX)).collect()
}

/// The outcome of one cell from the engine's result and what the pump saw.
/// After the cell process ended, the session hooks are installed again in
/// the new one.
fn cell_outcome(
    engine: &mut evcxr::CommandContext,
    code: &str,
    result: Result<evcxr::EvalOutputs, evcxr::Error>,
    signals: &CellSignals,
    before: &[String],
    interrupted: bool,
) -> ExecOutcome {
    match result {
        Ok(_) if signals.stopped_at_question_mark => {
            let message = signals.question_mark_message();
            failure(
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
                    failure(
                        "panic",
                        message.clone(),
                        vec![format!("The cell panicked: {message}"), "Variables from earlier cells are kept.".into()],
                    )
                }
                None => ExecOutcome { data, error: None },
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
            failure("CompileError", first, traceback)
        }
        Err(evcxr::Error::SubprocessTerminated(reason)) => {
            let termination = Termination::classify(&reason, interrupted, signals.aborted);
            let after = user_variables(engine);
            let lost: Vec<String> = before.iter().filter(|n| !after.contains(n)).cloned().collect();
            let kept: Vec<String> = before.iter().filter(|n| after.contains(n)).cloned().collect();
            let mut last_lines = signals.recent_stderr.clone();
            last_lines.extend(
                reason
                    .lines()
                    .filter_map(|l| l.strip_prefix(super::runtime_relay::STDERR_LINE_MARKER))
                    .map(str::to_string),
            );
            let error = termination.to_error(&lost, &kept, &last_lines);
            // The new cell process has none of the session hooks yet.
            if let Err(problem) = install_cell_process_hooks(engine) {
                eprintln!("plumbline kernel: the restarted cell process lacks its hooks: {problem}");
            }
            ExecOutcome { data: BTreeMap::new(), error: Some(error) }
        }
        Err(evcxr::Error::TypeRedefinedVariablesLost(names)) => failure(
            "VariablesLost",
            format!("redefining a type dropped variables: {}", names.join(", ")),
            vec![format!("Redefining a type dropped these variables: {}.", names.join(", "))],
        ),
        Err(other) => {
            let text = other.to_string();
            failure("Error", text.lines().next().unwrap_or("").to_string(), text.lines().map(str::to_string).collect())
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

fn start_engine(
    config: &EngineConfig,
    stray: UnboundedSender<StreamLine>,
    interrupter: &Interrupter,
    observer: Arc<PreparationObserver>,
) -> Result<(evcxr::CommandContext, OutputPump), String> {
    if let Some(problem) = toolchain_problem() {
        return Err(problem);
    }
    std::fs::create_dir_all(&config.build_dir)
        .map_err(|e| format!("cannot create the engine build directory `{}`: {e}", config.build_dir.display()))?;
    let config_dir = config.build_dir.join("config");
    std::fs::create_dir_all(&config_dir)
        .map_err(|e| format!("cannot create the engine settings directory `{}`: {e}", config_dir.display()))?;
    if let Some(slot) = super::work_slots::process_slot().filter(|slot| slot.needs_copy()) {
        observer(&Preparation::CopyingBuild);
        slot.copy_primary_build().map_err(|e| e.to_string())?;
    }
    let (eval_context, outputs) =
        evcxr::EvalContext::new().map_err(|e| format!("the evaluation engine did not start: {e}"))?;
    let mut engine = evcxr::CommandContext::with_eval_context(eval_context);
    let pump = OutputPump::start(outputs.stdout, outputs.stderr, stray);
    let mut prelude: Vec<String> = Vec::new();
    if let Some(level) = &config.opt_level {
        prelude.push(format!(":opt {level}"));
    }
    let shared_library = write_shared_library_crate(config)?;
    prelude.push(format!(
        ":dep plumbline = {{ path = \"{}\", package = \"{SHARED_LIBRARY_PACKAGE}\" }}",
        shared_library.display().to_string().replace('\\', "/")
    ));
    // One cell (each cell costs a compile and a load):
    // * the prelude `use`, and the panic hook (see `panic_hook_cell`);
    // * a `?`: the engine enables `?` in cells only after a first compile
    //   error caused by one, and if that first `?` sits in a cell's final
    //   expression the engine also drops that cell's rich display for plain
    //   `Debug` text. Paying that retry here keeps every user cell rich;
    // * a variable whose type the engine must infer from plumbline's own
    //   types: that loads plumbline and polars into the engine's type
    //   inference now, not in the user's first cell.
    let warm = format!(
        "use plumbline::prelude::*;\n{}\nlet {WARM_PREFIX}ready: bool = \"true\".parse::<bool>()?;\n\
         let {WARM_PREFIX}frame = Frame::from_dataframe(Default::default(), \"engine warm-up\");",
        panic_hook_cell()
    );
    // The first time, these compile plumbline inside the engine; that
    // progress is what people wait for.
    let prepare = |engine: &mut evcxr::CommandContext| -> Result<(), String> {
        for command in &prelude {
            engine.execute(command).map_err(|e| format!("preparing the session failed at `{command}`: {e}"))?;
        }
        observer(&Preparation::Loading);
        engine.execute(&warm).map_err(|e| format!("preparing the session failed at the warm-up cell: {e}"))?;
        Ok(())
    };
    let engine_target = config.work_dir.join("target");
    watch_compilation(&engine_target, Arc::clone(&observer), || prepare(&mut engine))?;
    interrupter.set_process(engine.process_handle());
    Ok((engine, pump))
}

/// Prefix of the session's own variables (warm-up), left out of the lists
/// of lost and kept variables people read.
const WARM_PREFIX: &str = "plumbline_session_";

/// The statement that makes the cell process report a panic as
/// [`PANIC_MIME`] content.
fn panic_hook_cell() -> String {
    format!(
        "std::panic::set_hook(Box::new(|info| {{ println!(\"EVCXR_BEGIN_CONTENT {PANIC_MIME}\\n{{}}\\nEVCXR_END_CONTENT\", info); }}));"
    )
}

/// Installs, in the cell process, the panic hook that reports a panic as
/// [`PANIC_MIME`] content. Needed again whenever that process restarts.
fn install_cell_process_hooks(engine: &mut evcxr::CommandContext) -> Result<(), String> {
    engine.execute(&panic_hook_cell()).map(|_| ()).map_err(|e| format!("installing the panic hook failed: {e}"))
}
