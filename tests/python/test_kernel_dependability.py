"""The kernel as an analyst leaves it open all day, checked through jupyter_client
(the Jupyter project's reference client, from PyPI) against the messaging
protocol 5.3 as published by the Jupyter project:

* ordered output: 10,000 printed lines and a value arrive in order, each with the
  cell's parent header, before the cell's status goes idle and before its reply;
* crash-proof cells: abort, stack overflow, and a kill from outside each give an
  error reply that names the lost variables; the next cell runs;
* interrupts act on running cells only; `stop_on_error` aborts what was queued;
* requests of the wrong shape get error replies;
* display ids: a progress display updated in place, and `clear_output`.
"""
import json
import os
import signal
import time

import pytest
from jupyter_client.manager import start_new_kernel

from conftest import install_kernelspec
from kernel_messages import TIMEOUT, collect, kernel_time, run, stream_text

install_kernelspec()


@pytest.fixture(scope="module")
def kernel():
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120)
    reply = kc.execute_interactive("1", timeout=TIMEOUT)
    assert reply["content"]["status"] == "ok", reply["content"]
    yield km, kc
    kc.stop_channels()
    km.shutdown_kernel(now=True)


def test_ten_thousand_lines_arrive_in_order_before_the_reply(kernel):
    _, kc = kernel
    reply, messages = run(kc, 'for i in 0..10_000 { println!("line {i}"); }\n'
                              'eprintln!("written last, on standard error");\n"all printed"')
    assert reply["content"]["status"] == "ok", reply["content"]
    # Every broadcast of the cell has the cell's request as parent (collect() kept only those).
    lines = stream_text(messages).splitlines()
    assert lines == [f"line {i}" for i in range(10_000)]
    kinds = [m["msg_type"] for m in messages]
    result = kinds.index("execute_result")
    last_stream = max(i for i, k in enumerate(kinds) if k == "stream")
    assert last_stream < result, "output arrived after the cell's value"
    assert stream_text(messages, "stderr") == "written last, on standard error\n"
    # The kernel made every output of the cell before its reply.
    outputs = [m for m in messages if m["msg_type"] in ("stream", "execute_result")]
    assert max(kernel_time(m) for m in outputs) <= kernel_time(reply)


def test_a_question_mark_failure_is_an_error_with_its_message(kernel):
    _, kc = kernel
    reply, messages = run(kc, 'println!("before");\nlet n: i32 = "12x".parse()?;\nn')
    assert reply["content"]["status"] == "error"
    assert "invalid digit" in reply["content"]["evalue"]
    assert stream_text(messages) == "before\n"
    assert [m["msg_type"] for m in messages].count("error") == 1


def test_a_panic_keeps_earlier_variables(kernel):
    _, kc = kernel
    run(kc, "let kept_value = 5;")
    reply, _ = run(kc, 'panic!("on purpose")')
    assert reply["content"]["ename"] == "panic"
    reply, messages = run(kc, "kept_value * 2")
    assert reply["content"]["status"] == "ok"
    assert [m for m in messages if m["msg_type"] == "execute_result"][0]["content"]["data"]["text/plain"] == "10"


CRASHES = [
    ("abort", "std::process::abort();", "CellProcessAborted"),
    ("stack overflow",
     "fn deeper(n: u64) -> u64 { let pad = [n; 128]; deeper(pad[7] + 1) + pad[3] }\ndeeper(0);",
     "CellProcessCrashed"),
    ("killed from outside",
     'std::process::Command::new("kill").args(["-KILL", &std::process::id().to_string()]).status().unwrap();\n'
     "loop { std::thread::sleep(std::time::Duration::from_millis(10)); }",
     "CellProcessKilled"),
]


@pytest.mark.parametrize("what,code,ename", CRASHES, ids=[c[0] for c in CRASHES])
def test_a_crashing_cell_is_reported_and_the_next_cell_runs(kernel, what, code, ename):
    _, kc = kernel
    reply, _ = run(kc, 'let lost_total = 17;\nfn still_here() -> i32 { 40 }\nprintln!("ready");')
    assert reply["content"]["status"] == "ok", reply["content"]
    reply, messages = run(kc, 'println!("last words");\n' + code)
    content = reply["content"]
    assert content["status"] == "error", content
    assert content["ename"] == ename, content
    traceback = "\n".join(content["traceback"])
    assert "lost_total" in traceback and "Variables lost:" in traceback, traceback
    assert "last words" in stream_text(messages)
    # The next cell runs; functions are kept; the panic hook is back in the new process.
    reply, messages = run(kc, "still_here() + 2")
    assert reply["content"]["status"] == "ok", reply["content"]
    assert [m for m in messages if m["msg_type"] == "execute_result"][0]["content"]["data"]["text/plain"] == "42"
    reply, _ = run(kc, 'panic!("after a restart")')
    assert reply["content"]["ename"] == "panic", reply["content"]


def test_an_interrupt_while_idle_changes_nothing(kernel):
    km, kc = kernel
    run(kc, "let survivor = 7;")
    request = kc.session.msg("interrupt_request", {})
    kc.control_channel.send(request)
    reply = kc.get_control_msg(timeout=30)
    assert reply["msg_type"] == "interrupt_reply" and reply["content"]["status"] == "ok"
    os.kill(km.provisioner.process.pid, signal.SIGINT)
    time.sleep(1)  # give a wrong kill time to happen before we look
    reply, messages = run(kc, "survivor + 1")
    assert reply["content"]["status"] == "ok", reply["content"]
    assert [m for m in messages if m["msg_type"] == "execute_result"][0]["content"]["data"]["text/plain"] == "8"


def test_an_interrupt_stops_a_running_cell(kernel):
    km, kc = kernel
    msg_id = kc.execute("let spun = 1;\nloop { std::hint::spin_loop(); }")
    time.sleep(5)
    km.interrupt_kernel()
    reply, _ = collect(kc, msg_id, timeout=60)
    assert reply["content"]["ename"] == "Interrupted"
    reply, _ = run(kc, "1 + 1")
    assert reply["content"]["status"] == "ok"


def test_stop_on_error_aborts_the_queued_cells_only(kernel):
    _, kc = kernel
    failing = kc.execute('std::thread::sleep(std::time::Duration::from_secs(2));\npanic!("first cell fails")')
    queued = [kc.execute("1 + 1"), kc.execute("2 + 2")]
    statuses = {}
    while len(statuses) < 3:
        reply = kc.get_shell_msg(timeout=600)
        statuses[reply["parent_header"]["msg_id"]] = reply["content"]["status"]
    assert statuses[failing] == "error"
    assert [statuses[q] for q in queued] == ["aborted", "aborted"]
    reply, _ = run(kc, "3 + 3")
    assert reply["content"]["status"] == "ok"


def test_requests_of_the_wrong_shape_get_error_replies(kernel):
    _, kc = kernel
    for msg_type, content in [("execute_request", {"code": 5}),
                              ("complete_request", {"code": "x"}),
                              ("inspect_request", {"code": "x", "cursor_pos": "three"}),
                              ("history_request", {"hist_access_type": 4}),
                              ("unknown_request", {})]:
        message = kc.session.msg(msg_type, content)
        kc.shell_channel.send(message)
        reply = kc.get_shell_msg(timeout=60)
        while reply["parent_header"].get("msg_id") != message["header"]["msg_id"]:
            reply = kc.get_shell_msg(timeout=60)
        assert reply["msg_type"] == msg_type.replace("_request", "_reply")
        assert reply["content"]["status"] == "error", reply["content"]
    reply, _ = run(kc, "4 + 4")
    assert reply["content"]["status"] == "ok"


def test_a_progress_display_is_updated_in_place(kernel):
    _, kc = kernel
    reply, messages = run(kc, 'let mut progress = LiveProgress::new("Folds", "folds");\n'
                              'for done in 1..=4 { progress.update(done, 4); }\n'
                              'println!("then cleared");\nclear_output();')
    assert reply["content"]["status"] == "ok", reply["content"]
    shown = [m for m in messages if m["msg_type"] == "display_data"]
    updates = [m for m in messages if m["msg_type"] == "update_display_data"]
    assert len(shown) == 1 and len(updates) == 3
    display_id = shown[0]["content"]["transient"]["display_id"]
    assert {u["content"]["transient"]["display_id"] for u in updates} == {display_id}
    assert updates[-1]["content"]["data"]["text/plain"].startswith("Folds: 4 of 4 folds (100%)")
    kinds = [m["msg_type"] for m in messages]
    assert kinds.index("clear_output") > kinds.index("stream")


# Each kind of last value a cell may end in, with the text/plain the kernel shows
# for it (Rust's own `Debug` formatting, as documented in the standard library).
LAST_VALUES = [
    ("1 + 1", "2"),
    ('format!("{}", 3)', '"3"'),
    ("vec![1.5, 2.0]", "[1.5, 2.0]"),
    ("Some(7_u8)", "Some(7)"),
    ('"12".parse::<i32>()', "Ok(12)"),
    ("(1, 'a')", "(1, 'a')"),
    ("let z = 41 + 1;", None),
]


@pytest.mark.parametrize("code,shown", LAST_VALUES)
def test_a_cell_is_built_once_whatever_its_last_value(kernel, code, shown):
    """The engine's phases for the cell (our reply field `plumbline_engine_phases`) show one
    build: no second build for `Debug` text ("Fallback"), whatever the last value's type."""
    _, kc = kernel
    reply, messages = run(kc, code)
    assert reply["content"]["status"] == "ok", reply["content"]
    phases = [p["name"] for p in reply["content"]["plumbline_engine_phases"]]
    builds = [name for name in phases if name not in ("Execution", "Type inference")]
    assert builds == ["Final compile"], phases
    # Type inference runs only for a cell that defines variables (our engine patch).
    assert ("Type inference" in phases) == code.startswith("let "), phases
    results = [m for m in messages if m["msg_type"] == "execute_result"]
    if shown is None:
        assert results == []
        reply, messages = run(kc, "z")
        assert next(m for m in messages if m["msg_type"] == "execute_result")["content"]["data"]["text/plain"] == "42"
    else:
        assert results[0]["content"]["data"]["text/plain"] == shown


def test_our_results_are_built_once_and_shown_richly(kernel):
    _, kc = kernel
    sales = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", "..", "notebooks-demo", "data", "sales.csv"))
    reply, _ = run(kc, f"let sales = load({json.dumps(sales)}).unwrap();")
    assert reply["content"]["status"] == "ok", reply["content"]
    fit_cell = ('fit(&sales, &ModelSpec::new("sale_price").log_target().term(Term::numeric("living_area").log())'
                '.numeric("age").category("district")).unwrap()')
    for code, rich in [(fit_cell + ".report(0.95)", "text/html"), (fit_cell + ".statistics().r_squared", None),
                       ("sales", "text/html")]:
        reply, messages = run(kc, code)
        assert reply["content"]["status"] == "ok", reply["content"]
        phases = [p["name"] for p in reply["content"]["plumbline_engine_phases"]]
        assert [name for name in phases if name not in ("Execution", "Type inference")] == ["Final compile"], \
            (code, phases)
        data = next(m for m in messages if m["msg_type"] == "execute_result")["content"]["data"]
        if rich:
            assert rich in data, (code, sorted(data))
        else:
            assert 0.5 < float(data["text/plain"]) < 1.0, data
