//! Where and how the engine builds: read from the environment once, in
//! `main`, and passed down to whoever starts an engine.

use super::work_slots::WorkSlot;
use std::path::PathBuf;

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
    /// The work slot this process claimed (`None`: the engine works in
    /// `build_dir/work` without a claim, as unit tests do).
    slot: Option<&'static WorkSlot>,
}

impl EngineConfig {
    /// The settings of this process's environment: the analysis crate this
    /// kernel was built from (or `$PLUMBLINE_ANALYSIS_PATH`), the build
    /// directory `$PLUMBLINE_ENGINE_DIR` or `~/.cache/plumbline/engine-<version>`,
    /// and `$PLUMBLINE_ENGINE_OPT` as the optimisation level; the work
    /// folder is `work` until [`Self::in_slot`] names a claimed one. Paths
    /// are absolute.
    ///
    /// `main` calls this once; everything below receives the value.
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
        let work_dir = build_dir.join("work");
        Self { analysis_path, build_dir, work_dir, opt_level, slot: None }
    }

    /// These settings, working in the claimed `slot`.
    pub fn in_slot(self, slot: &'static WorkSlot) -> Self {
        Self { work_dir: slot.path(), slot: Some(slot), ..self }
    }

    /// The work slot this engine claimed, if any.
    pub fn slot(&self) -> Option<&'static WorkSlot> {
        self.slot
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
