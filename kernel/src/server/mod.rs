//! The kernel's five sockets and the handling of every request.
//!
//! * heartbeat (REP): echoes each ping;
//! * iopub (PUB): one publisher task sends every broadcast — status, inputs,
//!   streams, displays, results, errors;
//! * shell (ROUTER): requests handled in order; cells run one at a time;
//! * control (ROUTER): its own task, so interrupt and shutdown never wait
//!   behind a running cell;
//! * stdin (ROUTER): bound; cells do not ask for input.
//!
//! Every request is bracketed by `status: busy` and `status: idle` on iopub.
//! A message whose signature does not verify is dropped and logged, never run.

mod handlers;
mod history;

use crate::eval::{EngineConfig, Session, StreamLine};
use crate::wire::{new_header, ConnectionFile, Message, Signer};
use serde_json::{json, Value};
use std::sync::{Arc, Mutex};
use zeromq::{PubSocket, RepSocket, RouterSocket, Socket, SocketRecv, SocketSend, ZmqMessage};

/// Why the kernel could not serve.
#[derive(Debug, thiserror::Error)]
pub enum ServeError {
    /// A socket could not be bound.
    #[error("cannot bind {endpoint}: {reason}")]
    Bind { endpoint: String, reason: String },
}

/// State shared by the request handlers.
pub(crate) struct Shared {
    pub signer: Signer,
    pub session_id: String,
    pub iopub: tokio::sync::mpsc::UnboundedSender<Message>,
    pub engine: Arc<Session>,
    /// The request whose cell is running, so that output lines get it as parent.
    pub current: Mutex<Option<Message>>,
    pub history: Mutex<history::History>,
    pub execution_count: Mutex<u64>,
}

impl Shared {
    /// Publishes `msg_type` with `content` on iopub, as a child of `parent` when given.
    pub fn publish(&self, parent: Option<&Message>, msg_type: &str, content: Value) {
        let mut message = match parent {
            Some(p) => p.child(msg_type, content),
            None => Message {
                identities: Vec::new(),
                header: new_header(msg_type, &self.session_id),
                parent_header: json!({}),
                metadata: json!({}),
                content,
                buffers: Vec::new(),
            },
        };
        message.identities = vec![format!("kernel.{}.{msg_type}", self.session_id).into_bytes()];
        let _ = self.iopub.send(message);
    }

    /// Publishes a status change.
    pub fn status(&self, parent: Option<&Message>, state: &str) {
        self.publish(parent, "status", json!({ "execution_state": state }));
    }
}

fn to_frames(message: ZmqMessage) -> Vec<Vec<u8>> {
    message.into_vec().into_iter().map(|b| b.to_vec()).collect()
}

fn to_zmq(frames: Vec<Vec<u8>>) -> Option<ZmqMessage> {
    ZmqMessage::try_from(frames.into_iter().map(bytes_of).collect::<Vec<_>>()).ok()
}

fn bytes_of(frame: Vec<u8>) -> bytes::Bytes {
    frame.into()
}

async fn bind<S: Socket>(socket: &mut S, endpoint: String) -> Result<(), ServeError> {
    socket.bind(&endpoint).await.map(|_| ()).map_err(|e| ServeError::Bind { endpoint, reason: e.to_string() })
}

/// Serves the protocol on the connection file's sockets until shutdown.
pub async fn serve(connection: ConnectionFile) -> Result<(), ServeError> {
    let signer = Signer::new(&connection.key);
    let session_id = uuid::Uuid::new_v4().to_string();
    let mut shell = RouterSocket::new();
    let mut control = RouterSocket::new();
    let mut stdin = RouterSocket::new();
    let mut iopub = PubSocket::new();
    let mut heartbeat = RepSocket::new();
    bind(&mut shell, connection.endpoint(connection.shell_port)).await?;
    bind(&mut control, connection.endpoint(connection.control_port)).await?;
    bind(&mut stdin, connection.endpoint(connection.stdin_port)).await?;
    bind(&mut iopub, connection.endpoint(connection.iopub_port)).await?;
    bind(&mut heartbeat, connection.endpoint(connection.hb_port)).await?;

    // Publisher.
    let (iopub_tx, mut iopub_rx) = tokio::sync::mpsc::unbounded_channel::<Message>();
    let publisher_signer = signer.clone();
    tokio::spawn(async move {
        while let Some(message) = iopub_rx.recv().await {
            if let Some(frames) = to_zmq(message.encode(&publisher_signer)) {
                let _ = iopub.send(frames).await;
            }
        }
    });

    // Heartbeat.
    tokio::spawn(async move {
        while let Ok(ping) = heartbeat.recv().await {
            if heartbeat.send(ping).await.is_err() {
                break;
            }
        }
    });

    // The engine, with its output lines forwarded to iopub.
    let (stream_tx, mut stream_rx) = tokio::sync::mpsc::unbounded_channel::<StreamLine>();
    let engine = Arc::new(Session::start(EngineConfig::from_environment(), stream_tx));
    let shared = Arc::new(Shared {
        signer: signer.clone(),
        session_id,
        iopub: iopub_tx,
        engine,
        current: Mutex::new(None),
        history: Mutex::new(history::History::default()),
        execution_count: Mutex::new(0),
    });
    shared.status(None, "starting");
    shared.status(None, "idle");

    let forwarder = shared.clone();
    tokio::spawn(async move {
        while let Some(line) = stream_rx.recv().await {
            let parent = forwarder.current.lock().ok().and_then(|c| c.clone());
            handlers::forward_output(&forwarder, parent.as_ref(), line);
        }
    });

    // SIGINT interrupts the running cell.
    let interrupter = shared.engine.interrupter();
    tokio::spawn(async move {
        while tokio::signal::ctrl_c().await.is_ok() {
            interrupter.interrupt();
        }
    });

    // Control, on its own task.
    let control_shared = shared.clone();
    tokio::spawn(async move {
        loop {
            let Ok(raw) = control.recv().await else { break };
            let Some(request) = handlers::decode(&control_shared, to_frames(raw)) else { continue };
            for reply in handlers::control(&control_shared, &request).await {
                if let Some(frames) = to_zmq(reply.encode(&control_shared.signer)) {
                    let _ = control.send(frames).await;
                }
            }
        }
    });

    // Stdin is bound so that clients can connect; cells never request input.
    tokio::spawn(async move { while stdin.recv().await.is_ok() {} });

    // Shell, in order. When a cell fails with stop_on_error, execute requests
    // that were sent before that failure was answered (queued behind it) are
    // aborted; requests sent afterwards run normally.
    let mut failed_at: Option<chrono::DateTime<chrono::Utc>> = None;
    loop {
        let raw = match shell.recv().await {
            Ok(raw) => raw,
            Err(e) => {
                eprintln!("plumbline kernel: shell socket closed: {e}");
                break;
            }
        };
        let Some(request) = handlers::decode(&shared, to_frames(raw)) else { continue };
        let sent =
            chrono::DateTime::parse_from_rfc3339(&request.header.date).ok().map(|d| d.with_timezone(&chrono::Utc));
        let queued_behind_failure = matches!((failed_at, sent), (Some(f), Some(s)) if s < f);
        let abort = queued_behind_failure && request.header.msg_type == "execute_request";
        let (replies, failed_with_stop) = if abort {
            (vec![handlers::aborted(&shared, &request)], false)
        } else {
            handlers::shell(&shared, &request).await
        };
        if failed_with_stop {
            failed_at = Some(chrono::Utc::now());
        }
        for reply in replies {
            if let Some(frames) = to_zmq(reply.encode(&shared.signer)) {
                let _ = shell.send(frames).await;
            }
        }
    }
    Ok(())
}
