//! Starting the standby for the next kernel.

use super::waiting::WaitingRole;
use std::fs::File;
use std::path::Path;

/// Starts a standby kernel for the next front end, unless standbys are off
/// or one already waits or prepares. It runs this same program, in this
/// working directory, in a process group of its own (a Ctrl-C meant for this
/// kernel does not reach it), logging to `standby/standby.log`.
pub fn start_one(build_dir: &Path) {
    if !super::enabled() || !WaitingRole::is_free(build_dir) {
        return;
    }
    let started = (|| -> std::io::Result<std::process::Child> {
        use std::os::unix::process::CommandExt;
        let log = File::create(super::standby_dir(build_dir).join("standby.log"))?;
        let mut command = std::process::Command::new(std::env::current_exe()?);
        for name in crate::eval::ENGINE_VARIABLES {
            command.env_remove(name);
        }
        command
            .args(["kernel", "--standby"])
            .stdin(std::process::Stdio::null())
            .stdout(std::process::Stdio::null())
            .stderr(log)
            .process_group(0)
            .spawn()
    })();
    match started {
        // Reap it when it ends, so it leaves no zombie while we run.
        Ok(mut child) => {
            let _ = std::thread::Builder::new().name("standby-reaper".into()).spawn(move || child.wait());
        }
        Err(e) => eprintln!("plumbline kernel: cannot start a standby kernel: {e}"),
    }
}
