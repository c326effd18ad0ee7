//! Standby kernels: an engine prepared before anyone asks for it.
//!
//! Preparing the evaluation engine costs a fresh kernel most of its first
//! cell: about 30 s on the 2-core test machine, nearly all of it the
//! engine's type inference building name tables for the whole crate graph
//! behind `plumbline` (polars and ~360 crates), which it does again in every
//! new process. None of it can be saved to disk; it can be done ahead.
//!
//! So a kernel, once its engine is ready and its first cell answered (or 30 s
//! passed without one), starts one **standby kernel**:
//! `plumbline kernel --standby`, a kernel process with no connection file,
//! which claims a work slot of its own (`eval::work_slots`), prepares its
//! engine and waits, for at most `PLUMBLINE_STANDBY_IDLE_MINUTES` (30), on a
//! Unix socket `standby/slot-<n>.sock` under the engine's build directory.
//! The next `plumbline kernel --connection-file F` a front end starts (a new
//! notebook, or a restart) first offers `F` to a waiting standby. The
//! standby takes over — it binds the notebook's sockets and serves it, its
//! engine already warm or still preparing — and the process the front end
//! started stays as its **launcher**: it forwards SIGINT as an interrupt and
//! exits when the standby ends; when the launcher dies, the standby shuts
//! down. If no standby waits, or the one waiting does not fit (below), the
//! kernel starts its own engine as before. Either way, the kernel starts the
//! standby for the next one (`commands::kernel`), and at most one waits at a
//! time.
//!
//! A standby takes over only a launcher that matches it: the same program
//! file (path, size, modification time) and the same values of the
//! variables that shape the engine (`PLUMBLINE_*`, the toolchain's,
//! `PATH`, `HOME`, …; [`environment::VariableRole::Engine`]). The rest of
//! the launcher's environment (`LANG`, `TERM`, `SHELL`, `PG*`, …) is passed
//! to the standby's cell process, so cells see what they would have seen in
//! a kernel of the launcher's own, and so is its working directory. A
//! launcher that differs in an engine variable is declined and prepares an
//! engine of its own — and the standby ends, because the setting kernels
//! are started with has changed (a new install, another engine
//! optimisation level): the kernel that was declined starts the next
//! standby, in the new setting.
//!
//! Set `PLUMBLINE_STANDBY=off` to start no standby kernels (a waiting one
//! holds the engine's memory, a peak of about 2.3 GB).
//!
//! The hand-over is one JSON line each way ([`HandoverRequest`],
//! [`HandoverReply`], version [`HANDOVER_VERSION`]); afterwards the launcher
//! writes a line `interrupt` for each SIGINT it receives.
//!
//! | module | responsibility |
//! |---|---|
//! | [`protocol`] | the hand-over messages and their one-line form |
//! | [`environment`] | which variables must match, which pass to cells |
//! | [`waiting`] | the lock that lets one standby wait per build directory |
//! | [`launcher`] | the launcher: offering a connection file, accompanying the standby |
//! | [`listener`] | the standby: listening, judging a launcher, taking it over |
//! | [`spawn`] | starting the standby for the next kernel |

pub mod environment;
pub mod launcher;
pub mod listener;
pub mod protocol;
pub mod spawn;
pub mod waiting;

pub use environment::{environment_now, launcher_setting};
pub use launcher::{offer, AdoptedStandby};
pub use listener::{judge, Handover, StandbyListener};
pub use protocol::{HandoverReply, HandoverRequest, ProgramIdentity, HANDOVER_VERSION};
pub use spawn::start_one;
pub use waiting::WaitingRole;

use std::path::{Path, PathBuf};
use std::time::Duration;

/// How long a standby waits for a launcher before it ends: 30 minutes, or
/// `PLUMBLINE_STANDBY_IDLE_MINUTES` (a positive number, fractions allowed).
pub fn idle_limit() -> Duration {
    let minutes = std::env::var("PLUMBLINE_STANDBY_IDLE_MINUTES")
        .ok()
        .and_then(|m| m.trim().parse::<f64>().ok())
        .filter(|m| m.is_finite() && *m > 0.0)
        .unwrap_or(30.0);
    Duration::from_secs_f64(60.0 * minutes.min(7.0 * 24.0 * 60.0))
}

/// Whether standby kernels are on (`PLUMBLINE_STANDBY` is not `off`, `0` or `false`).
pub fn enabled() -> bool {
    !matches!(std::env::var("PLUMBLINE_STANDBY").as_deref(), Ok("off" | "0" | "false"))
}

/// The folder of the standby sockets, lock and log under a build directory.
pub fn standby_dir(build_dir: &Path) -> PathBuf {
    build_dir.join("standby")
}
