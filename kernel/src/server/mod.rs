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
//! Every task above (and the caller's companions, [`ServeHooks`]) sits in
//! one `JoinSet` that [`serve`] owns; at shutdown it ends them all and waits
//! for them, bounded, then for the socket library's writers.
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

/// The longest the kernel waits at shutdown for its tasks, and then for the
/// socket library's writers, to end (see the end of [`serve`]): 2 s each. A
/// task still running then is reported on stderr and ends with the process.
const TASKS_END_WITHIN: std::time::Duration = std::time::Duration::from_secs(2);

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
    /// The caller's own tasks for this kernel (a launcher's line reader, the
    /// next standby's start): [`serve`] owns them from here on and ends
    /// them with its own at shutdown.
    pub companions: tokio::task::JoinSet<()>,
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
    let ServeHooks { companions: mut tasks, ended_elsewhere, mut first_cell_answered } = hooks;
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
    tasks.spawn(async move {
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
    tasks.spawn(async move {
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
    tasks.spawn(async move {
        while let Some(line) = stray_rx.recv().await {
            let Some(shared) = stray_shared.upgrade() else { break };
            let parent = shared.latest_cell.lock().ok().and_then(|c| c.clone());
            handlers::forward_output(&shared, parent.as_ref(), line);
        }
    });

    // SIGINT interrupts the running cell (and does nothing while idle).
    let interrupter = shared.engine.interrupter();
    tasks.spawn(async move {
        while tokio::signal::ctrl_c().await.is_ok() {
            interrupter.interrupt();
        }
    });

    // Either loop may end the kernel, and so may the end of a launcher.
    let (stop_tx, mut stop_rx) = tokio::sync::mpsc::channel::<()>(2);
    if let Some(ended) = ended_elsewhere {
        let stop = stop_tx.clone();
        let engine = shared.engine.clone();
        tasks.spawn(async move {
            if ended.await.is_ok() {
                engine.terminate();
                let _ = stop.send(()).await;
            }
        });
    }

    // Control, on its own task.
    let control_shared = shared.clone();
    let control_stop = stop_tx.clone();
    tasks.spawn(async move {
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
    tasks.spawn(async move { while stdin.recv().await.is_ok() {} });

    // Shell: a reader queues verified requests in arrival order.
    let (mut shell_send, mut shell_recv) = shell.split();
    let (queue_tx, mut queue) = tokio::sync::mpsc::unbounded_channel::<Message>();
    let reader_shared = shared.clone();
    tasks.spawn(async move {
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

    // Shutdown, in order: stop the cell process; wait until the publisher
    // has handed everything queued to the iopub socket; end every task of the
    // kernel (each owns a socket or a channel end, so the sockets close with
    // them) and wait for them; then wait for the socket library's writers.
    shared.engine.terminate();
    let (flushed_tx, flushed) = tokio::sync::oneshot::channel();
    if shared.iopub.send(Outgoing::Flush(flushed_tx)).is_ok() {
        let _ = flushed.await;
    }
    drop((shell_send, shared));
    tasks.abort_all();
    let ended = tokio::time::timeout(TASKS_END_WITHIN, async { while tasks.join_next().await.is_some() {} }).await;
    if ended.is_err() {
        eprintln!("plumbline kernel: {} task(s) did not end within {:?} of shutdown", tasks.len(), TASKS_END_WITHIN);
    }
    socket_writers_done(TASKS_END_WITHIN).await;
    Ok(())
}

/// Waits (at most `bound`) until no task is left on this runtime: the
/// zeromq crate writes each peer's queue from a task of its own, which
/// drains what is queued (the shutdown reply, the last statuses) and ends
/// once its socket is closed; it offers no flush to await, so the kernel
/// watches the runtime's count of live tasks fall to zero instead, checking
/// each millisecond. All of the kernel's own tasks have ended by then.
async fn socket_writers_done(bound: std::time::Duration) {
    let metrics = tokio::runtime::Handle::current().metrics();
    let deadline = Instant::now() + bound;
    while metrics.num_alive_tasks() > 0 && Instant::now() < deadline {
        tokio::time::sleep(std::time::Duration::from_millis(1)).await;
    }
    let left = metrics.num_alive_tasks();
    if left > 0 {
        eprintln!("plumbline kernel: {left} socket task(s) still writing {bound:?} after shutdown; the exit ends them");
    }
}
