//! Work folders of the engine: one per running engine, claimed by lock.
//!
//! The engine writes its cell crate and builds it in a folder of its own
//! (evcxr's tmpdir, `EVCXR_TMPDIR`): two engines in one folder would
//! overwrite each other's cells. So every process that runs an engine (a
//! kernel, a standby kernel, `plumbline run`, `plumbline install`) claims a
//! *work slot* under the engine's build directory — `work` (the first slot,
//! the one `plumbline install` fills), then `work-1`, `work-2`, … — by
//! holding an exclusive lock on `<slot>.lock` for the life of the process.
//! The operating system drops the lock when the process ends, however it
//! ends, so a crashed kernel never leaves a slot taken.
//!
//! A new slot starts as a copy of the first slot's build, made while holding
//! cargo's own build locks of the first slot (so no build writes into it
//! meanwhile) into a `.partial` folder that is renamed when complete: a slot
//! is whole or absent. Cargo then finds every dependency fresh (checked on
//! the test machine: no crate recompiled). The copy is about 1.9 GB and took
//! 24 s there; it happens once per slot, and slots are kept.

use std::fs::File;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

/// Most engines that may run at once from one build directory.
const MOST_SLOTS: usize = 16;

/// Why no work slot could be claimed or filled.
#[derive(Debug, thiserror::Error)]
pub enum SlotError {
    /// The build directory or a lock file could not be created.
    #[error("cannot prepare the engine work folder `{path}`: {reason}")]
    Io { path: PathBuf, reason: String },
    /// Every slot is taken by a running engine.
    #[error(
        "{MOST_SLOTS} evaluation engines already run from `{0}`; shut a kernel down, or give this one \
         its own PLUMBLINE_ENGINE_DIR"
    )]
    AllTaken(PathBuf),
    /// Copying the first slot's build failed.
    #[error("cannot copy the engine build from `{from}` to `{to}`: {reason}")]
    Copy { from: PathBuf, to: PathBuf, reason: String },
}

/// A claimed work folder; the claim lasts as long as this value (in practice
/// the process, see [`claim_for_process`]).
#[derive(Debug)]
pub struct WorkSlot {
    build_dir: PathBuf,
    index: usize,
    _lock: File,
}

impl WorkSlot {
    /// Claims the first free slot of `build_dir` (creating the directory).
    pub fn claim(build_dir: &Path) -> Result<WorkSlot, SlotError> {
        let io = |path: &Path, e: std::io::Error| SlotError::Io { path: path.to_path_buf(), reason: e.to_string() };
        std::fs::create_dir_all(build_dir).map_err(|e| io(build_dir, e))?;
        for index in 0..MOST_SLOTS {
            let lock_path = build_dir.join(format!("{}.lock", slot_name(index)));
            let lock = File::options()
                .create(true)
                .truncate(false)
                .write(true)
                .open(&lock_path)
                .map_err(|e| io(&lock_path, e))?;
            match lock.try_lock() {
                Ok(()) => return Ok(WorkSlot { build_dir: build_dir.to_path_buf(), index, _lock: lock }),
                Err(std::fs::TryLockError::WouldBlock) => continue,
                Err(std::fs::TryLockError::Error(e)) => return Err(io(&lock_path, e)),
            }
        }
        Err(SlotError::AllTaken(build_dir.to_path_buf()))
    }

    /// The slot's folder (the engine's tmpdir).
    pub fn path(&self) -> PathBuf {
        self.build_dir.join(slot_name(self.index))
    }

    /// The slot's number: 0 for `work`, n for `work-n`.
    pub fn index(&self) -> usize {
        self.index
    }

    /// Whether this slot still needs the first slot's build copied in: it is
    /// not the first slot, has no build of its own, and the first slot has one.
    pub fn needs_copy(&self) -> bool {
        let primary = self.build_dir.join(slot_name(0)).join("target");
        self.index != 0 && !self.path().join("target").exists() && primary.exists()
    }

    /// Copies the first slot's build into this slot when [`Self::needs_copy`];
    /// returns whether it copied. Waits while a build runs in the first slot.
    pub fn copy_primary_build(&self) -> Result<bool, SlotError> {
        if !self.needs_copy() {
            return Ok(false);
        }
        let from = self.build_dir.join(slot_name(0));
        let to = self.path();
        let partial = self.build_dir.join(format!("{}.partial", slot_name(self.index)));
        let copy_error = |reason: String| SlotError::Copy { from: from.clone(), to: to.clone(), reason };
        // Hold every cargo build lock of the first slot, so that no build
        // writes there while we copy (cargo takes the same locks).
        let mut cargo_locks = Vec::new();
        for lock_path in cargo_lock_files(&from.join("target")) {
            let lock = File::options().write(true).open(&lock_path).map_err(|e| copy_error(e.to_string()))?;
            lock.lock().map_err(|e| copy_error(e.to_string()))?;
            cargo_locks.push(lock);
        }
        if partial.exists() {
            std::fs::remove_dir_all(&partial).map_err(|e| copy_error(e.to_string()))?;
        }
        if to.exists() {
            // A slot folder without a build (an engine that never got far).
            std::fs::remove_dir_all(&to).map_err(|e| copy_error(e.to_string()))?;
        }
        // `cp -a` keeps the modification times cargo's freshness checks read,
        // and uses copy-on-write clones where the file system has them.
        let status = Command::new("cp")
            .args(["-a", "--reflink=auto"])
            .arg(&from)
            .arg(&partial)
            .status()
            .map_err(|e| copy_error(format!("cannot run `cp`: {e}")))?;
        if !status.success() {
            let _ = std::fs::remove_dir_all(&partial);
            return Err(copy_error(format!("`cp -a` ended with {status}")));
        }
        std::fs::rename(&partial, &to).map_err(|e| copy_error(e.to_string()))?;
        drop(cargo_locks);
        Ok(true)
    }
}

/// Folder name of slot `index`.
fn slot_name(index: usize) -> String {
    if index == 0 {
        "work".to_string()
    } else {
        format!("work-{index}")
    }
}

/// Cargo's `.cargo-lock` files in a target directory (one per profile
/// folder, host and target triple), at most three levels down.
fn cargo_lock_files(target: &Path) -> Vec<PathBuf> {
    fn walk(dir: &Path, depth: usize, found: &mut Vec<PathBuf>) {
        let Ok(entries) = std::fs::read_dir(dir) else { return };
        for entry in entries.flatten() {
            let path = entry.path();
            if entry.file_name() == ".cargo-lock" {
                found.push(path);
            } else if depth > 0 && entry.file_type().is_ok_and(|t| t.is_dir()) {
                walk(&path, depth - 1, found);
            }
        }
    }
    let mut found = Vec::new();
    walk(target, 2, &mut found);
    found.sort();
    found
}

static PROCESS_SLOT: OnceLock<WorkSlot> = OnceLock::new();

/// Claims a slot for this whole process (see [`WorkSlot::claim`]); a second
/// call returns the slot already claimed.
pub fn claim_for_process(build_dir: &Path) -> Result<&'static WorkSlot, SlotError> {
    if let Some(slot) = PROCESS_SLOT.get() {
        return Ok(slot);
    }
    let slot = WorkSlot::claim(build_dir)?;
    Ok(PROCESS_SLOT.get_or_init(|| slot))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn slots_are_claimed_in_order_and_freed_on_drop() {
        let dir = tempfile::tempdir().expect("temp dir");
        let first = WorkSlot::claim(dir.path()).expect("first");
        let second = WorkSlot::claim(dir.path()).expect("second");
        assert_eq!((first.index(), second.index()), (0, 1));
        assert_eq!(first.path(), dir.path().join("work"));
        assert_eq!(second.path(), dir.path().join("work-1"));
        drop(first);
        assert_eq!(WorkSlot::claim(dir.path()).expect("again").index(), 0);
    }

    #[test]
    fn a_new_slot_copies_the_first_slots_build_whole() {
        let dir = tempfile::tempdir().expect("temp dir");
        let deps = dir.path().join("work").join("target").join("debug");
        std::fs::create_dir_all(&deps).expect("dirs");
        std::fs::write(deps.join(".cargo-lock"), "").expect("lock");
        std::fs::write(deps.join("libx.rlib"), "artifact").expect("artifact");
        let _first = WorkSlot::claim(dir.path()).expect("first");
        let second = WorkSlot::claim(dir.path()).expect("second");
        assert!(second.needs_copy());
        assert!(second.copy_primary_build().expect("copy"));
        let copied = second.path().join("target").join("debug").join("libx.rlib");
        assert_eq!(std::fs::read_to_string(copied).expect("copied"), "artifact");
        assert!(!dir.path().join("work-1.partial").exists());
        assert!(!second.needs_copy());
        assert!(!second.copy_primary_build().expect("second copy"), "a filled slot is not copied again");
    }
}
