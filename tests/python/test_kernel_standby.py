"""Standby kernels (README, "Standby kernels"), through jupyter_client (messaging
protocol 5.3 as published by the Jupyter project).

A kernel whose engine is ready starts a standby kernel that prepares an engine ahead;
the next kernel a front end starts hands its connection file over, and the standby
serves it. Checked here: the kernel that took over answers, runs its cells in the
launcher's working directory (a relative path), is a different process from the one
the front end started, keeps variables; a launcher started in another desktop setting
(other LANG, TERM, SHELL) is taken over and its cells see the launcher's values; a
shutdown ends both processes; when the launcher is killed, the standby serving it ends
too; and a launcher with another engine setting (PLUMBLINE_ENGINE_OPT) is declined. First-cell times are printed,
never asserted (the benchmark is kernel/bench/latency.py).

The rest of the suite runs with standbys off (conftest.py); this module turns them on
for its own kernels and ends every standby of the test engine directory afterwards.
"""
import os
import pathlib
import shutil
import subprocess
import threading
import time

import pytest
from jupyter_client.connect import write_connection_file
from jupyter_client.manager import KernelManager

from conftest import REPO, install_kernelspec, plumbline_binary
from kernel_messages import TIMEOUT, end_standbys, run

install_kernelspec()

ENGINE = pathlib.Path(os.environ["PLUMBLINE_ENGINE_DIR"])
LOG = ENGINE / "standby" / "standby.log"
SALES = REPO / "notebooks-demo" / "data" / "sales.csv"
ENV = dict(os.environ, PLUMBLINE_STANDBY="on", PLUMBLINE_STANDBY_IDLE_MINUTES="15")


def alive(pid):
    try:
        state = pathlib.Path(f"/proc/{pid}/stat").read_text().split(")")[-1].split()[0]
    except OSError:
        return False
    return state != "Z"


def wait_until(condition, what, limit):
    deadline = time.monotonic() + limit
    while not condition():
        if time.monotonic() > deadline:
            pytest.fail(f"timed out after {limit} s waiting for {what}")
        time.sleep(0.5)


def wait_for_ready_standby():
    wait_until(lambda: LOG.exists() and "ready" in LOG.read_text(), f"a ready standby (log: {LOG})", 1200)


def start_kernel(cwd, env=ENV):
    km = KernelManager(kernel_name="plumbline")
    km.start_kernel(env=env, cwd=str(cwd))
    kc = km.client()
    kc.start_channels()
    kc.wait_for_ready(timeout=120)
    return km, kc


def serving_pid(kc):
    """Pid of the process serving the notebook: the parent of the cell process."""
    reply, messages = run(kc, "std::process::id()", timeout=TIMEOUT)
    assert reply["content"]["status"] == "ok", reply["content"]
    cell_pid = int(next(m for m in messages if m["msg_type"] == "execute_result")["content"]["data"]["text/plain"])
    stat = pathlib.Path(f"/proc/{cell_pid}/stat").read_text()
    return int(stat.split(")")[-1].split()[1])


@pytest.fixture(autouse=True)
def no_standby_left_behind():
    end_standbys(ENGINE)
    LOG.unlink(missing_ok=True)
    yield
    end_standbys(ENGINE)


def test_the_next_kernel_takes_over_a_prepared_standby_and_ends_with_its_launcher(tmp_path):
    first_dir = tmp_path / "first"
    first_dir.mkdir()
    km, kc = start_kernel(first_dir)
    try:
        start = time.monotonic()
        reply, _ = run(kc, "1 + 1", timeout=TIMEOUT)
        assert reply["content"]["status"] == "ok", reply["content"]
        print(f"\nfirst cell of a kernel with no standby: {time.monotonic() - start:.1f} s")
        assert serving_pid(kc) == km.provisioner.process.pid, "with no standby, the kernel serves itself"
        wait_for_ready_standby()
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=False)

    # The second kernel, in another folder and started from another desktop
    # setting, is served by the standby.
    second_dir = tmp_path / "second"
    second_dir.mkdir()
    shutil.copy(SALES, second_dir / "sales.csv")
    elsewhere = dict(ENV, LANG="de_DE.UTF-8", TERM="dumb", SHELL="/bin/zsh-of-another-desktop")
    km, kc = start_kernel(second_dir, elsewhere)
    launcher = km.provisioner.process
    try:
        start = time.monotonic()
        reply, messages = run(kc, 'let sales = load("sales.csv").unwrap();\nsales.height()', timeout=TIMEOUT)
        print(f"first cell of a kernel that took over a ready standby: {time.monotonic() - start:.1f} s")
        assert reply["content"]["status"] == "ok", reply["content"]
        result = next(m for m in messages if m["msg_type"] == "execute_result")
        assert result["content"]["data"]["text/plain"] == "3000", "cells run in the launcher's working directory"
        standby = serving_pid(kc)
        assert standby != launcher.pid and alive(standby)
        reply, _ = run(kc, "let kept = 41;", timeout=TIMEOUT)
        assert reply["content"]["status"] == "ok"
        reply, messages = run(kc, "kept + 1", timeout=TIMEOUT)
        assert next(m for m in messages if m["msg_type"] == "execute_result")["content"]["data"]["text/plain"] == "42"
        reply, messages = run(kc, 'format!("{}|{}|{}", std::env::var("LANG").unwrap_or_default(), '
                                  'std::env::var("TERM").unwrap_or_default(), std::env::var("SHELL").unwrap_or_default())',
                              timeout=TIMEOUT)
        seen = next(m for m in messages if m["msg_type"] == "execute_result")["content"]["data"]["text/plain"]
        assert seen == '"de_DE.UTF-8|dumb|/bin/zsh-of-another-desktop"', "cells see the launcher's variables"
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=False)
    assert launcher.poll() is not None, "the launcher ends with the kernel"
    wait_until(lambda: not alive(standby), "the standby that served the notebook to end", 60)

    # The launcher of the second kernel started the next standby; when the
    # launcher of a kernel it serves is killed, it ends too.
    wait_for_ready_standby()
    km, kc = start_kernel(first_dir)
    try:
        standby = serving_pid(kc)
        assert standby != km.provisioner.process.pid
        km.provisioner.process.kill()
        wait_until(lambda: not alive(standby), "the standby to end after its launcher was killed", 60)
    finally:
        kc.stop_channels()
        km.cleanup_resources()


def test_a_launcher_with_another_engine_setting_is_declined(tmp_path):
    """The optimisation level shapes the engine's build: a standby prepared at one
    level must not serve a kernel started for another (it declines and ends)."""
    km, kc = start_kernel(tmp_path)
    try:
        run(kc, "1 + 1", timeout=TIMEOUT)
        wait_for_ready_standby()
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=False)
    connection = tmp_path / "kernel-declined.json"
    write_connection_file(str(connection))
    other_level = dict(ENV, PLUMBLINE_ENGINE_OPT="1")
    launcher = subprocess.Popen([str(plumbline_binary()), "kernel", "--connection-file", str(connection)],
                                env=other_level, cwd=tmp_path, stdin=subprocess.DEVNULL, stdout=subprocess.DEVNULL,
                                stderr=subprocess.PIPE, text=True)
    # The offer comes before anything else the launcher does; it is ended as
    # soon as it said why it was declined (before it builds an engine of its own).
    watchdog = threading.Timer(120, launcher.kill)
    watchdog.start()
    lines = []
    try:
        for line in launcher.stderr:
            lines.append(line)
            if "declined" in line or len(lines) >= 20:
                break
    finally:
        launcher.kill()
        launcher.wait()
        watchdog.cancel()
    declined = [line for line in lines if "declined" in line]
    assert declined and "PLUMBLINE_ENGINE_OPT" in declined[0], lines
    wait_until(lambda: "ending" in LOG.read_text(), "the declined standby to end", 60)
