"""Helpers for the kernel tests (and kernel/bench/latency.py): one execute request and
the iopub messages it caused, read through jupyter_client (messaging protocol 5.3); the
standby kernels of an engine directory."""
import os
import pathlib
import signal

TIMEOUT = 1800  # the first cell of a fresh engine directory compiles plumbline


def run(kc, code, timeout=600, **options):
    """Sends one execute request; returns (reply, iopub messages of that request until idle)."""
    msg_id = kc.execute(code, **options)
    return collect(kc, msg_id, timeout)


def collect(kc, msg_id, timeout=600):
    reply = kc.get_shell_msg(timeout=timeout)
    while reply["parent_header"].get("msg_id") != msg_id:
        reply = kc.get_shell_msg(timeout=timeout)
    messages = []
    while True:
        message = kc.get_iopub_msg(timeout=60)
        if message["parent_header"].get("msg_id") != msg_id:
            continue
        messages.append(message)
        if message["msg_type"] == "status" and message["content"]["execution_state"] == "idle":
            return reply, messages


def stream_text(messages, name="stdout"):
    return "".join(m["content"]["text"] for m in messages
                   if m["msg_type"] == "stream" and m["content"]["name"] == name)


def kernel_time(message):
    """The kernel's send time of a message (header `date`, ISO 8601)."""
    date = message["header"]["date"]
    return date.timestamp() if hasattr(date, "timestamp") else date


def standby_processes(engine_dir):
    """Pids of the `plumbline kernel --standby` processes of one engine directory."""
    found = []
    for proc in pathlib.Path("/proc").iterdir():
        if not proc.name.isdigit():
            continue
        try:
            argv = (proc / "cmdline").read_bytes().split(b"\0")
            environ = (proc / "environ").read_bytes().split(b"\0")
        except OSError:
            continue
        if b"--standby" in argv and f"PLUMBLINE_ENGINE_DIR={engine_dir}".encode() in environ:
            found.append(int(proc.name))
    return found


def end_standbys(engine_dir):
    """Ends every standby kernel of one engine directory (SIGKILL: none is serving a test)."""
    for pid in standby_processes(engine_dir):
        try:
            os.kill(pid, signal.SIGKILL)
        except ProcessLookupError:
            pass
