#!/usr/bin/env python3
"""The kernel all day: several kernels at once, hundreds of cells each, with faults in between.

Prints figures, asserts nothing (figures in README, "The kernel all day"). Loopback only,
bounded: every kernel runs --cells cells, drawn with a fixed seed from the demo study's
kinds (load the sales, a fit, its report, a ratio study, a chart, a frame, a number), and in
between, at the rates below (RATES), a cell interrupted while it runs, a cell that aborts its
process, a cell that panics, and a kernel restart; meanwhile `plumbline run` executes a
small study headlessly on the same engine folder, again and again.

Measured:
  * cells that failed for a reason other than their own (target 0): a normal cell with an
    error reply or no reply, an interrupted cell that ran on, a run that failed;
  * outputs that reached the wrong cell or arrived out of order: every normal cell prints
    two numbered lines around its work; both must arrive, in order, with the cell's own
    request as parent, before the cell's status goes idle (target 0);
  * resident memory of each kernel (its process and every process below it, the cells'
    compiler included) sampled every second, peak per quarter of the run: the last
    quarter's peak must stay within the second quarter's (the first is the warm-up)
    + 25 % + 50 MB (the bound stated in README).

Usage (with the kernelspec installed, as for kernel/bench/latency.py):
  JUPYTER_PATH=... PLUMBLINE_ENGINE_DIR=... python3 kernel/bench/soak.py [--kernels 3] [--cells 300]
"""
import argparse
import json
import os
import pathlib
import random
import subprocess
import sys
import tempfile
import threading
import time

from jupyter_client.kernelspec import KernelSpecManager
from jupyter_client.manager import start_new_kernel

REPO = pathlib.Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO / "tests" / "python"))
from conftest import descendants_of  # noqa: E402

SALES = REPO / "notebooks-demo" / "data" / "sales.csv"
SETUP = f'let sales = load("{SALES}")?;\nsales.height()'
SPEC = ('ModelSpec::new("sale_price").log_target().term(Term::numeric("living_area").log())'
        '.numeric("age").category("district")')
# The demo study's kinds of cell; `{m}` is the cell's marker, printed before and after its work.
KINDS = [
    ("fit, R²", f'println!("{{m}} a");\nlet f = fit(&sales, &{SPEC})?;\nprintln!("{{m}} b");\nf.statistics().r_squared'),
    ("fit report", f'println!("{{m}} a");\nlet f = fit(&sales, &{SPEC})?;\nprintln!("{{m}} b");\nf.report(0.95)'),
    ("ratio study", 'use plumbline::value::{model_values, ratio_study, RatioOptions, Retransform};\n'
                    f'println!("{{m}} a");\nlet f = fit(&sales, &{SPEC})?;\n'
                    'let values = model_values(&f, &sales, Retransform::SmearingMean)?;\n'
                    'let prices = sales.numeric_column("sale_price")?;\n'
                    'let study = ratio_study(&values, &prices, None, &RatioOptions::default())?;\n'
                    'println!("{m} b");\nstudy'),
    ("residual chart", f'println!("{{m}} a");\nlet f = fit(&sales, &{SPEC})?;\nprintln!("{{m}} b");\n'
                       'plumbline::plot::residual_spread(&f, Default::default())?'),
    ("frame", 'println!("{m} a");\nlet head = sales.subset(&[0, 1, 2], "first rows")?;\nprintln!("{m} b");\nhead'),
    ("number", 'println!("{m} a");\nlet n = sales.height() * 2;\nprintln!("{m} b");\nn'),
]
# Cells that fail on purpose: their code, the reply expected, and whether the
# cell process (and so the variables) is lost.
FAULT_CELLS = {
    "aborted": ("std::process::abort();", lambda content: content["status"] == "error", True),
    "panicked": ('panic!("on purpose")', lambda content: content.get("ename") == "panic", False),
}
# Rates of the faults, per cell.
RATES = {"interrupt": 0.04, "aborted": 0.03, "panicked": 0.03, "restart": 0.01}
RUN_NOTEBOOK = {
    "nbformat": 4, "nbformat_minor": 5, "metadata": {"kernelspec": {"name": "plumbline", "display_name": "Plumbline"}},
    "cells": [
        {"cell_type": "markdown", "metadata": {}, "source": "# Soak run"},
        {"cell_type": "code", "metadata": {}, "execution_count": None, "outputs": [], "source": SETUP},
        {"cell_type": "code", "metadata": {}, "execution_count": None, "outputs": [],
         "source": f"fit(&sales, &{SPEC})?.report(0.95)"},
    ],
}


class Tally:
    def __init__(self):
        self.lock = threading.Lock()
        self.counts = {}
        self.problems = []
        self.seconds = []

    def add(self, key, problem=None):
        with self.lock:
            self.counts[key] = self.counts.get(key, 0) + 1
            if problem:
                self.problems.append(problem)


def rss_bytes(pids):
    total = 0
    for pid in pids:
        try:
            for line in pathlib.Path(f"/proc/{pid}/status").read_text().splitlines():
                if line.startswith("VmRSS:"):
                    total += int(line.split()[1]) * 1024
        except OSError:
            continue
    return total


def execute(kc, code, timeout=600):
    """Sends a cell; returns (reply, its iopub messages, messages of other cells seen meanwhile)."""
    msg_id = kc.execute(code)
    reply = None
    deadline = time.monotonic() + timeout
    while reply is None:
        message = kc.get_shell_msg(timeout=max(1, deadline - time.monotonic()))
        if message["parent_header"].get("msg_id") == msg_id:
            reply = message
    own, stray = [], []
    while True:
        message = kc.get_iopub_msg(timeout=60)
        parent = message["parent_header"].get("msg_id")
        if parent != msg_id:
            if parent and message["msg_type"] not in ("status", "execute_input"):
                stray.append(message)
            continue
        own.append(message)
        if message["msg_type"] == "status" and message["content"]["execution_state"] == "idle":
            return reply, own, stray


def stdout_of(messages):
    return "".join(m["content"]["text"] for m in messages
                   if m["msg_type"] == "stream" and m["content"]["name"] == "stdout")


def one_kernel(index, args, tally, samples, stop):
    rng = random.Random(args.seed * 1000 + index)
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=300, stderr=subprocess.DEVNULL)
    samples[index] = []

    def monitor():
        while not stop.is_set():
            pid = km.provisioner.process.pid if km.provisioner and km.provisioner.process else None
            if pid:
                samples[index].append((time.monotonic(), rss_bytes([pid, *descendants_of(pid)])))
            time.sleep(1)

    threading.Thread(target=monitor, daemon=True).start()

    def setup():
        reply, _, _ = execute(kc, SETUP, timeout=1800)
        if reply["content"]["status"] != "ok":
            tally.add("failed otherwise", f"kernel {index}: setup failed: {reply['content']}")

    try:
        setup()
        for cell in range(args.cells):
            marker = f"k{index}c{cell}"
            draw = rng.random()
            if draw < RATES["interrupt"]:
                msg_id = kc.execute(f'println!("{marker} a");\nloop {{ std::hint::spin_loop(); }}')
                time.sleep(1.0)
                km.interrupt_kernel()
                reply = kc.get_shell_msg(timeout=120)
                while reply["parent_header"].get("msg_id") != msg_id:
                    reply = kc.get_shell_msg(timeout=120)
                if reply["content"].get("ename") != "Interrupted":
                    tally.add("failed otherwise", f"{marker}: interrupt gave {reply['content']}")
                tally.add("interrupted")
                setup()
                continue
            draw -= RATES["interrupt"]
            fault = next((f for f in FAULT_CELLS if (draw := draw - RATES[f]) < 0), None)
            if fault:
                code, expected, state_lost = FAULT_CELLS[fault]
                reply, _, _ = execute(kc, code)
                if not expected(reply["content"]):
                    tally.add("failed otherwise", f"{marker}: the {fault} cell replied {reply['content']}")
                tally.add(fault)
                if state_lost:
                    setup()
                continue
            if draw < RATES["restart"]:
                km.restart_kernel(now=False)
                kc.wait_for_ready(timeout=300)
                tally.add("restarted")
                setup()
                continue
            name, template = KINDS[rng.randrange(len(KINDS))]
            started = time.monotonic()
            try:
                reply, own, stray = execute(kc, template.replace("{m}", marker))
            except Exception as e:  # noqa: BLE001 (a lost reply is what this counts)
                tally.add("failed otherwise", f"{marker} ({name}): no reply ({e!r})")
                continue
            tally.add("cells")
            with tally.lock:
                tally.seconds.append(time.monotonic() - started)
            if reply["content"]["status"] != "ok":
                tally.add("failed otherwise", f"{marker} ({name}): {reply['content'].get('evalue', reply['content'])}")
                continue
            if stdout_of(own) != f"{marker} a\n{marker} b\n":
                tally.add("misrouted", f"{marker}: printed {stdout_of(own)!r}")
            if not any(m["msg_type"] in ("execute_result", "display_data") for m in own):
                tally.add("misrouted", f"{marker} ({name}): no value shown")
            if stray:
                tally.add("misrouted", f"{marker}: {len(stray)} message(s) of another cell arrived during it")
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=False)


def runs_beside(args, tally, stop):
    program = KernelSpecManager().get_kernel_spec("plumbline").argv[0]
    with tempfile.TemporaryDirectory() as folder:
        notebook = pathlib.Path(folder) / "soak.ipynb"
        notebook.write_text(json.dumps(RUN_NOTEBOOK))
        while not stop.is_set():
            done = subprocess.run([program, "run", str(notebook), "--output", str(pathlib.Path(folder) / "out.ipynb")],
                                  capture_output=True, text=True)
            tally.add("runs")
            if done.returncode != 0:
                tally.add("failed otherwise", f"plumbline run failed: {done.stderr.strip()[-400:]}")
            stop.wait(args.run_pause)


def quarters(samples):
    if not samples:
        return []
    start, end = samples[0][0], samples[-1][0]
    width = max((end - start) / 4, 1e-9)
    peaks = [0, 0, 0, 0]
    for t, rss in samples:
        q = min(3, int((t - start) / width))
        peaks[q] = max(peaks[q], rss)
    return peaks


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--kernels", type=int, default=3)
    parser.add_argument("--cells", type=int, default=300)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--run-pause", type=float, default=20.0, help="seconds between headless runs")
    args = parser.parse_args()
    tally, samples, stop = Tally(), {}, threading.Event()
    started = time.monotonic()
    runner = threading.Thread(target=runs_beside, args=(args, tally, stop))
    runner.start()
    kernels = [threading.Thread(target=one_kernel, args=(i, args, tally, samples, stop)) for i in range(args.kernels)]
    for k in kernels:
        k.start()
    for k in kernels:
        k.join()
    stop.set()
    runner.join()
    minutes = (time.monotonic() - started) / 60
    c = tally.counts
    cells = c.get("cells", 0)
    print(f"{args.kernels} kernels at once, {args.cells} cells each, {minutes:.1f} min "
          f"(seed {args.seed}, {os.cpu_count()} cores)")
    mean = sum(tally.seconds) / max(len(tally.seconds), 1)
    print(f"  normal cells run: {cells} (mean {mean:.2f} s), "
          f"interrupted: {c.get('interrupted', 0)}, aborted: {c.get('aborted', 0)}, "
          f"panicked: {c.get('panicked', 0)}, restarts: {c.get('restarted', 0)}, "
          f"headless runs beside them: {c.get('runs', 0)}")
    failed = c.get("failed otherwise", 0)
    total = cells + sum(c.get(k, 0) for k in ("interrupted", "aborted", "panicked", "runs"))
    print(f"  failed for a reason other than their own: {failed} of {total} "
          f"({100 * failed / max(total, 1):.2f} %; target 0)")
    print(f"  outputs at the wrong cell or out of order: {c.get('misrouted', 0)} (target 0)")
    print("  peak resident memory per quarter of the run, MB (kernel process and all below it):")
    for index in sorted(samples):
        peaks = quarters(samples[index])
        if not peaks:
            continue
        bound = peaks[1] * 1.25 + 50e6
        verdict = "within" if peaks[3] <= bound else "BEYOND"
        figures = "  ".join(f"{p / 1e6:7.0f}" for p in peaks)
        print(f"    kernel {index}: {figures}   last/second {peaks[3] / max(peaks[1], 1):.2f}"
              f"  ({verdict} the bound: second x 1.25 + 50 MB)")
    for problem in tally.problems[:20]:
        print("  problem:", problem)


if __name__ == "__main__":
    main()
