//! What the kernel does with each request.
//!
//! Every handler parses its content into a typed request first
//! ([`super::requests`]); content of the wrong shape gets an error reply.

use super::requests::{
    self, BadRequest, CompleteRequest, ExecuteRequest, HistoryAccess, HistoryRequest, InspectRequest,
    IsCompleteRequest, ShutdownRequest,
};
use super::Shared;
use crate::eval::completeness::{check, Completeness};
use crate::eval::display::display_message;
use crate::eval::{bundle_json, display_command, CellEvent, ExecOutcome, Preparation, StreamLine};
use crate::wire::{Message, WireError, PROTOCOL_VERSION};
use serde_json::{json, Map, Value};
use std::sync::Arc;
use std::time::Duration;

/// Decodes and verifies frames; a bad message is logged and dropped.
pub(crate) fn decode(shared: &Shared, frames: Vec<Vec<u8>>) -> Option<Message> {
    match Message::decode(frames, &shared.signer) {
        Ok(m) => Some(m),
        Err(WireError::BadSignature(kind)) => {
            eprintln!("plumbline kernel: dropped a `{kind}` message with a bad or missing signature (not executed)");
            None
        }
        Err(e) => {
            eprintln!("plumbline kernel: dropped a message: {e}");
            None
        }
    }
}

/// Publishes a line of cell output as a child of `parent`: a display
/// command when it carries one, a stream message otherwise.
pub(crate) fn forward_output(shared: &Shared, parent: Option<&Message>, line: StreamLine) {
    if let Some(command) = display_command(&line.text) {
        let (kind, content) = display_message(command);
        shared.publish(parent, kind, content);
        return;
    }
    shared.publish(parent, "stream", json!({ "name": line.name, "text": line.text }));
}

fn kernel_info(shared: &Shared) -> Value {
    json!({
        "status": "ok",
        "protocol_version": PROTOCOL_VERSION,
        "implementation": "plumbline",
        "implementation_version": env!("CARGO_PKG_VERSION"),
        "language_info": {
            "name": "rust",
            "version": shared.rustc_version.get_or_init(rustc_version),
            "mimetype": "text/rust",
            "file_extension": ".rs",
            "pygments_lexer": "rust",
            "codemirror_mode": "rust",
        },
        "banner": format!(
            "Plumbline {} — regression studies for valuation analysts, in Rust. `plumbline::prelude` is loaded: \
             load(\"sales.csv\")?, ModelSpec::new(\"price\"), fit(&frame, &spec)?",
            env!("CARGO_PKG_VERSION")
        ),
        "help_links": [
            { "text": "Plumbline guide", "url": "https://docs.rs/plumbline" },
            { "text": "The Rust book", "url": "https://doc.rust-lang.org/book/" },
        ],
        "debugger": false,
    })
}

/// `rustc --version`'s version number (run once per kernel, see `Shared`).
fn rustc_version() -> String {
    std::process::Command::new("rustc")
        .arg("--version")
        .output()
        .ok()
        .and_then(|o| String::from_utf8(o.stdout).ok())
        .and_then(|s| s.split_whitespace().nth(1).map(str::to_string))
        .unwrap_or_else(|| "unknown".into())
}

/// Byte offset of the `chars`-th character (the protocol counts code points).
fn byte_offset(code: &str, chars: usize) -> usize {
    code.char_indices().nth(chars).map_or(code.len(), |(i, _)| i)
}

/// Character count of a byte offset.
fn char_offset(code: &str, bytes: usize) -> usize {
    code[..bytes.min(code.len())].chars().count()
}

/// The reply type for a request type (`x_request` → `x_reply`).
fn reply_type(msg_type: &str) -> String {
    format!("{}_reply", msg_type.strip_suffix("_request").unwrap_or(msg_type))
}

/// The error reply to a request whose content has the wrong shape.
fn bad_request(request: &Message, problem: &BadRequest) -> Message {
    request.child(
        &reply_type(&request.header.msg_type),
        json!({
            "status": "error",
            "ename": "BadRequest",
            "evalue": problem.to_string(),
            "traceback": [format!("The kernel could not read this request: {problem}. Nothing was run.")],
        }),
    )
}

/// The reply to an execute request aborted after an earlier failure.
pub(crate) fn aborted(shared: &Shared, request: &Message) -> Message {
    shared.status(Some(request), "busy");
    let count = shared.execution_count.lock().map(|c| *c).unwrap_or(0);
    let reply = request.child(
        "execute_reply",
        json!({ "status": "aborted", "execution_count": count, "user_expressions": {}, "payload": [] }),
    );
    shared.status(Some(request), "idle");
    reply
}

/// What handling a shell request asks of the shell loop.
pub(crate) struct ShellOutcome {
    /// Replies to send on the shell socket.
    pub replies: Vec<Message>,
    /// A cell failed with `stop_on_error`: abort the execute requests queued behind it.
    pub abort_queued: bool,
    /// The front end asked the kernel to exit (after the replies are sent).
    pub shutdown: bool,
}

/// Handles a shell request.
pub(crate) async fn shell(shared: &Arc<Shared>, request: &Message) -> ShellOutcome {
    shared.status(Some(request), "busy");
    let mut outcome = ShellOutcome { replies: Vec::new(), abort_queued: false, shutdown: false };
    let kind = request.header.msg_type.as_str();
    let content = &request.content;
    let reply = match kind {
        "kernel_info_request" => Some(request.child("kernel_info_reply", kernel_info(shared))),
        "execute_request" => Some(match requests::parse::<ExecuteRequest>(kind, content) {
            Ok(cell) => {
                let (reply, failed) = execute(shared, request, &cell).await;
                outcome.abort_queued = failed && cell.stop_on_error;
                reply
            }
            Err(problem) => bad_request(request, &problem),
        }),
        "is_complete_request" => Some(match requests::parse::<IsCompleteRequest>(kind, content) {
            Ok(r) => {
                let content = match check(&r.code) {
                    Completeness::Complete => json!({ "status": "complete" }),
                    Completeness::Incomplete(indent) => json!({ "status": "incomplete", "indent": indent }),
                    Completeness::Invalid => json!({ "status": "invalid" }),
                };
                request.child("is_complete_reply", content)
            }
            Err(problem) => bad_request(request, &problem),
        }),
        "complete_request" => Some(match requests::parse::<CompleteRequest>(kind, content) {
            Ok(r) => complete(shared, request, r).await,
            Err(problem) => bad_request(request, &problem),
        }),
        "inspect_request" => Some(match requests::parse::<InspectRequest>(kind, content) {
            Ok(r) => inspect(shared, request, r).await,
            Err(problem) => bad_request(request, &problem),
        }),
        "history_request" => Some(match requests::parse::<HistoryRequest>(kind, content) {
            Ok(r) => history(shared, request, &r),
            Err(problem) => bad_request(request, &problem),
        }),
        "comm_info_request" => Some(request.child("comm_info_reply", json!({ "status": "ok", "comms": {} }))),
        "shutdown_request" => Some(match requests::parse::<ShutdownRequest>(kind, content) {
            Ok(r) => {
                outcome.shutdown = true;
                request.child("shutdown_reply", json!({ "status": "ok", "restart": r.restart }))
            }
            Err(problem) => bad_request(request, &problem),
        }),
        "comm_open" | "comm_msg" | "comm_close" => None,
        other => unknown(request, other, "shell"),
    };
    shared.status(Some(request), "idle");
    outcome.replies.extend(reply);
    outcome
}

/// An unknown request type: an error reply when it looks like a request, so
/// the sender does not wait forever; otherwise logged and ignored.
fn unknown(request: &Message, kind: &str, socket: &str) -> Option<Message> {
    eprintln!("plumbline kernel: no handler for `{kind}` on {socket}");
    kind.ends_with("_request").then(|| {
        request.child(
            &reply_type(kind),
            json!({
                "status": "error",
                "ename": "UnknownRequest",
                "evalue": format!("this kernel does not handle `{kind}` on the {socket} channel"),
                "traceback": [],
            }),
        )
    })
}

async fn complete(shared: &Arc<Shared>, request: &Message, r: CompleteRequest) -> Message {
    let engine = shared.engine.clone();
    let byte = byte_offset(&r.code, r.cursor_pos);
    let code = r.code.clone();
    let outcome = tokio::task::spawn_blocking(move || engine.complete(&code, byte)).await.unwrap_or_default();
    let (start, end) = if outcome.matches.is_empty() {
        (r.cursor_pos, r.cursor_pos)
    } else {
        (char_offset(&r.code, outcome.cursor_start), char_offset(&r.code, outcome.cursor_end))
    };
    request.child(
        "complete_reply",
        json!({ "status": "ok", "matches": outcome.matches, "cursor_start": start, "cursor_end": end, "metadata": {} }),
    )
}

async fn inspect(shared: &Arc<Shared>, request: &Message, r: InspectRequest) -> Message {
    let engine = shared.engine.clone();
    let byte = byte_offset(&r.code, r.cursor_pos);
    let code = r.code;
    let found = tokio::task::spawn_blocking(move || engine.inspect(&code, byte)).await.ok().flatten();
    let content = match found {
        Some((plain, html)) => {
            let plain = if r.detail_level == 0 { plain.lines().take(12).collect::<Vec<_>>().join("\n") } else { plain };
            json!({ "status": "ok", "found": true, "data": { "text/plain": plain, "text/html": html }, "metadata": {} })
        }
        None => json!({ "status": "ok", "found": false, "data": {}, "metadata": {} }),
    };
    request.child("inspect_reply", content)
}

fn history(shared: &Shared, request: &Message, r: &HistoryRequest) -> Message {
    let entries: Vec<Value> = shared
        .history
        .lock()
        .map(|h| {
            let n = r.n.unwrap_or(10);
            let cells = match r.hist_access_type {
                HistoryAccess::Range => h.range(r.start.unwrap_or(0), r.stop.unwrap_or(0)),
                HistoryAccess::Search => h.search(r.pattern.as_deref().unwrap_or("*"), n, r.unique),
                HistoryAccess::Tail => h.tail(n),
            };
            // With `output`, each entry carries (input, output) as the protocol asks.
            cells
                .into_iter()
                .map(
                    |(count, code)| {
                        if r.output {
                            json!([0, count, [code, h.output(count)]])
                        } else {
                            json!([0, count, code])
                        }
                    },
                )
                .collect()
        })
        .unwrap_or_default();
    request.child("history_reply", json!({ "status": "ok", "history": entries }))
}

/// What handling a control request asks of the control loop.
pub(crate) struct ControlOutcome {
    /// Replies to send on the control socket.
    pub replies: Vec<Message>,
    /// The front end asked the kernel to exit (after the replies are sent).
    pub shutdown: bool,
}

/// Handles a control request.
pub(crate) async fn control(shared: &Arc<Shared>, request: &Message) -> ControlOutcome {
    shared.status(Some(request), "busy");
    let kind = request.header.msg_type.as_str();
    let mut shutdown = false;
    let reply = match kind {
        "kernel_info_request" => Some(request.child("kernel_info_reply", kernel_info(shared))),
        "interrupt_request" => {
            // Acts only on a running cell; while idle it changes nothing.
            shared.engine.interrupter().interrupt();
            Some(request.child("interrupt_reply", json!({ "status": "ok" })))
        }
        "shutdown_request" => Some(match requests::parse::<ShutdownRequest>(kind, &request.content) {
            Ok(r) => {
                shutdown = true;
                request.child("shutdown_reply", json!({ "status": "ok", "restart": r.restart }))
            }
            Err(problem) => bad_request(request, &problem),
        }),
        other => unknown(request, other, "control"),
    };
    shared.status(Some(request), "idle");
    ControlOutcome { replies: reply.into_iter().collect(), shutdown }
}

/// The `execute_reply` field with the cell's engine phases (`[{name, seconds}]`).
pub const ENGINE_PHASES_FIELD: &str = "plumbline_engine_phases";

/// Runs one cell; returns the reply and whether the cell failed.
///
/// Everything the cell prints is published, in order and as a child of
/// `request`, from the cell's own event stream; the result or error follows
/// its last line, and the reply follows that.
async fn execute(shared: &Arc<Shared>, request: &Message, cell: &ExecuteRequest) -> (Message, bool) {
    let code = &cell.code;
    let store_history = cell.store_history && !cell.silent;
    let count = {
        let mut counter = shared.execution_count.lock().unwrap_or_else(|e| e.into_inner());
        if store_history {
            *counter += 1;
        }
        *counter
    };
    if store_history {
        if let Ok(mut h) = shared.history.lock() {
            h.push(count, code);
        }
    }
    if !cell.silent {
        shared.publish(Some(request), "execute_input", json!({ "code": code, "execution_count": count }));
    }
    if let Ok(mut latest) = shared.latest_cell.lock() {
        *latest = Some(request.clone());
    }
    let outcome = if code.trim().is_empty() { ExecOutcome::default() } else { run_cell(shared, request, code).await };
    // Where the engine's time went (see `eval::EnginePhase`): a field of our
    // own in the reply, which front ends ignore.
    let phases = json!(outcome.phases);
    if let Some(error) = outcome.error {
        let content = json!({ "ename": error.ename, "evalue": error.evalue, "traceback": error.traceback });
        shared.publish(Some(request), "error", content.clone());
        let mut reply = content;
        if let Some(object) = reply.as_object_mut() {
            object.insert("status".into(), json!("error"));
            object.insert("execution_count".into(), json!(count));
            object.insert(ENGINE_PHASES_FIELD.into(), phases);
        }
        return (request.child("execute_reply", reply), true);
    }
    if store_history {
        if let (Ok(mut h), Some(text)) = (shared.history.lock(), outcome.data.get("text/plain")) {
            h.set_output(count, text);
        }
    }
    if !cell.silent && !outcome.data.is_empty() {
        let data = bundle_json(outcome.data);
        shared.publish(
            Some(request),
            "execute_result",
            json!({ "execution_count": count, "data": data, "metadata": {} }),
        );
    }
    let mut user_expressions = Map::new();
    for (name, expression) in &cell.user_expressions {
        let mut events = shared.engine.execute(expression);
        let mut result = None;
        while let Some(event) = events.recv().await {
            if let CellEvent::Finished(outcome) = event {
                result = Some(outcome);
            }
        }
        let value = match result.and_then(|r| if r.error.is_none() { Some(Ok(r.data)) } else { r.error.map(Err) }) {
            Some(Ok(data)) => json!({ "status": "ok", "data": bundle_json(data), "metadata": {} }),
            Some(Err(e)) => {
                json!({ "status": "error", "ename": e.ename, "evalue": e.evalue, "traceback": e.traceback })
            }
            None => {
                json!({ "status": "error", "ename": "EngineStopped", "evalue": "the engine stopped", "traceback": [] })
            }
        };
        user_expressions.insert(name.clone(), value);
    }
    let mut reply =
        json!({ "status": "ok", "execution_count": count, "user_expressions": user_expressions, "payload": [] });
    if let Some(object) = reply.as_object_mut() {
        object.insert(ENGINE_PHASES_FIELD.into(), phases);
    }
    (request.child("execute_reply", reply), false)
}

/// Sends `code` to the engine and publishes its events until it finishes.
/// While the engine is still being prepared (its first build takes minutes)
/// one display, updated in place, says how far it got.
async fn run_cell(shared: &Arc<Shared>, request: &Message, code: &str) -> ExecOutcome {
    let mut events = shared.engine.execute(code);
    let mut preparation = shared.preparation.clone();
    let waiting = !preparation.borrow().is_settled();
    let display_id = format!("plumbline-engine-{}", request.header.msg_id);
    if waiting {
        publish_preparation(shared, request, &display_id, &preparation.borrow().clone(), false);
    }
    let mut watching = waiting;
    // Redraws the elapsed time while waiting; not involved in ordering.
    let mut redraw = tokio::time::interval(Duration::from_secs(1));
    loop {
        tokio::select! {
            biased;
            event = events.recv() => match event {
                Some(CellEvent::Output(line)) => forward_output(shared, Some(request), line),
                Some(CellEvent::Finished(outcome)) => return outcome,
                None => return ExecOutcome::default(),
            },
            changed = preparation.changed(), if watching => {
                if changed.is_err() {
                    watching = false;
                    continue;
                }
                let state = preparation.borrow_and_update().clone();
                watching = !state.is_settled();
                publish_preparation(shared, request, &display_id, &state, true);
            }
            _ = redraw.tick(), if watching => {
                let state = preparation.borrow().clone();
                publish_preparation(shared, request, &display_id, &state, true);
            }
        }
    }
}

fn publish_preparation(shared: &Shared, request: &Message, display_id: &str, state: &Preparation, update: bool) {
    let text = state.describe(shared.started.elapsed());
    let html = format!(
        "<div class=\"plumbline-engine-status\" style=\"font:13px sans-serif;color:#4a4a4a\">{}</div>",
        plumbline::render::html::escape(&text)
    );
    let content = json!({
        "data": { "text/plain": text, "text/html": html },
        "metadata": {},
        "transient": { "display_id": display_id },
    });
    shared.publish(Some(request), if update { "update_display_data" } else { "display_data" }, content);
}
