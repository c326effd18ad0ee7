//! The waiting role: at most one standby prepares or waits per build directory.

use std::fs::File;
use std::path::Path;

/// The role of the one standby that waits (or prepares to) for a build
/// directory: an exclusive lock on `standby/waiting.lock`, held from the
/// standby's start until a launcher takes it over.
pub struct WaitingRole {
    _lock: File,
}

impl WaitingRole {
    /// Takes the role; `Ok(None)` when another standby holds it.
    pub fn take(build_dir: &Path) -> std::io::Result<Option<Self>> {
        use std::os::unix::fs::PermissionsExt;
        let dir = super::standby_dir(build_dir);
        std::fs::create_dir_all(&dir)?;
        // Only this user may reach a standby (a hand-over carries the
        // notebook's signing key, through the connection file's path).
        std::fs::set_permissions(&dir, std::fs::Permissions::from_mode(0o700))?;
        let lock = File::options().create(true).truncate(false).write(true).open(dir.join("waiting.lock"))?;
        match lock.try_lock() {
            Ok(()) => Ok(Some(Self { _lock: lock })),
            Err(std::fs::TryLockError::WouldBlock) => Ok(None),
            Err(std::fs::TryLockError::Error(e)) => Err(e),
        }
    }

    /// Whether the role is free (no standby waits or prepares).
    pub fn is_free(build_dir: &Path) -> bool {
        matches!(Self::take(build_dir), Ok(Some(_)))
    }
}
