//! The launcher's side: offering a connection file to the waiting standbys,
//! and accompanying the one that took it.

use super::environment::environment_now;
use super::protocol::{message_line, HandoverReply, HandoverRequest, ProgramIdentity, HANDOVER_VERSION};
use std::io::{BufRead, BufReader, Write};
use std::os::unix::net::UnixStream;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// A launcher's view of the standby that took its connection file.
pub struct AdoptedStandby {
    /// The standby's process id.
    pub pid: u32,
    stream: UnixStream,
}

impl AdoptedStandby {
    /// Waits until the standby ends, forwarding each SIGINT this process
    /// receives as an interrupt. Returns when the standby closed the socket.
    pub fn accompany(self) -> std::io::Result<()> {
        self.stream.set_nonblocking(true)?;
        let runtime = tokio::runtime::Builder::new_current_thread().enable_all().build()?;
        runtime.block_on(async move {
            let stream = tokio::net::UnixStream::from_std(self.stream)?;
            let (mut reader, mut writer) = stream.into_split();
            let mut sink = [0u8; 256];
            loop {
                tokio::select! {
                    read = tokio::io::AsyncReadExt::read(&mut reader, &mut sink) => {
                        // The standby writes nothing after the reply: any end is its exit.
                        if matches!(read, Ok(0) | Err(_)) {
                            return Ok(());
                        }
                    }
                    signal = tokio::signal::ctrl_c() => {
                        signal?;
                        if tokio::io::AsyncWriteExt::write_all(&mut writer, b"interrupt\n").await.is_err() {
                            return Ok(());
                        }
                    }
                }
            }
        })
    }
}

/// Offers `connection_file` to the standbys waiting under `build_dir`, in
/// slot order; returns the one that took it. Declines are logged on stderr;
/// sockets nobody listens on any more are removed.
pub fn offer(build_dir: &Path, connection_file: &Path) -> Option<AdoptedStandby> {
    let program = ProgramIdentity::current().ok()?;
    let request = HandoverRequest {
        version: HANDOVER_VERSION,
        program,
        connection_file: std::path::absolute(connection_file).ok()?,
        working_directory: std::env::current_dir().ok()?,
        environment: environment_now(),
    };
    let mut sockets: Vec<PathBuf> = std::fs::read_dir(super::standby_dir(build_dir))
        .ok()?
        .flatten()
        .map(|entry| entry.path())
        .filter(|path| path.extension().is_some_and(|e| e == "sock"))
        .collect();
    sockets.sort();
    for socket in sockets {
        let stream = match UnixStream::connect(&socket) {
            Ok(stream) => stream,
            Err(e) if matches!(e.kind(), std::io::ErrorKind::ConnectionRefused | std::io::ErrorKind::NotFound) => {
                let _ = std::fs::remove_file(&socket);
                continue;
            }
            Err(_) => continue,
        };
        match hand_over(&stream, &request) {
            Ok(HandoverReply::Taken { pid }) => {
                eprintln!("plumbline kernel: standby kernel {pid} took over {}", request.connection_file.display());
                return Some(AdoptedStandby { pid, stream });
            }
            Ok(HandoverReply::Declined { reason }) => {
                eprintln!("plumbline kernel: standby kernel at {} declined: {reason}", socket.display());
            }
            Err(e) => eprintln!("plumbline kernel: standby kernel at {} did not answer: {e}", socket.display()),
        }
    }
    None
}

/// Sends the request and reads the reply (each one JSON line).
fn hand_over(stream: &UnixStream, request: &HandoverRequest) -> std::io::Result<HandoverReply> {
    stream.set_read_timeout(Some(Duration::from_secs(30)))?;
    (&*stream).write_all(&message_line(request)?)?;
    let mut reply = String::new();
    BufReader::new(stream).read_line(&mut reply)?;
    serde_json::from_str(&reply).map_err(std::io::Error::other)
}
