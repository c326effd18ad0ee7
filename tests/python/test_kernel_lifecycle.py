"""A kernel's life from start to end, through jupyter_client (messaging protocol
5.3 as published by the Jupyter project): the first cell of a fresh kernel shows
the engine's preparation in one display updated in place, then runs; a shutdown
request is answered, its idle status published (iopub flushed), and the process
ends. Each test starts its own kernel, after the kernels of other modules ended
(kernels share the engine's build directory).
"""
import time

from jupyter_client.manager import start_new_kernel

from conftest import alive, descendants_of, install_kernelspec
from kernel_messages import TIMEOUT, run

install_kernelspec()


def test_a_fresh_kernel_shows_its_preparation_then_runs_the_first_cell():
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120)
    try:
        reply, messages = run(kc, "21 * 2", timeout=TIMEOUT)
        assert reply["content"]["status"] == "ok", reply["content"]
        kinds = [m["msg_type"] for m in messages]
        # The engine takes seconds to start, so the first cell waits and says so.
        assert "display_data" in kinds, kinds
        display_id = messages[kinds.index("display_data")]["content"]["transient"]["display_id"]
        assert display_id.startswith("plumbline-engine-")
        last_update = [m for m in messages if m["msg_type"] == "update_display_data"][-1]
        assert "ready" in last_update["content"]["data"]["text/plain"]
        assert kinds.index("execute_result") > kinds.index("display_data")
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def test_shutdown_flushes_iopub_and_ends_the_process():
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120)
    try:
        reply, _ = run(kc, 'println!("one cell");', timeout=TIMEOUT)
        assert reply["content"]["status"] == "ok"
        descendants = descendants_of(km.provisioner.process.pid)
        assert descendants, "the kernel runs its cells in a process of its own"
        message = kc.session.msg("shutdown_request", {"restart": False})
        kc.control_channel.send(message)
        reply = kc.get_control_msg(timeout=30)
        assert reply["msg_type"] == "shutdown_reply"
        idle = None
        deadline = time.monotonic() + 30
        while idle is None and time.monotonic() < deadline:
            m = kc.get_iopub_msg(timeout=30)
            if m["parent_header"].get("msg_id") == message["header"]["msg_id"] and \
                    m["msg_type"] == "status" and m["content"]["execution_state"] == "idle":
                idle = m
        assert idle is not None, "the shutdown request's idle status was not published"
        process = km.provisioner.process
        asked = time.monotonic()
        process.wait(timeout=30)
        print(f"the kernel process ended {time.monotonic() - asked:.2f} s after its shutdown reply was read")
        assert process.returncode == 0
        # Nothing it started is left running: the cell process and anything the engine ran.
        time.sleep(0.5)  # the cell process is killed with the kernel; give the kernel's SIGKILL time to land
        left = [pid for pid in descendants if alive(pid)]
        assert not left, f"processes of the kernel still running after it ended: {left}"
    finally:
        kc.stop_channels()
        if km.is_alive():
            km.shutdown_kernel(now=True)
