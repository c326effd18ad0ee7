//! What the kernel does with each request.

use super::Shared;
use crate::eval::completeness::{check, Completeness};
use crate::eval::StreamLine;
use crate::eval::{bundle_json, display_bundle};
use crate::wire::{Message, WireError, PROTOCOL_VERSION};
use serde_json::{json, Map, Value};

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

/// Publishes a line of cell output: a display bundle when it carries our
/// marker, a stream message otherwise.
pub(crate) fn forward_output(shared: &Shared, parent: Option<&Message>, line: StreamLine) {
    if let Some(data) = display_bundle(&line.text) {
        shared.publish(parent, "display_data", json!({ "data": data, "metadata": {}, "transient": {} }));
        return;
    }
    shared.publish(parent, "stream", json!({ "name": line.name, "text": line.text }));
}

fn kernel_info() -> Value {
    json!({
        "status": "ok",
        "protocol_version": PROTOCOL_VERSION,
        "implementation": "plumbline",
        "implementation_version": env!("CARGO_PKG_VERSION"),
        "language_info": {
            "name": "rust",
            "version": rustc_version(),
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

/// Handles a shell request; returns the replies and whether a cell failed
/// with `stop_on_error` set.
pub(crate) async fn shell(shared: &std::sync::Arc<Shared>, request: &Message) -> (Vec<Message>, bool) {
    shared.status(Some(request), "busy");
    let c = &request.content;
    let mut failed_with_stop = false;
    let reply = match request.header.msg_type.as_str() {
        "kernel_info_request" => Some(request.child("kernel_info_reply", kernel_info())),
        "execute_request" => {
            let (reply, failed) = execute(shared, request).await;
            failed_with_stop = failed && c.get("stop_on_error").and_then(Value::as_bool).unwrap_or(true);
            Some(reply)
        }
        "is_complete_request" => {
            let code = c.get("code").and_then(Value::as_str).unwrap_or("");
            let content = match check(code) {
                Completeness::Complete => json!({ "status": "complete" }),
                Completeness::Incomplete(indent) => json!({ "status": "incomplete", "indent": indent }),
                Completeness::Invalid => json!({ "status": "invalid" }),
            };
            Some(request.child("is_complete_reply", content))
        }
        "complete_request" => {
            let code = c.get("code").and_then(Value::as_str).unwrap_or("").to_string();
            let cursor = c.get("cursor_pos").and_then(Value::as_u64).unwrap_or(code.chars().count() as u64) as usize;
            let engine = shared.engine.clone();
            let byte = byte_offset(&code, cursor);
            let code_for_engine = code.clone();
            let outcome =
                tokio::task::spawn_blocking(move || engine.complete(&code_for_engine, byte)).await.unwrap_or_default();
            let (start, end) = if outcome.matches.is_empty() {
                (cursor, cursor)
            } else {
                (char_offset(&code, outcome.cursor_start), char_offset(&code, outcome.cursor_end))
            };
            Some(request.child(
                "complete_reply",
                json!({ "status": "ok", "matches": outcome.matches, "cursor_start": start, "cursor_end": end, "metadata": {} }),
            ))
        }
        "inspect_request" => {
            let code = c.get("code").and_then(Value::as_str).unwrap_or("").to_string();
            let cursor = c.get("cursor_pos").and_then(Value::as_u64).unwrap_or(code.chars().count() as u64) as usize;
            let detail = c.get("detail_level").and_then(Value::as_u64).unwrap_or(0);
            let engine = shared.engine.clone();
            let byte = byte_offset(&code, cursor);
            let found = tokio::task::spawn_blocking(move || engine.inspect(&code, byte)).await.ok().flatten();
            let content = match found {
                Some((plain, html)) => {
                    let plain = if detail == 0 { plain.lines().take(12).collect::<Vec<_>>().join("\n") } else { plain };
                    json!({ "status": "ok", "found": true, "data": { "text/plain": plain, "text/html": html }, "metadata": {} })
                }
                None => json!({ "status": "ok", "found": false, "data": {}, "metadata": {} }),
            };
            Some(request.child("inspect_reply", content))
        }
        "history_request" => {
            let with_output = c.get("output").and_then(Value::as_bool).unwrap_or(false);
            let history =
                shared.history.lock().map(|h| {
                    let n = c.get("n").and_then(Value::as_u64).unwrap_or(10) as usize;
                    let cells = match c.get("hist_access_type").and_then(Value::as_str).unwrap_or("tail") {
                        "range" => h.range(
                            c.get("start").and_then(Value::as_i64).unwrap_or(0),
                            c.get("stop").and_then(Value::as_i64).unwrap_or(0),
                        ),
                        "search" => h.search(
                            c.get("pattern").and_then(Value::as_str).unwrap_or("*"),
                            n,
                            c.get("unique").and_then(Value::as_bool).unwrap_or(false),
                        ),
                        _ => h.tail(n),
                    };
                    // With `output`, each entry carries (input, output) as the protocol asks.
                    cells
                        .into_iter()
                        .map(|(count, code)| {
                            if with_output {
                                json!([0, count, [code, h.output(count)]])
                            } else {
                                json!([0, count, code])
                            }
                        })
                        .collect::<Vec<Value>>()
                });
            let entries: Vec<Value> = history.unwrap_or_default();
            Some(request.child("history_reply", json!({ "status": "ok", "history": entries })))
        }
        "comm_info_request" => Some(request.child("comm_info_reply", json!({ "status": "ok", "comms": {} }))),
        "shutdown_request" => Some(shutdown(shared, request)),
        "comm_open" | "comm_msg" | "comm_close" => None,
        other => {
            eprintln!("plumbline kernel: no handler for `{other}` on shell; ignored");
            None
        }
    };
    shared.status(Some(request), "idle");
    (reply.into_iter().collect(), failed_with_stop)
}

fn shutdown(shared: &Shared, request: &Message) -> Message {
    let restart = request.content.get("restart").and_then(Value::as_bool).unwrap_or(false);
    // Leave once the reply is on its way; the front end restarts us when asked to.
    tokio::spawn(async {
        tokio::time::sleep(std::time::Duration::from_millis(300)).await;
        std::process::exit(0);
    });
    let _ = shared;
    request.child("shutdown_reply", json!({ "status": "ok", "restart": restart }))
}

/// Handles a control request.
pub(crate) async fn control(shared: &std::sync::Arc<Shared>, request: &Message) -> Vec<Message> {
    shared.status(Some(request), "busy");
    let reply = match request.header.msg_type.as_str() {
        "kernel_info_request" => Some(request.child("kernel_info_reply", kernel_info())),
        "interrupt_request" => {
            shared.engine.interrupter().interrupt();
            Some(request.child("interrupt_reply", json!({ "status": "ok" })))
        }
        "shutdown_request" => Some(shutdown(shared, request)),
        other => {
            eprintln!("plumbline kernel: no handler for `{other}` on control; ignored");
            None
        }
    };
    shared.status(Some(request), "idle");
    reply.into_iter().collect()
}

/// Runs one cell; returns the reply and whether the cell failed.
async fn execute(shared: &std::sync::Arc<Shared>, request: &Message) -> (Message, bool) {
    let c = &request.content;
    let code = c.get("code").and_then(Value::as_str).unwrap_or("").to_string();
    let silent = c.get("silent").and_then(Value::as_bool).unwrap_or(false);
    let store_history = c.get("store_history").and_then(Value::as_bool).unwrap_or(true) && !silent;
    let count = {
        let mut counter = shared.execution_count.lock().unwrap_or_else(|e| e.into_inner());
        if store_history {
            *counter += 1;
        }
        *counter
    };
    if store_history {
        if let Ok(mut h) = shared.history.lock() {
            h.push(count, &code);
        }
    }
    if !silent {
        shared.publish(Some(request), "execute_input", json!({ "code": code, "execution_count": count }));
    }
    if let Ok(mut current) = shared.current.lock() {
        *current = Some(request.clone());
    }
    let outcome = if code.trim().is_empty() {
        Default::default()
    } else {
        let engine = shared.engine.clone();
        let cell = code.clone();
        tokio::task::spawn_blocking(move || engine.execute(&cell)).await.unwrap_or_default()
    };
    // Let the output forwarder publish the cell's last lines before the result.
    tokio::time::sleep(std::time::Duration::from_millis(20)).await;
    if let Ok(mut current) = shared.current.lock() {
        *current = None;
    }
    if let Some(error) = outcome.error {
        let content = json!({ "ename": error.ename, "evalue": error.evalue, "traceback": error.traceback });
        shared.publish(Some(request), "error", content.clone());
        let mut reply = content;
        if let Some(object) = reply.as_object_mut() {
            object.insert("status".into(), json!("error"));
            object.insert("execution_count".into(), json!(count));
        }
        return (request.child("execute_reply", reply), true);
    }
    if store_history {
        if let (Ok(mut h), Some(text)) = (shared.history.lock(), outcome.data.get("text/plain")) {
            h.set_output(count, text);
        }
    }
    if !silent && !outcome.data.is_empty() {
        let data = bundle_json(outcome.data);
        shared.publish(
            Some(request),
            "execute_result",
            json!({ "execution_count": count, "data": data, "metadata": {} }),
        );
    }
    let mut user_expressions = Map::new();
    if let Some(expressions) = c.get("user_expressions").and_then(Value::as_object) {
        for (name, expression) in expressions {
            let Some(expression) = expression.as_str() else { continue };
            let engine = shared.engine.clone();
            let expr = expression.to_string();
            let result = tokio::task::spawn_blocking(move || engine.execute(&expr)).await.unwrap_or_default();
            let value = match result.error {
                None => {
                    let data = bundle_json(result.data);
                    json!({ "status": "ok", "data": data, "metadata": {} })
                }
                Some(e) => json!({ "status": "error", "ename": e.ename, "evalue": e.evalue, "traceback": e.traceback }),
            };
            user_expressions.insert(name.clone(), value);
        }
    }
    let reply =
        json!({ "status": "ok", "execution_count": count, "user_expressions": user_expressions, "payload": [] });
    (request.child("execute_reply", reply), false)
}
