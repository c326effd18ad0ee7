//! Standby kernels: an engine prepared before anyone asks for it.
//!
//! Preparing the evaluation engine costs a fresh kernel most of its first
//! cell: about 30 s on the 2-core test machine, nearly all of it the
//! engine's type inference building name tables for the whole crate graph
//! behind `plumbline` (polars and ~360 crates), which it does again in every
//! new process. None of it can be saved to disk; it can be done ahead.
//!
//! So a kernel, once its engine is ready and its first cell answered (or 30 s
//! passed without one), starts one **standby kernel**:
//! `plumbline kernel --standby`, a kernel process with no connection file,
//! which claims a work slot of its own (`eval::work_slots`), prepares its
//! engine and waits, for at most `PLUMBLINE_STANDBY_IDLE_MINUTES` (30), on a
//! Unix socket `standby/slot-<n>.sock` under the engine's build directory.
//! The next `plumbline kernel --connection-file F` a front end starts (a new
//! notebook, or a restart) first offers `F` to a waiting standby. The
//! standby takes over — it binds the notebook's sockets and serves it, its
//! engine already warm or still preparing — and the process the front end
//! started stays as its **launcher**: it forwards SIGINT as an interrupt and
//! exits when the standby ends; when the launcher dies, the standby shuts
//! down. If no standby waits, or the one waiting does not fit (below), the
//! kernel starts its own engine as before. Either way, the kernel starts the
//! standby for the next one (`commands::kernel`), and at most one waits at a
//! time.
//!
//! A standby takes over only a launcher that matches it: the same program
//! file (path, size, modification time) and the same environment, apart
//! from the variables a front end sets per launch (`JPY_*`, `PWD`, …). A
//! different environment could change what cells compute (a database
//! address, say), so the launcher is declined and prepares an engine of its
//! own — and the standby ends, because the environment kernels are started
//! with has changed (a new install, a front end started from another shell):
//! the kernel that was declined starts the next standby, in the new
//! environment. The working directory is the launcher's: the standby moves
//! there, and so do its cells.
//!
//! Set `PLUMBLINE_STANDBY=off` to start no standby kernels (a waiting one
//! holds the engine's memory, about 1.6 GB).
//!
//! The hand-over is one JSON line each way ([`HandoverRequest`],
//! [`HandoverReply`], version [`HANDOVER_VERSION`]); afterwards the launcher
//! writes a line `interrupt` for each SIGINT it receives.

use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::fs::File;
use std::io::{BufRead, BufReader, Write};
use std::os::unix::net::UnixStream;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// Version of the hand-over messages; both sides must agree.
pub const HANDOVER_VERSION: u32 = 1;

/// How long a standby waits for a launcher before it ends: 30 minutes, or
/// `PLUMBLINE_STANDBY_IDLE_MINUTES` (a positive number, fractions allowed).
pub fn idle_limit() -> Duration {
    let minutes = std::env::var("PLUMBLINE_STANDBY_IDLE_MINUTES")
        .ok()
        .and_then(|m| m.trim().parse::<f64>().ok())
        .filter(|m| m.is_finite() && *m > 0.0)
        .unwrap_or(30.0);
    Duration::from_secs_f64(60.0 * minutes.min(7.0 * 24.0 * 60.0))
}

/// Whether standby kernels are on (`PLUMBLINE_STANDBY` is not `off`, `0` or `false`).
pub fn enabled() -> bool {
    !matches!(std::env::var("PLUMBLINE_STANDBY").as_deref(), Ok("off" | "0" | "false"))
}

/// The folder of the standby sockets, lock and log under a build directory.
pub fn standby_dir(build_dir: &Path) -> PathBuf {
    build_dir.join("standby")
}

/// The program file a process runs, as far as a hand-over must match it.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct ProgramIdentity {
    /// Absolute path of the executable.
    pub executable: PathBuf,
    /// Its size in bytes.
    pub length: u64,
    /// Its modification time, nanoseconds since the Unix epoch.
    pub modified_ns: u128,
    /// The crate version it was built from.
    pub version: String,
}

impl ProgramIdentity {
    /// This process's program, read now.
    pub fn current() -> std::io::Result<Self> {
        let executable = std::env::current_exe()?;
        let metadata = std::fs::metadata(&executable)?;
        let modified_ns =
            metadata.modified()?.duration_since(std::time::UNIX_EPOCH).map(|d| d.as_nanos()).unwrap_or_default();
        Ok(Self { executable, length: metadata.len(), modified_ns, version: env!("CARGO_PKG_VERSION").to_string() })
    }
}

/// What a launcher sends a standby.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct HandoverRequest {
    /// [`HANDOVER_VERSION`] of the launcher.
    pub version: u32,
    /// The launcher's program.
    pub program: ProgramIdentity,
    /// The connection file the front end gave the launcher (absolute).
    pub connection_file: PathBuf,
    /// The launcher's working directory, where cells should run.
    pub working_directory: PathBuf,
    /// The launcher's environment.
    pub environment: BTreeMap<String, String>,
}

/// What a standby answers.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "outcome", rename_all = "snake_case")]
pub enum HandoverReply {
    /// The standby serves the connection file from now on.
    Taken {
        /// The standby's process id.
        pid: u32,
    },
    /// The standby does not fit this launcher.
    Declined {
        /// Why, for the launcher's log.
        reason: String,
    },
}

/// Variables that may differ between a standby and its launcher: those a
/// front end or shell sets per launch, and those every engine process sets
/// for itself ([`crate::eval::ENGINE_VARIABLES`]).
fn set_per_launch(name: &str) -> bool {
    name.starts_with("JPY_")
        || name.starts_with("PLUMBLINE_STANDBY")
        || matches!(name, "_" | "PWD" | "OLDPWD" | "SHLVL")
        || crate::eval::ENGINE_VARIABLES.contains(&name)
}

/// Names of the variables (other than per-launch ones) whose values differ
/// between two environments, sorted.
pub fn environment_differences(ours: &BTreeMap<String, String>, theirs: &BTreeMap<String, String>) -> Vec<String> {
    let names: std::collections::BTreeSet<&String> = ours.keys().chain(theirs.keys()).collect();
    names.into_iter().filter(|name| !set_per_launch(name) && ours.get(*name) != theirs.get(*name)).cloned().collect()
}

/// This process's environment (values that are not UTF-8 read lossily).
pub fn environment_now() -> BTreeMap<String, String> {
    std::env::vars_os().map(|(k, v)| (k.to_string_lossy().into_owned(), v.to_string_lossy().into_owned())).collect()
}

/// Decides whether a standby started with `own_program` and `own_environment`
/// fits a launcher's request: `Ok(())`, or the reason it does not (then the
/// standby is of no use to the kernels started now, and ends).
pub fn judge(
    request: &HandoverRequest,
    own_program: &ProgramIdentity,
    own_environment: &BTreeMap<String, String>,
) -> Result<(), String> {
    if request.version != HANDOVER_VERSION {
        return Err(format!("hand-over version {} (the standby speaks {HANDOVER_VERSION})", request.version));
    }
    if &request.program != own_program {
        return Err("the standby runs another build of plumbline".to_string());
    }
    let differences = environment_differences(own_environment, &request.environment);
    if !differences.is_empty() {
        return Err(format!("the environment differs in {}", differences.join(", ")));
    }
    Ok(())
}

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
        let dir = standby_dir(build_dir);
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
    let mut sockets: Vec<PathBuf> = std::fs::read_dir(standby_dir(build_dir))
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
    let mut line = serde_json::to_string(request).map_err(std::io::Error::other)?;
    line.push('\n');
    (&*stream).write_all(line.as_bytes())?;
    let mut reply = String::new();
    BufReader::new(stream).read_line(&mut reply)?;
    serde_json::from_str(&reply).map_err(std::io::Error::other)
}

/// Starts a standby kernel for the next front end, unless standbys are off
/// or one already waits or prepares. It runs this same program, in this
/// working directory, in a process group of its own (a Ctrl-C meant for this
/// kernel does not reach it), logging to `standby/standby.log`.
pub fn start_one(build_dir: &Path) {
    if !enabled() || !WaitingRole::is_free(build_dir) {
        return;
    }
    let started = (|| -> std::io::Result<std::process::Child> {
        use std::os::unix::process::CommandExt;
        let log = File::create(standby_dir(build_dir).join("standby.log"))?;
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

/// A standby's side of the hand-over: a listener on its slot's socket,
/// holding the waiting role until a launcher takes the standby over.
pub struct StandbyListener {
    listener: tokio::net::UnixListener,
    path: PathBuf,
    role: Option<WaitingRole>,
}

/// What a standby got from the launcher that took it over.
pub struct Handover {
    /// The request (connection file, working directory).
    pub request: HandoverRequest,
    /// The connection file, read and checked before the standby said yes.
    pub connection: crate::wire::ConnectionFile,
    /// The launcher's stream: `interrupt` lines, then its end.
    pub stream: tokio::net::UnixStream,
}

impl StandbyListener {
    /// Listens on `standby/slot-<slot>.sock` (replacing a stale socket: the
    /// slot's lock says no one else uses it). Needs a tokio runtime.
    pub fn bind(build_dir: &Path, slot: usize, role: WaitingRole) -> std::io::Result<Self> {
        let path = standby_dir(build_dir).join(format!("slot-{slot}.sock"));
        let _ = std::fs::remove_file(&path);
        Ok(Self { listener: tokio::net::UnixListener::bind(&path)?, path, role: Some(role) })
    }

    /// Waits for a launcher this standby fits (see [`judge`]) and whose
    /// connection file it can read; the launcher is told `Taken`, or why not
    /// (then it serves by itself and reports the problem). `Ok(None)` when the
    /// standby should end: it did not fit a launcher, or none came within
    /// [`idle_limit`]. The waiting role is given up before a launcher hears
    /// `Taken`, so that it can start the next standby at once.
    pub async fn wait(
        &mut self,
        program: &ProgramIdentity,
        environment: &BTreeMap<String, String>,
    ) -> std::io::Result<Option<Handover>> {
        use tokio::io::{AsyncBufReadExt, AsyncWriteExt};
        let deadline = tokio::time::Instant::now() + idle_limit();
        loop {
            let accepted = tokio::time::timeout_at(deadline, self.listener.accept()).await;
            let Ok(accepted) = accepted else { return Ok(None) };
            let (stream, _) = accepted?;
            let mut reader = tokio::io::BufReader::new(stream);
            let mut line = String::new();
            let read = tokio::time::timeout(Duration::from_secs(30), reader.read_line(&mut line)).await;
            if !matches!(read, Ok(Ok(n)) if n > 0) {
                continue;
            }
            let mut stream = reader.into_inner();
            let verdict = match serde_json::from_str::<HandoverRequest>(&line) {
                Err(e) => Verdict::Refused(format!("not a hand-over request: {e}")),
                Ok(request) => match judge(&request, program, environment) {
                    Err(reason) => Verdict::Unfit(reason),
                    Ok(()) => match crate::wire::ConnectionFile::read(&request.connection_file) {
                        Err(e) => Verdict::Refused(e.to_string()),
                        Ok(connection) => Verdict::Taken(Box::new((request, connection))),
                    },
                },
            };
            let reply = match &verdict {
                Verdict::Taken(_) => {
                    self.role = None;
                    HandoverReply::Taken { pid: std::process::id() }
                }
                Verdict::Unfit(reason) | Verdict::Refused(reason) => HandoverReply::Declined { reason: reason.clone() },
            };
            let mut text = serde_json::to_string(&reply).map_err(std::io::Error::other)?;
            text.push('\n');
            let sent = stream.write_all(text.as_bytes()).await;
            match verdict {
                Verdict::Taken(taken) if sent.is_ok() => {
                    let (request, connection) = *taken;
                    return Ok(Some(Handover { request, connection, stream }));
                }
                Verdict::Unfit(_) => return Ok(None),
                _ => continue,
            }
        }
    }
}

/// A standby's answer to one request.
enum Verdict {
    /// It serves this launcher.
    Taken(Box<(HandoverRequest, crate::wire::ConnectionFile)>),
    /// It does not fit this launcher's program or environment (and ends).
    Unfit(String),
    /// The request was malformed or its connection file unreadable: the
    /// launcher's problem; the standby waits on.
    Refused(String),
}

impl Drop for StandbyListener {
    fn drop(&mut self) {
        let _ = std::fs::remove_file(&self.path);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn environment(pairs: &[(&str, &str)]) -> BTreeMap<String, String> {
        pairs.iter().map(|(k, v)| (k.to_string(), v.to_string())).collect()
    }

    fn request(program: &ProgramIdentity, env: BTreeMap<String, String>) -> HandoverRequest {
        HandoverRequest {
            version: HANDOVER_VERSION,
            program: program.clone(),
            connection_file: "/tmp/kernel-1.json".into(),
            working_directory: "/tmp".into(),
            environment: env,
        }
    }

    #[test]
    fn per_launch_variables_do_not_count_but_others_do() {
        let ours = environment(&[("HOME", "/h"), ("JPY_PARENT_PID", "1"), ("PGHOST", "a"), ("EVCXR_TMPDIR", "/w1")]);
        let theirs = environment(&[("HOME", "/h"), ("JPY_PARENT_PID", "2"), ("PGHOST", "b"), ("EXTRA", "x")]);
        assert_eq!(environment_differences(&ours, &theirs), vec!["EXTRA".to_string(), "PGHOST".to_string()]);
    }

    #[test]
    fn a_standby_fits_only_the_same_program_and_environment() {
        let program = ProgramIdentity::current().expect("own program");
        let env = environment(&[("HOME", "/h")]);
        assert_eq!(judge(&request(&program, env.clone()), &program, &env), Ok(()));
        let other_env = environment(&[("HOME", "/elsewhere")]);
        let reason = judge(&request(&program, other_env), &program, &env).expect_err("declined");
        assert!(reason.contains("HOME"), "{reason}");
        let newer = ProgramIdentity { length: program.length + 1, ..program.clone() };
        let reason = judge(&request(&newer, env.clone()), &program, &env).expect_err("declined");
        assert!(reason.contains("another build"), "{reason}");
    }

    #[test]
    fn hand_over_messages_read_back_through_their_types() {
        let taken = HandoverReply::Taken { pid: 7 };
        let text = serde_json::to_string(&taken).expect("json");
        assert_eq!(text, r#"{"outcome":"taken","pid":7}"#);
        assert_eq!(serde_json::from_str::<HandoverReply>(&text).expect("read back"), taken);
    }

    fn connection_file(dir: &Path) -> PathBuf {
        let path = dir.join("kernel-1.json");
        let text = r#"{"transport": "tcp", "ip": "127.0.0.1", "shell_port": 1, "iopub_port": 2, "stdin_port": 3,
                       "control_port": 4, "hb_port": 5, "key": "k", "signature_scheme": "hmac-sha256"}"#;
        std::fs::write(&path, text).expect("connection file");
        path
    }

    /// A build directory with a connection file, and a standby listening in it.
    struct Scene {
        dir: tempfile::TempDir,
        connection: PathBuf,
        runtime: tokio::runtime::Runtime,
        listener: StandbyListener,
    }

    fn listening_standby() -> Scene {
        let dir = tempfile::tempdir().expect("temp dir");
        let connection = connection_file(dir.path());
        let runtime = tokio::runtime::Runtime::new().expect("runtime");
        let role = WaitingRole::take(dir.path()).expect("lock").expect("free");
        assert!(!WaitingRole::is_free(dir.path()), "one standby waits at a time");
        let listener = runtime.block_on(async { StandbyListener::bind(dir.path(), 3, role) }).expect("bind");
        Scene { dir, connection, runtime, listener }
    }

    #[test]
    fn a_launcher_hands_its_connection_file_to_a_listening_standby() {
        let Scene { dir, connection, runtime, mut listener } = listening_standby();
        let (build_dir, offered) = (dir.path().to_path_buf(), connection.clone());
        let launcher = std::thread::spawn(move || offer(&build_dir, &offered).map(|adopted| adopted.pid));
        let program = ProgramIdentity::current().expect("program");
        let handover = runtime.block_on(listener.wait(&program, &environment_now())).expect("socket").expect("taken");
        assert_eq!(launcher.join().expect("launcher"), Some(std::process::id()));
        assert_eq!(handover.request.connection_file, connection);
        assert_eq!(handover.connection.shell_port, 1);
        assert!(WaitingRole::is_free(dir.path()), "the role is given up at the hand-over");
    }

    #[test]
    fn a_standby_declines_a_launcher_with_another_environment_and_ends() {
        let Scene { dir: _dir, connection, runtime, mut listener } = listening_standby();
        let build_dir = _dir.path().to_path_buf();
        let launcher = std::thread::spawn(move || offer(&build_dir, &connection).is_some());
        let program = ProgramIdentity::current().expect("program");
        let mut started_elsewhere = environment_now();
        started_elsewhere.insert("PGHOST".into(), "another-server".into());
        let waited = runtime.block_on(listener.wait(&program, &started_elsewhere)).expect("socket");
        assert!(waited.is_none(), "a standby that does not fit the kernels started now ends");
        assert!(!launcher.join().expect("launcher"), "the launcher serves by itself");
    }

    #[test]
    fn a_standby_refuses_an_unreadable_connection_file_and_waits_on() {
        let Scene { dir, runtime, mut listener, .. } = listening_standby();
        let build_dir = dir.path().to_path_buf();
        let missing = dir.path().join("no-such-kernel.json");
        let launcher = std::thread::spawn(move || offer(&build_dir, &missing).is_some());
        let program = ProgramIdentity::current().expect("program");
        let waited = runtime.block_on(async {
            tokio::time::timeout(Duration::from_secs(3), listener.wait(&program, &environment_now())).await
        });
        assert!(waited.is_err(), "the standby still waits");
        assert!(!launcher.join().expect("launcher"), "the launcher serves by itself");
    }
}
