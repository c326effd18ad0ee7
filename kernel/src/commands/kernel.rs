//! `plumbline kernel --connection-file F`: what the kernelspec starts; and
//! `plumbline kernel --standby`, the kernel prepared ahead for the next one
//! (see `crate::standby`).
//!
//! The order of a kernel's start matters, and `main` keeps it:
//! 1. [`hand_over_to_standby`]: offer `F` to a waiting standby, before this
//!    process starts a thread or claims a work slot. If one takes it, this
//!    process only accompanies it.
//! 2. Otherwise `main` claims a work slot and sets the engine's environment
//!    (single-threaded still), then [`run`] serves with an engine of its own.

use super::CommandError;
use crate::cli::KernelArgs;
use crate::eval::EngineConfig;
use crate::server::{PreparedEngine, ServeHooks};
use crate::standby;
use crate::wire::ConnectionFile;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

/// Offers the connection file to a waiting standby kernel; `Some` (the
/// command's outcome) when one took it and has since ended.
pub fn hand_over_to_standby(args: &KernelArgs, build_dir: &Path) -> Option<Result<String, CommandError>> {
    let connection_file = args.connection_file.as_ref()?;
    if !standby::enabled() {
        return None;
    }
    let adopted = standby::offer(build_dir, connection_file)?;
    Some(
        adopted
            .accompany()
            .map(|()| String::new())
            .map_err(|e| CommandError::Runtime(format!("lost the standby kernel: {e}"))),
    )
}

/// Serves the notebook protocol until shutdown, with an engine of this
/// process (`--connection-file`), or waits as a standby (`--standby`).
/// `config` holds the work slot `main` claimed; `launch_environment` is the
/// environment this process started with, before `main` set the engine's
/// variables.
pub fn run(
    args: &KernelArgs,
    config: EngineConfig,
    launch_environment: BTreeMap<String, String>,
) -> Result<String, CommandError> {
    let runtime = tokio::runtime::Builder::new_multi_thread()
        .worker_threads(2)
        .enable_all()
        .build()
        .map_err(|e| CommandError::Runtime(format!("cannot start the async runtime: {e}")))?;
    let served = match &args.connection_file {
        Some(path) => {
            let connection = ConnectionFile::read(path).map_err(|e| CommandError::Usage(e.to_string()))?;
            runtime.block_on(async {
                let build_dir = config.build_dir.clone();
                let engine = PreparedEngine::start(config);
                let (answered_tx, answered) = tokio::sync::oneshot::channel();
                let mut companions = tokio::task::JoinSet::new();
                start_next_standby_later(&mut companions, &engine, answered, build_dir);
                let hooks = ServeHooks { companions, first_cell_answered: Some(answered_tx), ..ServeHooks::default() };
                crate::server::serve(connection, engine, hooks).await
            })
        }
        None => runtime.block_on(wait_as_standby(config, launch_environment)),
    };
    // Every task the kernel spawned has ended (`serve` waits for them); what
    // may remain are blocking calls into the engine thread (completion,
    // inspection), which cannot be cancelled and end with the process.
    runtime.shutdown_background();
    served.map_err(|e| CommandError::Runtime(e.to_string()))?;
    Ok(String::new())
}

/// The standby's life: prepare, wait for a launcher, serve its notebook.
async fn wait_as_standby(
    config: EngineConfig,
    launch_environment: BTreeMap<String, String>,
) -> Result<(), crate::server::ServeError> {
    let Ok(Some(role)) = standby::WaitingRole::take(&config.build_dir) else {
        eprintln!("plumbline standby: another standby kernel waits already; ending");
        return Ok(());
    };
    let Some(slot) = config.slot() else {
        eprintln!("plumbline standby: no work slot claimed; ending");
        return Ok(());
    };
    let program = match standby::ProgramIdentity::current() {
        Ok(program) => program,
        Err(e) => {
            eprintln!("plumbline standby: cannot read this program's file: {e}; ending");
            return Ok(());
        }
    };
    let build_dir = config.build_dir.clone();
    let work_dir = config.work_dir.clone();
    let engine = PreparedEngine::start(config);
    let mut listener = match standby::StandbyListener::bind(&build_dir, slot.index(), role) {
        Ok(listener) => listener,
        Err(e) => {
            eprintln!("plumbline standby: cannot listen for kernels: {e}; ending");
            engine.session.terminate();
            return Ok(());
        }
    };
    eprintln!("plumbline standby {}: preparing in {}", std::process::id(), work_dir.display());
    let preparation = engine.preparation_watch();
    let prepared = async move {
        match PreparedEngine::settled_in(preparation).await {
            Ok(after) => {
                eprintln!("plumbline standby: ready (prepared in {:.1} s)", after.as_secs_f64());
                // Ready: wait on, for as long as the listener does.
                std::future::pending::<String>().await
            }
            Err(message) => message,
        }
    };
    let waited = tokio::select! {
        waited = listener.wait(&program, &launch_environment) => waited,
        // A standby whose engine failed serves no one: the next kernel
        // should try a fresh engine of its own.
        message = prepared => {
            eprintln!("plumbline standby: preparation failed: {message}; ending");
            engine.session.terminate();
            return Ok(());
        }
    };
    let handover = match waited {
        Ok(Some(handover)) => handover,
        Ok(None) => {
            eprintln!("plumbline standby: ending (idle limit reached, or it did not fit the kernel started now)");
            engine.session.terminate();
            return Ok(());
        }
        Err(e) => {
            eprintln!("plumbline standby: the standby socket failed: {e}; ending");
            engine.session.terminate();
            return Ok(());
        }
    };
    // No other launcher may reach this standby now.
    drop(listener);
    let standby::Handover { request, connection, stream } = handover;
    eprintln!("plumbline standby: serving {}", request.connection_file.display());
    take_launchers_setting(&engine, &request, &launch_environment);
    // The launcher's line `interrupt` interrupts; its end ends this kernel.
    let (ended_tx, ended_rx) = tokio::sync::oneshot::channel();
    let interrupter = engine.session.interrupter();
    let mut companions = tokio::task::JoinSet::new();
    companions.spawn(async move {
        use tokio::io::AsyncBufReadExt;
        let mut lines = tokio::io::BufReader::new(stream).lines();
        while let Ok(Some(line)) = lines.next_line().await {
            if line.trim() == "interrupt" {
                interrupter.interrupt();
            }
        }
        let _ = ended_tx.send(());
    });
    let (answered_tx, answered) = tokio::sync::oneshot::channel();
    start_next_standby_later(&mut companions, &engine, answered, build_dir);
    let hooks = ServeHooks { companions, ended_elsewhere: Some(ended_rx), first_cell_answered: Some(answered_tx) };
    crate::server::serve(connection, engine, hooks).await
}

/// How long after its engine is ready a kernel whose first cell has not
/// come yet starts the next standby anyway: 30 s.
const STANDBY_START_WITHOUT_A_CELL: std::time::Duration = std::time::Duration::from_secs(30);

/// Starts the standby for the next kernel once this kernel's engine is ready
/// and its first cell was answered (or [`STANDBY_START_WITHOUT_A_CELL`]
/// passed without one): preparing a standby takes a core for most of a
/// minute, which the analyst's first cell should not have to share.
fn start_next_standby_later(
    tasks: &mut tokio::task::JoinSet<()>,
    engine: &PreparedEngine,
    first_cell_answered: tokio::sync::oneshot::Receiver<()>,
    build_dir: PathBuf,
) {
    let ready = engine.preparation_watch();
    tasks.spawn(async move {
        if PreparedEngine::settled_in(ready).await.is_err() {
            return;
        }
        let _ = tokio::time::timeout(STANDBY_START_WITHOUT_A_CELL, first_cell_answered).await;
        standby::start_one(&build_dir);
    });
}

/// Moves this process to the launcher's working directory, and has the
/// cell process take the launcher's working directory and the environment
/// variables cells may read (`standby::environment`): cells then run as
/// they would have in a kernel of the launcher's own. The cell process
/// takes them through the engine session, ahead of every notebook cell and
/// again after each restart of that process.
fn take_launchers_setting(
    engine: &PreparedEngine,
    request: &standby::HandoverRequest,
    own_environment: &BTreeMap<String, String>,
) {
    let directory = &request.working_directory;
    if let Err(e) = std::env::set_current_dir(directory) {
        eprintln!("plumbline standby: cannot move to {}: {e}", directory.display());
    }
    let environment = standby::launcher_setting(own_environment, &request.environment);
    if !environment.is_empty() {
        let names: Vec<&str> = environment.iter().map(|(name, _)| name.as_str()).collect();
        eprintln!("plumbline standby: cells take the launcher's {}", names.join(", "));
    }
    engine.session.adopt_launcher(directory.clone(), environment);
}
