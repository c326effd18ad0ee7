//! Making `?` failures in cells visible.
//!
//! The engine wraps each cell in a function returning a `Result`; when a `?`
//! in the cell returns early, the engine prints the error on standard error,
//! prints a private line on the cell process's standard output, consumes that
//! line itself, and reports the cell as *successful*. A kernel or runner would
//! then carry on as if nothing failed.
//!
//! The cell process is this same binary (see `evcxr::runtime_hook`), so before
//! it turns into the engine's runtime we put a relay between its standard
//! output and the pipe to the engine: every line passes through unchanged, and
//! just before the engine's private error line the relay writes our own
//! [`CELL_ERROR_MARKER`] line, which the engine forwards as ordinary output and
//! the session turns into a failed cell.

/// Environment variable the engine sets in its cell process.
const RUNTIME_ENV: &str = "EVCXR_IS_RUNTIME";
/// The line the engine's generated code prints after a `?` returned early.
const ENGINE_ERROR_LINE: &str = "EVCXR_ERROR_OCCURRED";
/// The line our relay adds before it; the session reads it as "the cell failed".
pub const CELL_ERROR_MARKER: &str = "\u{1e}plumbline-cell-error";

/// In the engine's cell process, relays standard output through a thread that
/// marks `?` failures; elsewhere does nothing. Call first thing in `main`,
/// before `evcxr::runtime_hook`.
pub fn relay_cell_process_output() {
    if std::env::var_os(RUNTIME_ENV).is_none() {
        return;
    }
    #[cfg(unix)]
    unix::install();
}

#[cfg(unix)]
mod unix {
    use super::{CELL_ERROR_MARKER, ENGINE_ERROR_LINE};
    use std::io::{BufRead, BufReader, Write};
    use std::os::fd::{FromRawFd, OwnedFd};

    /// Replaces file descriptor 1 by the write end of a pipe whose read end a
    /// thread copies, line by line, to the original standard output. If any
    /// step fails the process keeps its original standard output (cells then
    /// run as before, only without the `?` marker).
    pub(super) fn install() {
        let mut ends = [0; 2];
        // SAFETY: `pipe` writes two new descriptors into the array we own.
        if unsafe { libc::pipe(ends.as_mut_ptr()) } != 0 {
            return;
        }
        // SAFETY: `dup` of descriptor 1, which the process holds open.
        let original = unsafe { libc::dup(1) };
        if original < 0 {
            return;
        }
        // SAFETY: `dup2` replaces descriptor 1 with the pipe's write end; both are open.
        if unsafe { libc::dup2(ends[1], 1) } < 0 {
            return;
        }
        // SAFETY: each descriptor below is open and owned by exactly one value from here on.
        let (read_end, spare_write_end, original) =
            unsafe { (OwnedFd::from_raw_fd(ends[0]), OwnedFd::from_raw_fd(ends[1]), OwnedFd::from_raw_fd(original)) };
        drop(spare_write_end); // descriptor 1 keeps the pipe open
        let spawned = std::thread::Builder::new().name("plumbline-stdout-relay".into()).spawn(move || {
            let mut input = BufReader::new(std::fs::File::from(read_end));
            let mut output = std::fs::File::from(original);
            let mut line = Vec::new();
            while matches!(input.read_until(b'\n', &mut line), Ok(n) if n > 0) {
                if line.strip_suffix(b"\n").unwrap_or(&line) == ENGINE_ERROR_LINE.as_bytes() {
                    let _ = writeln!(output, "{CELL_ERROR_MARKER}");
                }
                let _ = output.write_all(&line);
                let _ = output.flush();
                line.clear();
            }
        });
        drop(spawned);
    }
}
