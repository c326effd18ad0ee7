//! End to end: the built `plumbline` binary serves the Jupyter messaging
//! protocol (version 5.3, as published by the Jupyter project) over real
//! ZeroMQ sockets. A client written here with the `zeromq` crate drives it:
//! kernel_info, a cell with a stream and a result, a compile error in cell
//! coordinates, an interrupted endless loop, a mis-signed request that must
//! not run, and shutdown.
//!
//! The engine's build directory is shared by every kernel test
//! (`$PLUMBLINE_ENGINE_DIR`, default `target/engine-test`); the first cell
//! of a fresh directory compiles `plumbline` inside the engine (minutes).

use hmac::{Hmac, KeyInit, Mac};
use serde_json::{json, Value};
use sha2::Sha256;
use std::path::PathBuf;
use std::process::{Child, Command};
use std::time::{Duration, Instant};
use zeromq::{DealerSocket, Socket, SocketRecv, SocketSend, SubSocket, ZmqMessage};

const KEY: &str = "a3f1c0de-plumbline-test-key";

fn free_port() -> u16 {
    std::net::TcpListener::bind("127.0.0.1:0").expect("bind").local_addr().expect("addr").port()
}

fn engine_dir() -> PathBuf {
    std::env::var_os("PLUMBLINE_ENGINE_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("..").join("target").join("engine-test"))
}

struct Kernel {
    child: Child,
    shell: DealerSocket,
    control: DealerSocket,
    iopub: SubSocket,
    session: String,
}

impl Drop for Kernel {
    fn drop(&mut self) {
        let _ = self.child.kill();
    }
}

fn sign(parts: &[&[u8]]) -> String {
    let mut mac = <Hmac<Sha256> as KeyInit>::new_from_slice(KEY.as_bytes()).expect("key");
    for p in parts {
        mac.update(p);
    }
    mac.finalize().into_bytes().iter().map(|b| format!("{b:02x}")).collect()
}

fn frames_of(msg_type: &str, session: &str, content: Value, good_signature: bool) -> (ZmqMessage, String) {
    let id = uuid::Uuid::new_v4().to_string();
    let date = chrono::Utc::now().to_rfc3339_opts(chrono::SecondsFormat::Micros, true);
    let header = json!({ "msg_id": id, "session": session, "username": "test", "date": date,
                         "msg_type": msg_type, "version": "5.3" })
    .to_string();
    let (parent, metadata, content) = ("{}".to_string(), "{}".to_string(), content.to_string());
    let mut signature = sign(&[header.as_bytes(), parent.as_bytes(), metadata.as_bytes(), content.as_bytes()]);
    if !good_signature {
        signature = signature.chars().rev().collect();
    }
    let frames: Vec<bytes::Bytes> = vec![
        b"<IDS|MSG>".to_vec().into(),
        signature.into_bytes().into(),
        header.into_bytes().into(),
        parent.into_bytes().into(),
        metadata.into_bytes().into(),
        content.into_bytes().into(),
    ];
    (ZmqMessage::try_from(frames).expect("frames"), id)
}

fn parse(message: ZmqMessage) -> (Value, Value, Value) {
    let frames: Vec<Vec<u8>> = message.into_vec().into_iter().map(|b| b.to_vec()).collect();
    let split = frames.iter().position(|f| f.as_slice() == b"<IDS|MSG>").expect("delimiter");
    let value = |i: usize| serde_json::from_slice::<Value>(&frames[split + i]).expect("json");
    // Every message from the kernel is signed with the session key.
    let signature = String::from_utf8(frames[split + 1].clone()).expect("utf8");
    assert_eq!(signature, sign(&[&frames[split + 2], &frames[split + 3], &frames[split + 4], &frames[split + 5]]));
    (value(2), value(3), value(5))
}

async fn start() -> Kernel {
    let dir = std::env::temp_dir().join(format!("plumbline-kernel-test-{}", uuid::Uuid::new_v4()));
    std::fs::create_dir_all(&dir).expect("dir");
    let ports: Vec<u16> = (0..5).map(|_| free_port()).collect();
    let connection = json!({ "transport": "tcp", "ip": "127.0.0.1", "shell_port": ports[0], "iopub_port": ports[1],
        "stdin_port": ports[2], "control_port": ports[3], "hb_port": ports[4], "key": KEY, "signature_scheme": "hmac-sha256" });
    let file = dir.join("connection.json");
    std::fs::write(&file, connection.to_string()).expect("write");
    let child = Command::new(env!("CARGO_BIN_EXE_plumbline"))
        .args(["kernel", "--connection-file"])
        .arg(&file)
        .env("PLUMBLINE_ENGINE_DIR", engine_dir())
        .env("PLUMBLINE_ENGINE_OPT", std::env::var("PLUMBLINE_ENGINE_OPT").unwrap_or_else(|_| "0".into()))
        // This kernel prepares its own engine and leaves no standby behind.
        .env("PLUMBLINE_STANDBY", "off")
        .spawn()
        .expect("start the kernel");
    tokio::time::sleep(Duration::from_millis(500)).await;
    let endpoint = |p: u16| format!("tcp://127.0.0.1:{p}");
    let mut shell = DealerSocket::new();
    shell.connect(&endpoint(ports[0])).await.expect("shell");
    let mut control = DealerSocket::new();
    control.connect(&endpoint(ports[3])).await.expect("control");
    let mut iopub = SubSocket::new();
    iopub.connect(&endpoint(ports[1])).await.expect("iopub");
    iopub.subscribe("").await.expect("subscribe");
    Kernel { child, shell, control, iopub, session: uuid::Uuid::new_v4().to_string() }
}

async fn reply(socket: &mut DealerSocket, wait: Duration) -> Option<(Value, Value, Value)> {
    tokio::time::timeout(wait, socket.recv()).await.ok().and_then(|r| r.ok()).map(parse)
}

/// IOPub messages caused by request `id`, until its `idle` status.
async fn iopub_until_idle(kernel: &mut Kernel, id: &str, wait: Duration) -> Vec<(String, Value)> {
    let deadline = Instant::now() + wait;
    let mut seen = Vec::new();
    while Instant::now() < deadline {
        let Ok(Ok(message)) = tokio::time::timeout(Duration::from_secs(5), kernel.iopub.recv()).await else { continue };
        let (header, parent, content) = parse(message);
        if parent.get("msg_id").and_then(Value::as_str) != Some(id) {
            continue;
        }
        let kind = header["msg_type"].as_str().unwrap_or("").to_string();
        let idle = kind == "status" && content["execution_state"] == "idle";
        seen.push((kind, content));
        if idle {
            break;
        }
    }
    seen
}

async fn execute(kernel: &mut Kernel, code: &str, wait: Duration) -> (Value, Vec<(String, Value)>) {
    let (frames, id) = frames_of(
        "execute_request",
        &kernel.session,
        json!({ "code": code, "silent": false, "store_history": true,
        "user_expressions": {}, "allow_stdin": false, "stop_on_error": true }),
        true,
    );
    kernel.shell.send(frames).await.expect("send");
    let (_, _, content) = reply(&mut kernel.shell, wait).await.expect("execute_reply");
    let broadcasts = iopub_until_idle(kernel, &id, Duration::from_secs(20)).await;
    (content, broadcasts)
}

#[tokio::test(flavor = "multi_thread", worker_threads = 2)]
async fn the_kernel_speaks_the_protocol() {
    let mut kernel = start().await;

    // kernel_info answers quickly, before the engine is ready.
    let (frames, _) = frames_of("kernel_info_request", &kernel.session, json!({}), true);
    kernel.shell.send(frames).await.expect("send");
    let (header, _, info) = reply(&mut kernel.shell, Duration::from_secs(20)).await.expect("kernel_info_reply");
    assert_eq!(header["msg_type"], "kernel_info_reply");
    assert_eq!(info["language_info"]["name"], "rust");
    assert_eq!(info["protocol_version"], "5.3");

    // A cell with output and a value (the first one waits for the engine).
    let (content, broadcasts) =
        execute(&mut kernel, "println!(\"hello from a cell\");\n40 + 2", Duration::from_secs(3600)).await;
    assert_eq!(content["status"], "ok", "{content}");
    assert!(
        broadcasts.iter().any(|(k, c)| k == "stream" && c["text"].as_str().unwrap_or("").contains("hello from a cell")),
        "{broadcasts:?}"
    );
    let result = broadcasts.iter().find(|(k, _)| k == "execute_result").expect("execute_result");
    assert_eq!(result.1["data"]["text/plain"], "42");
    assert!(broadcasts.iter().any(|(k, c)| k == "status" && c["execution_state"] == "busy"));
    assert!(broadcasts.iter().any(|(k, _)| k == "execute_input"));

    // A compile error, reported in the cell's own line numbers.
    let (content, broadcasts) =
        execute(&mut kernel, "let a = 1;\nlet s: i32 = \"text\";", Duration::from_secs(600)).await;
    assert_eq!(content["status"], "error");
    assert_eq!(content["ename"], "CompileError");
    let traceback = content["traceback"]
        .as_array()
        .expect("traceback")
        .iter()
        .map(|l| l.as_str().unwrap_or(""))
        .collect::<Vec<_>>()
        .join("\n");
    assert!(traceback.contains("cell line 2"), "{traceback}");
    assert!(broadcasts.iter().any(|(k, _)| k == "error"));

    // A mis-signed request is dropped: the cell would create a file.
    let marker = std::env::temp_dir().join(format!("plumbline-must-not-exist-{}", uuid::Uuid::new_v4()));
    let code = format!("std::fs::write({:?}, \"ran\").unwrap();", marker.display().to_string());
    let (frames, _) = frames_of("execute_request", &kernel.session, json!({ "code": code, "silent": false }), false);
    kernel.shell.send(frames).await.expect("send");
    assert!(reply(&mut kernel.shell, Duration::from_secs(5)).await.is_none(), "a mis-signed request got a reply");
    assert!(!marker.exists(), "a mis-signed request was executed");

    // An endless loop stops on interrupt, promptly, and the kernel says what was lost.
    let (frames, _) = frames_of(
        "execute_request",
        &kernel.session,
        json!({ "code": "let keep = 5;\nloop { std::hint::spin_loop(); }", "silent": false }),
        true,
    );
    kernel.shell.send(frames).await.expect("send");
    tokio::time::sleep(Duration::from_secs(8)).await;
    let asked = Instant::now();
    let (frames, _) = frames_of("interrupt_request", &kernel.session, json!({}), true);
    kernel.control.send(frames).await.expect("send");
    let (header, _, _) = reply(&mut kernel.control, Duration::from_secs(10)).await.expect("interrupt_reply");
    assert_eq!(header["msg_type"], "interrupt_reply");
    let (_, _, content) =
        reply(&mut kernel.shell, Duration::from_secs(30)).await.expect("execute_reply after interrupt");
    assert!(
        asked.elapsed() < Duration::from_secs(2) + Duration::from_millis(500),
        "interrupt took {:?}",
        asked.elapsed()
    );
    assert_eq!(content["status"], "error");
    assert_eq!(content["ename"], "Interrupted");

    // Shutdown.
    let (frames, _) = frames_of("shutdown_request", &kernel.session, json!({ "restart": false }), true);
    kernel.control.send(frames).await.expect("send");
    let (header, _, content) = reply(&mut kernel.control, Duration::from_secs(10)).await.expect("shutdown_reply");
    assert_eq!(header["msg_type"], "shutdown_reply");
    assert_eq!(content["restart"], false);
    let deadline = Instant::now() + Duration::from_secs(10);
    while Instant::now() < deadline {
        if let Ok(Some(_)) = kernel.child.try_wait() {
            return;
        }
        tokio::time::sleep(Duration::from_millis(100)).await;
    }
    panic!("the kernel did not exit after shutdown");
}
