//! The standby's side: listening for launchers, judging whether it fits
//! one, and taking the one it fits over.

use super::environment::{differences, VariableRole};
use super::protocol::{message_line, HandoverReply, HandoverRequest, ProgramIdentity, HANDOVER_VERSION};
use super::waiting::WaitingRole;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Duration;

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
    let differing = differences(VariableRole::Engine, own_environment, &request.environment);
    if !differing.is_empty() {
        return Err(format!("the environment differs in {}, which shape the engine", differing.join(", ")));
    }
    Ok(())
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
        let path = super::standby_dir(build_dir).join(format!("slot-{slot}.sock"));
        let _ = std::fs::remove_file(&path);
        Ok(Self { listener: tokio::net::UnixListener::bind(&path)?, path, role: Some(role) })
    }

    /// Waits for a launcher this standby fits (see [`judge`]) and whose
    /// connection file it can read; the launcher is told `Taken`, or why not
    /// (then it serves by itself and reports the problem). `Ok(None)` when the
    /// standby should end: it did not fit a launcher, or none came within
    /// [`super::idle_limit`]. The waiting role is given up before a launcher hears
    /// `Taken`, so that it can start the next standby at once.
    pub async fn wait(
        &mut self,
        program: &ProgramIdentity,
        environment: &BTreeMap<String, String>,
    ) -> std::io::Result<Option<Handover>> {
        use tokio::io::{AsyncBufReadExt, AsyncWriteExt};
        let deadline = tokio::time::Instant::now() + super::idle_limit();
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
            let sent = stream.write_all(&message_line(&reply)?).await;
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
    use crate::standby::environment::environment_now;
    use crate::standby::launcher::offer;

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
    fn a_standby_fits_only_the_same_program_and_environment() {
        let program = ProgramIdentity::current().expect("own program");
        let env = environment(&[("HOME", "/h")]);
        assert_eq!(judge(&request(&program, env.clone()), &program, &env), Ok(()));
        let other_env = environment(&[("HOME", "/elsewhere")]);
        let reason = judge(&request(&program, other_env), &program, &env).expect_err("declined");
        assert!(reason.contains("HOME"), "{reason}");
        let other_level = environment(&[("HOME", "/h"), ("PLUMBLINE_ENGINE_OPT", "3")]);
        let reason = judge(&request(&program, other_level), &program, &env).expect_err("declined");
        assert!(reason.contains("PLUMBLINE_ENGINE_OPT"), "{reason}");
        let other_desktop =
            environment(&[("HOME", "/h"), ("LANG", "de_DE.UTF-8"), ("TERM", "dumb"), ("SHELL", "/bin/zsh")]);
        assert_eq!(
            judge(&request(&program, other_desktop), &program, &env),
            Ok(()),
            "cells get these from the launcher"
        );
        let newer = ProgramIdentity { length: program.length + 1, ..program.clone() };
        let reason = judge(&request(&newer, env.clone()), &program, &env).expect_err("declined");
        assert!(reason.contains("another build"), "{reason}");
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
    fn a_standby_declines_a_launcher_with_another_engine_setting_and_ends() {
        let Scene { dir: _dir, connection, runtime, mut listener } = listening_standby();
        let build_dir = _dir.path().to_path_buf();
        let launcher = std::thread::spawn(move || offer(&build_dir, &connection).is_some());
        let program = ProgramIdentity::current().expect("program");
        let mut started_elsewhere = environment_now();
        started_elsewhere.insert("PLUMBLINE_ENGINE_OPT".into(), "another level".into());
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
