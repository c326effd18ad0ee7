//! The cell process's output, as one ordered stream.
//!
//! The engine runs cells in a child copy of this binary (see
//! `evcxr::runtime_hook`). Left alone, that child has two pipes to the
//! engine: standard output, which the engine reads on the thread that runs the
//! cell (so every stdout line is handed over before `execute` returns), and
//! standard error, which an engine thread forwards whenever it gets to it (so
//! an error line can arrive after the cell's reply, or before output printed
//! ahead of it). Two more gaps: when a `?` in a cell returns early the engine
//! reports the cell as *successful*, and when the process dies its last lines
//! may still sit in a pipe.
//!
//! Before the child turns into the engine's runtime we therefore put a relay
//! thread between the cell and the engine's stdout pipe:
//!
//! * descriptor 1 and descriptor 2 each become the write end of a pipe of our
//!   own; the relay `poll`s both and writes every line, in order, to the
//!   engine's stdout pipe — standard-error lines prefixed with
//!   [`STDERR_LINE_MARKER`]. Before each standard-output line it first drains
//!   whatever standard error holds: a write to descriptor 2 that finished
//!   before a write to descriptor 1 began is always relayed first. The engine's
//!   end-of-cell line is a stdout line, so all of a cell's output reaches the
//!   engine before the cell is reported done.
//! * just before the engine's private "`?` returned early" line the relay
//!   writes [`CELL_ERROR_MARKER`], which the session turns into a failed cell.
//! * on `SIGABRT` (`std::process::abort`, a failed native assertion, the
//!   engine's own crash handler) a handler asks the relay, through a pipe, to
//!   relay everything both pipes hold and then [`CELL_ABORT_MARKER`], waits
//!   for its answer (at most two seconds, in case the relay itself is gone),
//!   and lets the abort go on: the cell's last lines and the reason reach the
//!   kernel.

/// Environment variable the engine sets in its cell process.
const RUNTIME_ENV: &str = "EVCXR_IS_RUNTIME";
/// The line the engine's generated code prints after a `?` returned early.
const ENGINE_ERROR_LINE: &str = "EVCXR_ERROR_OCCURRED";
/// The line our relay adds before it; the session reads it as "the cell failed".
pub const CELL_ERROR_MARKER: &str = "\u{1e}plumbline-cell-error";
/// Prefix of a relayed standard-error line.
pub const STDERR_LINE_MARKER: &str = "\u{1e}plumbline-stderr ";
/// The line written when the cell process aborts.
pub const CELL_ABORT_MARKER: &str = "\u{1e}plumbline-cell-aborted";

/// In the engine's cell process, installs the relay described in the module
/// documentation; elsewhere does nothing. Call first thing in `main`, before
/// `evcxr::runtime_hook`.
pub fn relay_cell_process_output() {
    if std::env::var_os(RUNTIME_ENV).is_none() {
        return;
    }
    #[cfg(unix)]
    unix::install();
}

#[cfg(unix)]
mod unix {
    use super::{CELL_ERROR_MARKER, ENGINE_ERROR_LINE, STDERR_LINE_MARKER};
    use std::os::fd::{AsRawFd, FromRawFd, OwnedFd, RawFd};
    use std::sync::atomic::{AtomicI32, Ordering};

    /// The pipe on which the abort handler asks the relay to flush, and the
    /// one on which the relay answers (-1 until installed).
    static FLUSH_REQUEST: AtomicI32 = AtomicI32::new(-1);
    static FLUSH_DONE: AtomicI32 = AtomicI32::new(-1);
    /// How long the abort handler waits for the relay's answer, in ms.
    const FLUSH_WAIT_MS: libc::c_int = 2000;

    /// [`super::CELL_ABORT_MARKER`] as the relay writes it after an abort: on
    /// a line of its own even after a partial line.
    pub(super) const ABORT_LINE: &[u8] = b"\n\x1eplumbline-cell-aborted\n";

    fn pipe() -> Option<(OwnedFd, OwnedFd)> {
        let mut ends = [0; 2];
        // SAFETY: `pipe2` writes two new descriptors into the array we own;
        // each is then owned by exactly one `OwnedFd`.
        if unsafe { libc::pipe2(ends.as_mut_ptr(), libc::O_CLOEXEC) } != 0 {
            return None;
        }
        // SAFETY: both descriptors were just created and are owned by nobody else.
        Some(unsafe { (OwnedFd::from_raw_fd(ends[0]), OwnedFd::from_raw_fd(ends[1])) })
    }

    /// Replaces descriptors 1 and 2 by our pipes and starts the relay. If any
    /// step fails the process keeps its original descriptors (cells then run
    /// as before, only without the markers).
    pub(super) fn install() {
        let (Some((out_read, out_write)), Some((err_read, err_write))) = (pipe(), pipe()) else { return };
        let (Some((flush_read, flush_write)), Some((done_read, done_write))) = (pipe(), pipe()) else { return };
        // SAFETY: duplicates descriptor 1 (open) as a close-on-exec copy we own.
        let engine = unsafe { libc::fcntl(1, libc::F_DUPFD_CLOEXEC, 3) };
        if engine < 0 {
            return;
        }
        // SAFETY: `engine` is a fresh descriptor owned by nobody else.
        let engine = unsafe { OwnedFd::from_raw_fd(engine) };
        // SAFETY: `dup2` replaces descriptors 1 and 2 with open pipe write
        // ends; on failure descriptor 1 is put back.
        unsafe {
            if libc::dup2(out_write.as_raw_fd(), 1) < 0 {
                return;
            }
            if libc::dup2(err_write.as_raw_fd(), 2) < 0 {
                libc::dup2(engine.as_raw_fd(), 1);
                return;
            }
        }
        drop((out_write, err_write)); // descriptors 1 and 2 keep the pipes open
        for fd in [out_read.as_raw_fd(), err_read.as_raw_fd(), flush_read.as_raw_fd()] {
            set_nonblocking(fd);
        }
        // The handler's ends live as long as the process.
        FLUSH_REQUEST.store(std::mem::ManuallyDrop::new(flush_write).as_raw_fd(), Ordering::SeqCst);
        FLUSH_DONE.store(std::mem::ManuallyDrop::new(done_read).as_raw_fd(), Ordering::SeqCst);
        install_abort_handler();
        let relay =
            Relay { out_read, err_read, flush_read, done_write, engine, out_line: Vec::new(), err_line: Vec::new() };
        let spawned = std::thread::Builder::new().name("plumbline-output-relay".into()).spawn(move || relay.run());
        drop(spawned);
    }

    fn set_nonblocking(fd: RawFd) {
        // SAFETY: `fcntl` on a descriptor we own, with flags it returned.
        unsafe {
            let flags = libc::fcntl(fd, libc::F_GETFL);
            if flags >= 0 {
                libc::fcntl(fd, libc::F_SETFL, flags | libc::O_NONBLOCK);
            }
        }
    }

    /// The result of one read from a non-blocking pipe.
    #[derive(PartialEq)]
    enum Read {
        /// Bytes were appended.
        Data,
        /// Nothing there now.
        Empty,
        /// The write ends are closed (or the read failed).
        End,
    }

    fn read_some(fd: RawFd, buffer: &mut Vec<u8>) -> Read {
        let mut chunk = [0u8; 16 * 1024];
        loop {
            // SAFETY: reads into a stack buffer of the given length.
            let n = unsafe { libc::read(fd, chunk.as_mut_ptr().cast(), chunk.len()) };
            if n > 0 {
                buffer.extend_from_slice(&chunk[..n as usize]);
                return Read::Data;
            }
            if n == 0 {
                return Read::End;
            }
            match std::io::Error::last_os_error().kind() {
                std::io::ErrorKind::Interrupted => continue,
                std::io::ErrorKind::WouldBlock => return Read::Empty,
                _ => return Read::End,
            }
        }
    }

    /// Writes all of `bytes` to `fd`, retrying short writes.
    fn write_all(fd: RawFd, mut bytes: &[u8]) {
        while !bytes.is_empty() {
            // SAFETY: writes from a live slice of the given length.
            let n = unsafe { libc::write(fd, bytes.as_ptr().cast(), bytes.len()) };
            if n <= 0 {
                if n < 0 && std::io::Error::last_os_error().kind() == std::io::ErrorKind::Interrupted {
                    continue;
                }
                return;
            }
            bytes = &bytes[n as usize..];
        }
    }

    struct Relay {
        out_read: OwnedFd,
        err_read: OwnedFd,
        /// The abort handler writes a byte here to ask for a flush.
        flush_read: OwnedFd,
        /// The relay answers here once flushed.
        done_write: OwnedFd,
        engine: OwnedFd,
        /// Standard output read but not yet ended by a newline.
        out_line: Vec<u8>,
        /// Standard error read but not yet ended by a newline.
        err_line: Vec<u8>,
    }

    impl Relay {
        fn run(mut self) {
            let (mut out_open, mut err_open) = (true, true);
            while out_open || err_open {
                let watch = |open: bool, fd: &OwnedFd| if open { fd.as_raw_fd() } else { -1 };
                let mut fds = [
                    libc::pollfd { fd: watch(out_open, &self.out_read), events: libc::POLLIN, revents: 0 },
                    libc::pollfd { fd: watch(err_open, &self.err_read), events: libc::POLLIN, revents: 0 },
                    libc::pollfd { fd: self.flush_read.as_raw_fd(), events: libc::POLLIN, revents: 0 },
                ];
                // SAFETY: polls three pollfd structs we own.
                let ready = unsafe { libc::poll(fds.as_mut_ptr(), 3, -1) };
                if ready < 0 {
                    if std::io::Error::last_os_error().kind() == std::io::ErrorKind::Interrupted {
                        continue;
                    }
                    return;
                }
                if fds[1].revents != 0 && read_some(self.err_read.as_raw_fd(), &mut self.err_line) == Read::End {
                    err_open = false;
                }
                self.write_stderr_lines(!err_open);
                if fds[0].revents != 0 && read_some(self.out_read.as_raw_fd(), &mut self.out_line) == Read::End {
                    out_open = false;
                }
                self.write_stdout_lines(!out_open);
                if fds[2].revents != 0 {
                    self.flush_for_abort();
                }
            }
        }

        /// The process is aborting: relay everything both pipes hold, partial
        /// lines included, then the abort marker, then answer the handler.
        fn flush_for_abort(&mut self) {
            let mut request = Vec::new();
            while read_some(self.flush_read.as_raw_fd(), &mut request) == Read::Data {}
            while read_some(self.out_read.as_raw_fd(), &mut self.out_line) == Read::Data {}
            self.write_stdout_lines(true);
            self.drain_stderr();
            write_all(self.engine.as_raw_fd(), ABORT_LINE);
            write_all(self.done_write.as_raw_fd(), b"!");
        }

        /// Writes the complete standard-error lines held (and the partial one
        /// when `all`), each with its marker.
        fn write_stderr_lines(&mut self, all: bool) {
            let mut text = Vec::new();
            while let Some(end) = self.err_line.iter().position(|&b| b == b'\n') {
                text.extend_from_slice(STDERR_LINE_MARKER.as_bytes());
                text.extend(self.err_line.drain(..=end));
            }
            if all && !self.err_line.is_empty() {
                text.extend_from_slice(STDERR_LINE_MARKER.as_bytes());
                text.append(&mut self.err_line);
                text.push(b'\n');
            }
            write_all(self.engine.as_raw_fd(), &text);
        }

        /// Writes the complete standard-output lines held (and the partial
        /// one when `all`), each after the standard error written before it.
        fn write_stdout_lines(&mut self, all: bool) {
            while let Some(end) = self.out_line.iter().position(|&b| b == b'\n') {
                let line: Vec<u8> = self.out_line.drain(..=end).collect();
                self.drain_stderr();
                if line.strip_suffix(b"\n").unwrap_or(&line) == ENGINE_ERROR_LINE.as_bytes() {
                    write_all(self.engine.as_raw_fd(), format!("{CELL_ERROR_MARKER}\n").as_bytes());
                }
                write_all(self.engine.as_raw_fd(), &line);
            }
            if all && !self.out_line.is_empty() {
                self.drain_stderr();
                self.out_line.push(b'\n');
                let rest = std::mem::take(&mut self.out_line);
                write_all(self.engine.as_raw_fd(), &rest);
            }
        }

        /// Relays everything standard error holds now, the partial last line
        /// included (it was written before the stdout line that follows).
        fn drain_stderr(&mut self) {
            while read_some(self.err_read.as_raw_fd(), &mut self.err_line) == Read::Data {}
            self.write_stderr_lines(true);
        }
    }

    /// On SIGABRT: ask the relay to flush (one byte on a pipe), wait for its
    /// answer (bounded), then let the abort proceed. Only async-signal-safe
    /// calls: write, poll, read, signal, raise.
    extern "C" fn on_abort(_signal: libc::c_int) {
        let (request, done) = (FLUSH_REQUEST.load(Ordering::SeqCst), FLUSH_DONE.load(Ordering::SeqCst));
        if request >= 0 && done >= 0 {
            // SAFETY: writes one byte from a static buffer to an open descriptor.
            unsafe { libc::write(request, b"!".as_ptr().cast(), 1) };
            let mut answer = libc::pollfd { fd: done, events: libc::POLLIN, revents: 0 };
            // SAFETY: polls one pollfd we own; bounded in case the relay is gone.
            if unsafe { libc::poll(&mut answer, 1, FLUSH_WAIT_MS) } > 0 {
                let mut byte = 0u8;
                // SAFETY: reads one byte into a local.
                unsafe { libc::read(done, (&mut byte as *mut u8).cast(), 1) };
            }
        }
        // SAFETY: restore the default action and raise again, so the process
        // ends by SIGABRT as it would have.
        unsafe {
            libc::signal(libc::SIGABRT, libc::SIG_DFL);
            libc::raise(libc::SIGABRT);
        }
    }

    fn install_abort_handler() {
        // SAFETY: installs a handler that only makes async-signal-safe calls;
        // on the alternate stack when the thread has one.
        unsafe {
            let mut action: libc::sigaction = std::mem::zeroed();
            action.sa_sigaction = on_abort as extern "C" fn(libc::c_int) as libc::sighandler_t;
            action.sa_flags = libc::SA_ONSTACK;
            libc::sigemptyset(&mut action.sa_mask);
            libc::sigaction(libc::SIGABRT, &action, std::ptr::null_mut());
        }
    }
}

#[cfg(all(test, unix))]
mod tests {
    #[test]
    fn the_abort_line_carries_the_marker() {
        assert_eq!(super::unix::ABORT_LINE, format!("\n{}\n", super::CELL_ABORT_MARKER).as_bytes());
    }
}
