//! Progress of the engine's preparation, for people waiting on it.
//!
//! A new session starts the engine, loads `plumbline` into it and warms its
//! type inference. The first time on a machine that includes compiling
//! `plumbline` and its dependencies inside the engine (minutes, once per
//! installation). [`watch_compilation`] counts the crates compiled meanwhile,
//! so a kernel or a run can say how far it got.

use std::io::Write;
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

/// Where a session's preparation stands.
#[derive(Debug, Clone, PartialEq)]
pub enum Preparation {
    /// Starting the engine process.
    Starting,
    /// Compiling crates for the engine (first start on a machine).
    Compiling {
        /// Crates compiled so far.
        crates: usize,
        /// The crate being compiled now.
        current: String,
    },
    /// Copying the first engine's build into this engine's own work folder
    /// (once per work folder, see `work_slots`).
    CopyingBuild,
    /// Loading `plumbline` and warming type inference.
    Loading,
    /// Ready for cells, after this long.
    Ready(Duration),
    /// Preparation failed; cells get this message.
    Failed(String),
}

impl Preparation {
    /// One line for people: what is happening and how long it has taken.
    pub fn describe(&self, elapsed: Duration) -> String {
        let clock = |d: Duration| format!("{}:{:02}", d.as_secs() / 60, d.as_secs() % 60);
        match self {
            Self::Starting => format!("Starting the evaluation engine… ({})", clock(elapsed)),
            Self::Compiling { crates, current } => format!(
                "Compiling plumbline for the evaluation engine — once per installation, several minutes: \
                 {crates} {} compiled, now {current} ({})",
                if *crates == 1 { "crate" } else { "crates" },
                clock(elapsed)
            ),
            Self::CopyingBuild => format!(
                "Copying the evaluation engine's build for a second engine — once per engine folder… ({})",
                clock(elapsed)
            ),
            Self::Loading => format!("Loading plumbline into the evaluation engine… ({})", clock(elapsed)),
            Self::Ready(after) => format!("Evaluation engine ready (prepared in {}).", clock(*after)),
            Self::Failed(message) => format!("The evaluation engine could not start: {message}"),
        }
    }

    /// Whether cells can run (or will only get the failure).
    pub fn is_settled(&self) -> bool {
        matches!(self, Self::Ready(_) | Self::Failed(_))
    }
}

/// Receives preparation updates; called from the engine's threads.
pub type PreparationObserver = dyn Fn(&Preparation) + Send + Sync;

/// An observer printing the engine's preparation on standard error, at most
/// one line per five seconds while it compiles (and always the last state);
/// silent when `enabled` is false.
pub fn lines_on_stderr(enabled: bool) -> Arc<PreparationObserver> {
    let started = Instant::now();
    let last = Mutex::new(None::<Instant>);
    Arc::new(move |state: &Preparation| {
        if !enabled {
            return;
        }
        if let Preparation::Compiling { .. } = state {
            let Ok(mut last) = last.lock() else { return };
            if last.is_some_and(|t| t.elapsed() < Duration::from_secs(5)) {
                return;
            }
            *last = Some(Instant::now());
        }
        if matches!(state, Preparation::Starting) {
            return;
        }
        let mut err = std::io::stderr().lock();
        let _ = writeln!(err, "[engine] {}", state.describe(started.elapsed()));
        let _ = err.flush();
    })
}

/// How often the build directory is looked at while the engine prepares.
const POLL_INTERVAL: Duration = Duration::from_millis(700);

/// Runs `work` (the engine's first commands) while a thread watches the
/// engine's build directory `target_dir`: each library the engine's cargo
/// finishes leaves a `lib<crate>-<hash>.rmeta` (or `.so`) in a `deps`
/// folder, so their count, beyond what was there at the start, is the number
/// of crates compiled, and the newest names the crate just finished. Nothing
/// is reported when nothing compiles (a warm start).
///
/// The engine offers no progress hook and prints cargo's status lines only
/// for some crate names, hence the directory.
pub fn watch_compilation<R>(target_dir: &Path, observer: Arc<PreparationObserver>, work: impl FnOnce() -> R) -> R {
    let finished = Arc::new(AtomicBool::new(false));
    let watcher_finished = Arc::clone(&finished);
    let target_dir = target_dir.to_path_buf();
    let spawned = std::thread::Builder::new().name("plumbline-build-watch".into()).spawn(move || {
        let initial = built_libraries(&target_dir).0;
        let mut reported = initial;
        while !watcher_finished.load(Ordering::SeqCst) {
            std::thread::park_timeout(POLL_INTERVAL);
            let (count, newest) = built_libraries(&target_dir);
            if count > reported && !watcher_finished.load(Ordering::SeqCst) {
                reported = count;
                observer(&Preparation::Compiling { crates: count - initial, current: newest.unwrap_or_default() });
            }
        }
    });
    let result = work();
    finished.store(true, Ordering::SeqCst);
    if let Ok(handle) = spawned {
        handle.thread().unpark();
        let _ = handle.join();
    }
    result
}

/// Distinct libraries built under `target_dir/*/debug/deps` (and
/// `target_dir/debug/deps`), and the crate name of the newest.
fn built_libraries(target_dir: &Path) -> (usize, Option<String>) {
    let mut folders = vec![target_dir.join("debug").join("deps")];
    if let Ok(entries) = std::fs::read_dir(target_dir) {
        folders.extend(entries.flatten().map(|e| e.path().join("debug").join("deps")));
    }
    let mut stems = std::collections::HashSet::new();
    let mut newest: Option<(std::time::SystemTime, String)> = None;
    for folder in folders {
        let Ok(entries) = std::fs::read_dir(&folder) else { continue };
        for entry in entries.flatten() {
            let name = entry.file_name().to_string_lossy().into_owned();
            let Some(stem) = library_stem(&name) else { continue };
            if crate_of_stem(stem) == CELL_CRATE {
                continue;
            }
            if stems.insert(stem.to_string()) {
                let modified = entry.metadata().and_then(|m| m.modified()).ok();
                if let Some(time) = modified {
                    if newest.as_ref().is_none_or(|(t, _)| time > *t) {
                        newest = Some((time, crate_of_stem(stem).to_string()));
                    }
                }
            }
        }
    }
    (stems.len(), newest.map(|(_, name)| name))
}

/// The crate the engine compiles each cell into (not a dependency).
const CELL_CRATE: &str = "ctx";

/// `libpolars_core-0a1b2c` out of `libpolars_core-0a1b2c.rmeta` (or `.so`).
fn library_stem(file: &str) -> Option<&str> {
    let stem = file.strip_suffix(".rmeta").or_else(|| file.strip_suffix(".so"))?;
    stem.starts_with("lib").then_some(stem)
}

/// `polars_core` out of `libpolars_core-0a1b2c`.
fn crate_of_stem(stem: &str) -> &str {
    let name = stem.strip_prefix("lib").unwrap_or(stem);
    name.rsplit_once('-').map_or(name, |(crate_name, _)| crate_name)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn library_files_name_their_crate() {
        let stem = library_stem("libpolars_core-0a1b2c3d.rmeta").expect("a library");
        assert_eq!(crate_of_stem(stem), "polars_core");
        assert_eq!(library_stem("build_script_build-0a1b"), None);
        assert_eq!(library_stem("libfoo-01.d"), None);
    }

    #[test]
    fn descriptions_say_what_happens() {
        let text = Preparation::Compiling { crates: 12, current: "faer".into() }.describe(Duration::from_secs(75));
        assert!(text.contains("12 crates compiled, now faer (1:15)"), "{text}");
    }
}
