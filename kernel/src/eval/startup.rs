//! Starting an engine: the toolchain check, the shared library through which
//! cells see `plumbline`, the prelude and warm-up cell, and the hooks every
//! cell process needs (installed again whenever that process restarts).

use super::cell::StreamLine;
use super::config::EngineConfig;
use super::interrupter::Interrupter;
use super::output_pump::OutputPump;
use super::preparation::{watch_compilation, Preparation, PreparationObserver};
use std::path::PathBuf;
use std::sync::Arc;
use tokio::sync::mpsc::UnboundedSender;

/// MIME type our panic hook uses to report a panic as content.
pub(super) const PANIC_MIME: &str = "application/vnd.plumbline.panic+text";

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

/// Starts the engine in `config`'s work folder, loads `plumbline` and runs
/// the warm-up cell: the engine and the pump of its output, or why it could
/// not start, in words for the analyst.
pub(super) fn start_engine(
    config: &EngineConfig,
    stray: UnboundedSender<StreamLine>,
    interrupter: &Interrupter,
    hooks: &CellProcessHooks,
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
    if let Some(slot) = config.slot().filter(|slot| slot.needs_copy()) {
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
    // * the prelude `use`, and the panic hook (see `CellProcessHooks`);
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
        hooks.cell_process_code()
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
pub(super) const WARM_PREFIX: &str = "plumbline_session_";

/// What every cell process needs before a notebook cell runs in it: the
/// panic hook that reports a panic as [`PANIC_MIME`] content, and, in a
/// standby that took over a launcher, the launcher's working directory and
/// environment. The engine starts a new cell process after an interrupt or a
/// crash; [`install_cell_process_hooks`] then installs all of it again.
#[derive(Debug, Clone, Default)]
pub(super) struct CellProcessHooks {
    /// Where cells run (the launcher's folder); `None`: where the engine started.
    pub working_directory: Option<PathBuf>,
    /// Variables to set (`Some`) or remove (`None`), in order.
    pub environment: Vec<(String, Option<String>)>,
}

impl CellProcessHooks {
    /// Statements installing the panic hook and the launcher's setting.
    pub fn cell_process_code(&self) -> String {
        format!(
            "std::panic::set_hook(Box::new(|info| {{ println!(\"EVCXR_BEGIN_CONTENT {PANIC_MIME}\\n{{}}\\nEVCXR_END_CONTENT\", info); }}));\n{}",
            self.launcher_setting_code()
        )
    }

    /// Statements moving the cell process to the launcher's folder and
    /// environment (empty when there is none). A `{:?}` of a string is a
    /// valid Rust string literal, so names and values pass through unchanged.
    ///
    /// The environment is changed inside the cell process, with
    /// `set_var`/`remove_var`, which are unsound only while another thread
    /// may read the environment outside std's own lock (C code calling
    /// `getenv`). These statements run before any notebook cell in that
    /// process — at the hand-over, queued ahead of the launcher's first
    /// cell, or first thing in a restarted process — when its only threads
    /// are the engine's output relay and idle worker pools, none of which
    /// reads the environment.
    fn launcher_setting_code(&self) -> String {
        let mut code = String::new();
        if let Some(directory) = &self.working_directory {
            code.push_str(&format!("std::env::set_current_dir({:?}).ok();\n", directory.to_string_lossy()));
        }
        if !self.environment.is_empty() {
            code.push_str("unsafe {\n");
            for (name, value) in &self.environment {
                match value {
                    Some(value) => code.push_str(&format!("    std::env::set_var({name:?}, {value:?});\n")),
                    None => code.push_str(&format!("    std::env::remove_var({name:?});\n")),
                }
            }
            code.push_str("}\n");
        }
        code
    }

    /// Runs the launcher's setting in the current cell process.
    pub fn apply_launcher_setting(&self, engine: &mut evcxr::CommandContext) -> Result<(), String> {
        let code = self.launcher_setting_code();
        if code.is_empty() {
            return Ok(());
        }
        engine.execute(&code).map(|_| ()).map_err(|e| e.to_string())
    }
}

/// Installs the session's hooks in the cell process. Needed again whenever
/// that process restarts.
pub(super) fn install_cell_process_hooks(
    engine: &mut evcxr::CommandContext,
    hooks: &CellProcessHooks,
) -> Result<(), String> {
    engine.execute(&hooks.cell_process_code()).map(|_| ()).map_err(|e| format!("installing the hooks failed: {e}"))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_launcher_setting_is_written_as_rust_literals() {
        let hooks = CellProcessHooks {
            working_directory: Some(PathBuf::from("/data/Wrenmoor \"2027\"")),
            environment: vec![("LANG".into(), Some("de_DE.UTF-8".into())), ("OLD".into(), None)],
        };
        let code = hooks.launcher_setting_code();
        assert!(code.contains(r#"set_current_dir("/data/Wrenmoor \"2027\"")"#), "{code}");
        assert!(code.contains(r#"std::env::set_var("LANG", "de_DE.UTF-8");"#), "{code}");
        assert!(code.contains(r#"std::env::remove_var("OLD");"#), "{code}");
        assert!(CellProcessHooks::default().launcher_setting_code().is_empty());
        assert!(hooks.cell_process_code().starts_with("std::panic::set_hook"));
    }
}
