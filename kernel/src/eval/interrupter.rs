//! Stopping a running cell: the only way the engine offers is to kill the
//! process that runs cells (the engine starts a new one; variables are lost).

use std::process::Child;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, Mutex};

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

    pub(super) fn set_process(&self, process: Arc<Mutex<Child>>) {
        if let Ok(mut slot) = self.inner.process.lock() {
            *slot = Some(process);
        }
    }

    /// Marks a cell as running (under the same lock `interrupt` takes, so an
    /// interrupt sees either the whole cell or none of it).
    pub(super) fn set_running(&self, running: bool) {
        let _guard = self.inner.process.lock();
        self.inner.running.store(running, Ordering::SeqCst);
        if running {
            self.inner.fired.store(false, Ordering::SeqCst);
        }
    }

    pub(super) fn fired(&self) -> bool {
        self.inner.fired.swap(false, Ordering::SeqCst)
    }
}
