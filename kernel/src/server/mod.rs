//! The kernel's five sockets and the handling of every request.
//!
//! Who owns what:
//! * heartbeat (REP): one task echoes each ping;
//! * iopub (PUB): one publisher task owns the socket and sends every
//!   broadcast in the order it was queued (status, inputs, streams, displays,
//!   results, errors); at shutdown it sends what is queued, then ends;
//! * shell (ROUTER): split in two. A reader task receives, verifies and
//!   queues requests in arrival order; the shell loop (this function's own
//!   task) owns the send half, handles the queue one request at a time and
//!   runs cells one at a time;
//! * control (ROUTER): its own task, so interrupt and shutdown never wait
//!   behind a running cell;
//! * stdin (ROUTER): bound; cells do not ask for input.
//!
//! The engine thread owns the evaluation engine (see `eval::Session`). A
//! cell's output reaches iopub through that cell's own event stream, so it
//! always carries the cell's request as parent and precedes its reply. Lines
//! printed after their cell ended (by a thread the cell started) are
//! published as children of the most recent cell.
//!
//! Every request is bracketed by `status: busy` and `status: idle` on iopub.
//! A message whose signature does not verify, or whose frames or header are
//! malformed, is dropped and logged, never run; a request whose content has
//! the wrong shape gets an error reply.

mod handlers;
mod history;
pub mod requests;

use crate::eval::{EngineConfig, Preparation, Session, StreamLine};
use crate::wire::{new_header, ConnectionFile, Message, Signer};
use serde_json::{json, Value};
use std::collections::VecDeque;
use std::sync::{Arc, Mutex, OnceLock};
use std::time::Instant;
use zeromq::{PubSocket, RepSocket, RouterSocket, Socket, SocketRecv, SocketSend, ZmqMessage};

/// How long the sockets may write their queued messages at exit (see the
/// end of [`serve`]): 0.3 s. Measured on the test machine: without it the
/// shutdown reply was lost in 2 of 7 runs, with it in none of 5.
const EXIT_LINGER: std::time::Duration = std::time::Duration::from_millis(300);

/// Why the kernel could not serve.
#[derive(Debug, thiserror::Error)]
pub enum ServeError {
    /// A socket could not be bound.
    #[error("cannot bind {endpoint}: {reason}")]
    Bind { endpoint: String, reason: String },
}

/// What the publisher task is asked to do.
pub(crate) enum Outgoing {
    /// Sign and send a broadcast.
    Publish(Box<Message>),
    /// Answer once everything queued before has been sent.
    Flush(tokio::sync::oneshot::Sender<()>),
}

/// State shared by the request handlers.
pub(crate) struct Shared {
    pub signer: Signer,
    pub session_id: String,
    pub iopub: tokio::sync::mpsc::UnboundedSender<Outgoing>,
    pub engine: Arc<Session>,
    /// The most recent execute request: parent of lines printed after their
    /// cell ended. Output of a running cell never looks here.
    pub latest_cell: Mutex<Option<Message>>,
    /// Where the engine's preparation stands.
    pub preparation: tokio::sync::watch::Receiver<Preparation>,
    /// When the engine started preparing.
    pub started: Instant,
    /// `rustc --version`, asked once.
    pub rustc_version: OnceLock<String>,
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
        let _ = self.iopub.send(Outgoing::Publish(Box::new(message)));
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

/// An engine session, preparing or ready, with the channels the server reads.
pub struct PreparedEngine {
    /// The session (its engine thread prepares from the start).
    pub session: Arc<Session>,
    /// Where the preparation stands.
    preparation: tokio::sync::watch::Receiver<Preparation>,
    /// Lines printed while no cell runs.
    stray: tokio::sync::mpsc::UnboundedReceiver<StreamLine>,
    /// When the engine started.
    started: Instant,
}

impl PreparedEngine {
    /// Starts the engine thread with `config`; it prepares from now on.
    pub fn start(config: EngineConfig) -> Self {
        let (preparation_tx, preparation) = tokio::sync::watch::channel(Preparation::Starting);
        let observer: Arc<crate::eval::PreparationObserver> = Arc::new(move |state: &Preparation| {
            preparation_tx.send_replace(state.clone());
        });
        let (stray_tx, stray) = tokio::sync::mpsc::unbounded_channel::<StreamLine>();
        let session = Arc::new(Session::start(config, stray_tx, observer));
        Self { session, preparation, stray, started: Instant::now() }
    }

    /// A receiver of the preparation's progress, for [`Self::settled_in`].
    pub fn preparation_watch(&self) -> tokio::sync::watch::Receiver<Preparation> {
        self.preparation.clone()
    }

    /// Waits until the preparation seen by `watch` is over: how long it
    /// took, or why it failed.
    pub async fn settled_in(
        mut watch: tokio::sync::watch::Receiver<Preparation>,
    ) -> Result<std::time::Duration, String> {
        let state = watch.wait_for(Preparation::is_settled).await.map_err(|e| e.to_string())?.clone();
        match state {
            Preparation::Ready(after) => Ok(after),
            Preparation::Failed(message) => Err(message),
            other => Err(format!("the preparation stopped at {other:?}")),
        }
    }
}

/// What a caller of [`serve`] hears and says besides the protocol.
#[derive(Default)]
pub struct ServeHooks {
    /// When it fires, the kernel ends as on a shutdown request (a standby's
    /// launcher went away).
    pub ended_elsewhere: Option<tokio::sync::oneshot::Receiver<()>>,
    /// Told once, when the first execute request has been answered.
    pub first_cell_answered: Option<tokio::sync::oneshot::Sender<()>>,
}

/// Serves the protocol on the connection file's sockets with `engine` until
/// a shutdown request (or `hooks.ended_elsewhere`); then stops the cell
/// process and flushes iopub before returning.
pub async fn serve(connection: ConnectionFile, engine: PreparedEngine, hooks: ServeHooks) -> Result<(), ServeError> {
    let ServeHooks { ended_elsewhere, mut first_cell_answered } = hooks;
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

    // Publisher: sends in queue order; a flush is answered once everything
    // queued before it has been sent.
    let (iopub_tx, mut iopub_rx) = tokio::sync::mpsc::unbounded_channel::<Outgoing>();
    let publisher_signer = signer.clone();
    tokio::spawn(async move {
        while let Some(outgoing) = iopub_rx.recv().await {
            match outgoing {
                Outgoing::Publish(message) => {
                    if let Some(frames) = to_zmq(message.encode(&publisher_signer)) {
                        let _ = iopub.send(frames).await;
                    }
                }
                Outgoing::Flush(done) => {
                    let _ = done.send(());
                }
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

    let PreparedEngine { session: engine, preparation: preparation_rx, stray: mut stray_rx, started } = engine;
    let shared = Arc::new(Shared {
        signer: signer.clone(),
        session_id,
        iopub: iopub_tx,
        engine,
        latest_cell: Mutex::new(None),
        preparation: preparation_rx,
        started,
        rustc_version: OnceLock::new(),
        history: Mutex::new(history::History::default()),
        execution_count: Mutex::new(0),
    });
    shared.status(None, "starting");
    shared.status(None, "idle");

    let stray_shared = Arc::downgrade(&shared);
    tokio::spawn(async move {
        while let Some(line) = stray_rx.recv().await {
            let Some(shared) = stray_shared.upgrade() else { break };
            let parent = shared.latest_cell.lock().ok().and_then(|c| c.clone());
            handlers::forward_output(&shared, parent.as_ref(), line);
        }
    });

    // SIGINT interrupts the running cell (and does nothing while idle).
    let interrupter = shared.engine.interrupter();
    tokio::spawn(async move {
        while tokio::signal::ctrl_c().await.is_ok() {
            interrupter.interrupt();
        }
    });

    // Either loop may end the kernel, and so may the end of a launcher.
    let (stop_tx, mut stop_rx) = tokio::sync::mpsc::channel::<()>(2);
    if let Some(ended) = ended_elsewhere {
        let stop = stop_tx.clone();
        let engine = shared.engine.clone();
        tokio::spawn(async move {
            if ended.await.is_ok() {
                engine.terminate();
                let _ = stop.send(()).await;
            }
        });
    }

    // Control, on its own task.
    let control_shared = shared.clone();
    let control_stop = stop_tx.clone();
    tokio::spawn(async move {
        loop {
            let Ok(raw) = control.recv().await else { break };
            let Some(request) = handlers::decode(&control_shared, to_frames(raw)) else { continue };
            let outcome = handlers::control(&control_shared, &request).await;
            for reply in outcome.replies {
                if let Some(frames) = to_zmq(reply.encode(&control_shared.signer)) {
                    if let Err(e) = control.send(frames).await {
                        eprintln!("plumbline kernel: a control reply could not be sent: {e}");
                    }
                }
            }
            if outcome.shutdown {
                let _ = control_stop.send(()).await;
                break;
            }
        }
    });

    // Stdin is bound so that clients can connect; cells never request input.
    tokio::spawn(async move { while stdin.recv().await.is_ok() {} });

    // Shell: a reader queues verified requests in arrival order.
    let (mut shell_send, mut shell_recv) = shell.split();
    let (queue_tx, mut queue) = tokio::sync::mpsc::unbounded_channel::<Message>();
    let reader_shared = shared.clone();
    tokio::spawn(async move {
        loop {
            match shell_recv.recv().await {
                Ok(raw) => {
                    if let Some(request) = handlers::decode(&reader_shared, to_frames(raw)) {
                        if queue_tx.send(request).is_err() {
                            break;
                        }
                    }
                }
                Err(e) => {
                    eprintln!("plumbline kernel: shell socket closed: {e}");
                    break;
                }
            }
        }
    });

    // The shell loop, in order. When a cell fails with stop_on_error, the
    // execute requests already queued behind it (received while it ran) are
    // aborted; requests received afterwards run normally. No clocks compared.
    let mut behind_failure: VecDeque<Message> = VecDeque::new();
    loop {
        let (request, abort) = match behind_failure.pop_front() {
            Some(request) => (request, true),
            None => tokio::select! {
                next = queue.recv() => match next {
                    Some(request) => (request, false),
                    None => break,
                },
                _ = stop_rx.recv() => break,
            },
        };
        let outcome = if abort && request.header.msg_type == "execute_request" {
            handlers::ShellOutcome {
                replies: vec![handlers::aborted(&shared, &request)],
                abort_queued: false,
                shutdown: false,
            }
        } else {
            handlers::shell(&shared, &request).await
        };
        if outcome.abort_queued {
            while let Ok(queued) = queue.try_recv() {
                behind_failure.push_back(queued);
            }
        }
        for reply in outcome.replies {
            if let Some(frames) = to_zmq(reply.encode(&shared.signer)) {
                let _ = shell_send.send(frames).await;
            }
        }
        if request.header.msg_type == "execute_request" {
            if let Some(told) = first_cell_answered.take() {
                let _ = told.send(());
            }
        }
        if outcome.shutdown {
            break;
        }
    }

    // Shutdown: stop the cell process, then wait until the publisher has
    // handed everything queued to the socket.
    shared.engine.terminate();
    let (flushed_tx, flushed) = tokio::sync::oneshot::channel();
    if shared.iopub.send(Outgoing::Flush(flushed_tx)).is_ok() {
        let _ = flushed.await;
    }
    // The zeromq crate queues each outgoing message per peer and writes it
    // from a task of its own, and has no flush; so, as libzmq's ZMQ_LINGER
    // does, the sockets get a short grace period to write what is queued (the
    // shutdown reply, the last statuses) before the process exits. Only the
    // exit waits on this clock; no output is ordered by it.
    drop((shell_send, shared));
    tokio::time::sleep(EXIT_LINGER).await;
    Ok(())
}
