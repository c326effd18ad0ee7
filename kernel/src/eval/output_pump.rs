//! One ordered event stream per cell.
//!
//! The engine hands over the cell process's output lines on two channels
//! (all of a cell's output arrives on the stdout one, see `runtime_relay`).
//! One pump thread owns both receivers and sends each line, decoded, to the
//! event channel of the cell that is running, or to the *stray* channel when
//! none is (threads a cell started may print after it ended).
//!
//! **Ordering invariant.** The engine reads the cell process's stdout on the
//! thread that runs the cell and puts every line into the channel *before*
//! `execute` returns. After `execute` returns, the engine thread calls
//! [`OutputPump::finish`]: the pump, which handles one message at a time,
//! first drains both channels into the cell's events, then answers with what
//! it noticed ([`CellSignals`]). Only then does the engine thread send the
//! cell's `Finished` event. So every line a cell printed precedes its
//! `Finished` event, by construction and without waiting on a clock.

use super::cell::{CellEvent, StreamLine};
use super::runtime_relay::{CELL_ABORT_MARKER, CELL_ERROR_MARKER, STDERR_LINE_MARKER};
use crossbeam_channel::{select, Receiver, Sender};
use tokio::sync::mpsc::UnboundedSender;

/// Lines of standard error kept for error messages.
const RECENT_STDERR_LINES: usize = 64;

/// What the pump noticed while a cell ran.
#[derive(Debug, Clone, Default)]
pub struct CellSignals {
    /// The cell stopped at a `?` (our relay's marker line).
    pub stopped_at_question_mark: bool,
    /// The cell process aborted (our abort handler's marker line).
    pub aborted: bool,
    /// The cell's latest standard-error lines, oldest first (no newlines).
    pub recent_stderr: Vec<String>,
}

impl CellSignals {
    /// The message of a `?` failure: the last non-blank standard-error line,
    /// where the engine printed the error.
    pub fn question_mark_message(&self) -> String {
        self.recent_stderr
            .iter()
            .rev()
            .find(|l| !l.trim().is_empty())
            .cloned()
            .unwrap_or_else(|| "a `?` in the cell returned an error".into())
    }
}

enum Command {
    /// Route lines to this cell from now on.
    Begin(UnboundedSender<CellEvent>),
    /// Drain both channels into the current cell, forget it, answer with its signals.
    Finish(Sender<CellSignals>),
}

/// Handle to the pump thread (see the module documentation).
pub struct OutputPump {
    commands: Sender<Command>,
}

impl OutputPump {
    /// Starts the pump on the engine's two output channels; lines printed
    /// while no cell runs go to `stray`.
    pub fn start(stdout: Receiver<String>, stderr: Receiver<String>, stray: UnboundedSender<StreamLine>) -> Self {
        let (commands, inbox) = crossbeam_channel::unbounded();
        let pump = Pump { stdout, stderr, stray, cell: None, signals: CellSignals::default() };
        let spawned = std::thread::Builder::new().name("plumbline-output-pump".into()).spawn(move || pump.run(inbox));
        if let Err(e) = spawned {
            eprintln!("plumbline kernel: cannot start the output thread: {e}");
        }
        Self { commands }
    }

    /// Routes output to `events` until [`finish`](Self::finish).
    pub fn begin(&self, events: UnboundedSender<CellEvent>) {
        let _ = self.commands.send(Command::Begin(events));
    }

    /// Delivers the cell's remaining output and returns what was noticed.
    /// Call after the engine's `execute` returned.
    pub fn finish(&self) -> CellSignals {
        let (reply, answer) = crossbeam_channel::bounded(1);
        if self.commands.send(Command::Finish(reply)).is_err() {
            return CellSignals::default();
        }
        answer.recv().unwrap_or_default()
    }
}

struct Pump {
    stdout: Receiver<String>,
    stderr: Receiver<String>,
    stray: UnboundedSender<StreamLine>,
    cell: Option<UnboundedSender<CellEvent>>,
    signals: CellSignals,
}

impl Pump {
    fn run(mut self, commands: Receiver<Command>) {
        loop {
            select! {
                recv(self.stdout) -> line => match line {
                    Ok(line) => self.route("stdout", line),
                    Err(_) => self.stdout = crossbeam_channel::never(),
                },
                recv(self.stderr) -> line => match line {
                    Ok(line) => self.route("stderr", line),
                    Err(_) => self.stderr = crossbeam_channel::never(),
                },
                recv(commands) -> command => match command {
                    Ok(Command::Begin(events)) => {
                        self.cell = Some(events);
                        self.signals = CellSignals::default();
                    }
                    Ok(Command::Finish(reply)) => {
                        while let Ok(line) = self.stdout.try_recv() {
                            self.route("stdout", line);
                        }
                        while let Ok(line) = self.stderr.try_recv() {
                            self.route("stderr", line);
                        }
                        self.cell = None;
                        let _ = reply.send(std::mem::take(&mut self.signals));
                    }
                    Err(_) => return,
                },
            }
        }
    }

    /// Decodes one line from the engine and sends it on.
    fn route(&mut self, channel: &'static str, line: String) {
        if line == CELL_ERROR_MARKER {
            self.signals.stopped_at_question_mark = true;
            return;
        }
        if line == CELL_ABORT_MARKER {
            self.signals.aborted = true;
            return;
        }
        let (name, text) = match line.strip_prefix(STDERR_LINE_MARKER) {
            Some(text) => ("stderr", text.to_string()),
            None => (channel, line),
        };
        if name == "stderr" {
            if self.signals.recent_stderr.len() >= RECENT_STDERR_LINES {
                self.signals.recent_stderr.remove(0);
            }
            self.signals.recent_stderr.push(text.clone());
        }
        let line = StreamLine { name, text: text + "\n" };
        match &self.cell {
            Some(events) => {
                if let Err(unsent) = events.send(CellEvent::Output(line)) {
                    // Nobody reads this cell's events any more (its request
                    // was abandoned); the line is not lost.
                    if let CellEvent::Output(line) = unsent.0 {
                        let _ = self.stray.send(line);
                    }
                }
            }
            None => {
                let _ = self.stray.send(line);
            }
        }
    }
}
