//! The engine session thread.
//!
//! One thread owns the engine (`evcxr::CommandContext`) and takes requests in
//! order. A cell's output reaches its caller as one ordered event stream
//! ([`CellEvent`]): output lines while it runs, then exactly one `Finished`
//! with the outcome, after every line (see `output_pump`). Nothing here waits
//! on a clock.

use super::cell::{CellEvent, CompleteOutcome, EnginePhase, ExecOutcome, StreamLine};
use super::config::EngineConfig;
use super::interrupter::Interrupter;
use super::outcome::{cell_outcome, user_variables};
use super::preparation::{Preparation, PreparationObserver};
use super::startup::{start_engine, CellProcessHooks};
use std::path::PathBuf;
use std::sync::mpsc;
use std::sync::Arc;
use std::time::Instant;
use tokio::sync::mpsc::{unbounded_channel, UnboundedReceiver, UnboundedSender};

enum Request {
    Execute { code: String, events: UnboundedSender<CellEvent> },
    Complete { code: String, cursor: usize, reply: mpsc::Sender<CompleteOutcome> },
    Inspect { code: String, cursor: usize, reply: mpsc::Sender<Option<(String, String)>> },
    Adopt { working_directory: PathBuf, environment: Vec<(String, Option<String>)> },
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
            let _ = events.send(CellEvent::Finished(ExecOutcome::engine_gone()));
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
        (lines, ExecOutcome::engine_gone())
    }

    /// Completion candidates at byte offset `cursor`.
    pub fn complete(&self, code: &str, cursor: usize) -> CompleteOutcome {
        let (reply, answer) = mpsc::channel();
        if self.requests.send(Request::Complete { code: code.to_string(), cursor, reply }).is_err() {
            return CompleteOutcome::none_at(cursor);
        }
        answer.recv().unwrap_or_default()
    }

    /// `(plain, html)` documentation of the item at byte offset `cursor`.
    pub fn inspect(&self, code: &str, cursor: usize) -> Option<(String, String)> {
        let (reply, answer) = mpsc::channel();
        self.requests.send(Request::Inspect { code: code.to_string(), cursor, reply }).ok()?;
        answer.recv().ok().flatten()
    }

    /// Makes the cell process run where a standby's launcher was started and
    /// see its environment: `environment` sets (`Some`) or removes (`None`)
    /// variables, in order. Queued ahead of every later cell, and applied
    /// again whenever the cell process restarts.
    pub fn adopt_launcher(&self, working_directory: PathBuf, environment: Vec<(String, Option<String>)>) {
        let _ = self.requests.send(Request::Adopt { working_directory, environment });
    }
}

/// Gives the memory the engine freed back to the system. Its preparation
/// (type inference over the whole crate graph) frees a large share of what
/// it allocated; the allocator keeps freed pages for reuse, so without this
/// a waiting standby or an idle kernel holds them for its whole life.
fn return_freed_memory() {
    #[cfg(all(target_os = "linux", target_env = "gnu"))]
    // SAFETY: `malloc_trim` only releases free heap pages; glibc makes it
    // safe to call while other threads allocate.
    unsafe {
        libc::malloc_trim(0);
    }
}

/// Answers every request with the startup problem.
fn refuse_all(inbox: mpsc::Receiver<Request>, message: &str) {
    for request in inbox {
        match request {
            Request::Execute { events, .. } => {
                let _ = events.send(CellEvent::Finished(ExecOutcome::failure(
                    "EngineUnavailable",
                    message.to_string(),
                    vec![message.to_string()],
                )));
            }
            Request::Complete { cursor, reply, .. } => {
                let _ = reply.send(CompleteOutcome::none_at(cursor));
            }
            Request::Inspect { reply, .. } => {
                let _ = reply.send(None);
            }
            Request::Adopt { .. } => {}
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
    let mut hooks = CellProcessHooks::default();
    let startup = start_engine(&config, stray, &interrupter, &hooks, Arc::clone(&observer));
    let (mut engine, pump) = match startup {
        Ok(parts) => parts,
        Err(message) => {
            observer(&Preparation::Failed(message.clone()));
            refuse_all(inbox, &message);
            return;
        }
    };
    return_freed_memory();
    observer(&Preparation::Ready(started.elapsed()));
    let mut cells = 0_u64;
    for request in inbox {
        match request {
            Request::Execute { code, events } => {
                let before = user_variables(&engine);
                pump.begin(events.clone());
                interrupter.set_running(true);
                let began = Instant::now();
                let result = engine.execute(&code);
                let took = began.elapsed();
                interrupter.set_running(false);
                let signals = pump.finish();
                let phases = result.as_ref().map(EnginePhase::of).unwrap_or_default();
                cells += 1;
                eprintln!("plumbline engine: cell {cells}: {}", EnginePhase::log_line(&phases, took));
                let mut outcome =
                    cell_outcome(&mut engine, &code, result, &signals, &before, interrupter.fired(), &hooks);
                outcome.phases = phases;
                let _ = events.send(CellEvent::Finished(outcome));
            }
            Request::Complete { code, cursor, reply } => {
                let outcome = match engine.completions(&code, cursor.min(code.len())) {
                    Ok(c) => CompleteOutcome {
                        matches: c.completions.into_iter().map(|x| x.code).collect(),
                        cursor_start: c.start_offset,
                        cursor_end: c.end_offset,
                    },
                    Err(_) => CompleteOutcome::none_at(cursor),
                };
                let _ = reply.send(outcome);
            }
            Request::Inspect { code, cursor, reply } => {
                let answer =
                    engine.hover_at(&code, cursor.min(code.len())).ok().filter(|(plain, _)| !plain.trim().is_empty());
                let _ = reply.send(answer);
            }
            Request::Adopt { working_directory, environment } => {
                hooks = CellProcessHooks { working_directory: Some(working_directory), environment };
                if let Err(problem) = hooks.apply_launcher_setting(&mut engine) {
                    eprintln!("plumbline kernel: the cell process could not take the launcher's setting: {problem}");
                }
            }
        }
    }
}
