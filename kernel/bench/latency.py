#!/usr/bin/env python3
"""Kernel latency and memory benchmark: prints figures, asserts nothing.

Measured in one run, each as median and worst (figures in README, "The notebook kernel"):
  1. kernel start -> kernel_info reply;
  2. warm cells of each kind (a number, a formatted string, a `let`, a fit's R², a fit's
     report), beside the same kinds of cell in the Python kernel (ipykernel) in the same run,
     with the engine's phases of every Plumbline cell (our `plumbline_engine_phases` reply
     field): how many builds, and the median seconds of each phase;
  3. the first plumbline cell of a kernel that prepares its own engine (standby kernels
     off; engine build already warm);
  4. the first plumbline cell of a kernel that took over a ready standby kernel
     (README, "Standby kernels"), started with the benchmark's own environment, and
     started with another LANG, TERM and SHELL (a desktop launcher's setting);
  5. peak resident memory (VmHWM, the host process plus its cell process) of a waiting
     standby, and of a kernel after 20 analysis cells.
Targets from the kernel issue (benchmarks, not tests): warm cells median <= 0.4 s per kind
(goal 0.25 s), none above 0.6 s; first cell without a standby <= 10 s (goal 5 s); peak
memory of a standby and of a kernel after 20 analysis cells <= 0.8 GB each.

Usage (after `plumbline install`, or with the test kernelspec):
  JUPYTER_PATH=target/kernelspec/share/jupyter PLUMBLINE_ENGINE_DIR=... python3 kernel/bench/latency.py [--kernels 3] [--cells 5]
"""
import argparse
import collections
import os
import pathlib
import statistics
import subprocess
import sys
import tempfile
import time

from jupyter_client.kernelspec import KernelSpecManager
from jupyter_client.manager import start_new_kernel

REPO = pathlib.Path(__file__).resolve().parents[2]
sys.path.insert(0, str(REPO / "tests" / "python"))
from kernel_messages import end_standbys, standby_processes  # noqa: E402
SALES = REPO / "notebooks-demo" / "data" / "sales.csv"

FIT = ('fit(&sales, &ModelSpec::new("sale_price").log_target().term(Term::numeric("living_area").log())'
       '.numeric("age").category("district")).unwrap()')
# (name, Plumbline cell, the same task in the Python kernel)
WARM_KINDS = [
    ("number `1 + 1`", "1 + 1", "1 + 1"),
    ('string `format!("{}", 3)`', 'format!("{}", 3)', '"{}".format(3)'),
    ("`let z = 41 + 1;`", "let z = 41 + 1;", "z = 41 + 1"),
    ("fit, then its R²", FIT + ".statistics().r_squared",
     "import numpy as np; x = np.c_[np.ones(3000), np.random.rand(3000)]; "
     "np.linalg.lstsq(x, np.random.rand(3000), rcond=None)[1]"),
    ("fit, then its report", FIT + ".report(0.95)", "np.linalg.qr(x)[1]"),
]


def timed(kc, code, timeout=3600):
    start = time.perf_counter()
    reply = kc.execute_interactive(code, timeout=timeout, output_hook=lambda m: None)
    elapsed = time.perf_counter() - start
    if reply["content"]["status"] != "ok":
        raise SystemExit(f"cell failed: {code!r}: {reply['content']}")
    return elapsed, reply["content"].get("plumbline_engine_phases", [])


def summary(name, values, target=""):
    if not values:
        print(f"{name:<58} (not measured)")
        return
    print(f"{name:<58} median {statistics.median(values):7.3f} s   worst {max(values):7.3f} s   "
          f"(n={len(values)})   {target}")


def engine_dir():
    configured = os.environ.get("PLUMBLINE_ENGINE_DIR")
    if configured:
        return pathlib.Path(configured)
    return pathlib.Path.home() / ".cache" / "plumbline" / "engine-0.1.0"


def wait_for_ready_standby(log):
    deadline = time.monotonic() + 1800
    while not (log.exists() and "ready" in log.read_text()):
        if time.monotonic() > deadline:
            raise SystemExit(f"no standby kernel became ready (log: {log})")
        time.sleep(0.5)


def peak_rss_gb(pid):
    """VmHWM of a process and its children, GB."""
    total = 0
    pids = [pid]
    children = pathlib.Path(f"/proc/{pid}/task/{pid}/children")
    if children.exists():
        pids += [int(p) for p in children.read_text().split()]
    for p in pids:
        for line in pathlib.Path(f"/proc/{p}/status").read_text().splitlines():
            if line.startswith("VmHWM:"):
                total += int(line.split()[1]) * 1024
    return total / 1e9


def serving_pid(kc):
    """Pid of the process serving the notebook: the parent of the cell process."""
    reply = kc.execute_interactive("std::process::id()", timeout=600, output_hook=collect_result)
    cell_pid = int(collect_result.last)
    stat = pathlib.Path(f"/proc/{cell_pid}/stat").read_text()
    return int(stat.split(")")[-1].split()[1])


def collect_result(message):
    if message["msg_type"] == "execute_result":
        collect_result.last = message["content"]["data"]["text/plain"]


def one_kernel(args, figures, first_key, env, warm=True):
    start = time.perf_counter()
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120, env=env)
    figures["kernel_info"].append(time.perf_counter() - start)
    try:
        first, _ = timed(kc, f'let sales = load("{SALES}").unwrap();\nsales.height()')
        figures[first_key].append(first)
        if not warm:
            return
        for name, code, _ in WARM_KINDS:
            for _ in range(args.cells):
                took, phases = timed(kc, code)
                figures[name].append(took)
                figures["builds " + name].append(sum(1 for p in phases if p["name"] not in ("Execution", "Type inference")))
                for p in phases:
                    figures["phase " + p["name"]].append(p["seconds"])
        done = sum(args.cells for _ in WARM_KINDS)
        for i in range(max(0, 20 - done)):
            timed(kc, f"let m{i} = {FIT};")
        figures["kernel peak"].append(peak_rss_gb(serving_pid(kc)))
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=False)


def python_kernel(args, figures):
    km, kc = start_new_kernel(kernel_name="python3", startup_timeout=120)
    try:
        for name, _, code in WARM_KINDS:
            for _ in range(args.cells):
                figures["python " + name].append(timed(kc, code)[0])
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=True)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--kernels", type=int, default=3)
    parser.add_argument("--cells", type=int, default=5)
    args = parser.parse_args()
    figures = collections.defaultdict(list)
    engine = engine_dir()
    log = engine / "standby" / "standby.log"
    end_standbys(engine)
    python_kernel(args, figures)
    for _ in range(args.kernels):
        one_kernel(args, figures, "first, own engine", dict(os.environ, PLUMBLINE_STANDBY="off"))
    # With standbys on: each kernel after the first takes over the standby its
    # predecessor started, once that one is ready. `plumbline install` (the
    # program of the kernelspec, into a scratch prefix) warms the engine and
    # starts the first standby.
    standby_env = dict(os.environ, PLUMBLINE_STANDBY="on")
    desktop_env = dict(standby_env, LANG="de_DE.UTF-8", TERM="dumb", SHELL="/bin/zsh-of-another-desktop")
    log.unlink(missing_ok=True)
    program = KernelSpecManager().get_kernel_spec("plumbline").argv[0]
    with tempfile.TemporaryDirectory() as prefix:
        subprocess.run([program, "install", "--prefix", prefix], env=standby_env, check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    for i in range(args.kernels):
        wait_for_ready_standby(log)
        waiting = standby_processes(engine)
        if waiting:
            figures["standby peak"].append(peak_rss_gb(waiting[0]))
        key, env = (("first, took over a standby", standby_env) if i % 2 == 0
                    else ("first, took over a standby (other LANG/TERM/SHELL)", desktop_env))
        one_kernel(args, figures, key, env, warm=False)
    end_standbys(engine)
    summary("kernel start -> kernel_info reply", figures["kernel_info"])
    summary("first plumbline cell, kernel preparing its engine", figures["first, own engine"], "target <= 10 s")
    summary("first plumbline cell, took over a standby", figures["first, took over a standby"])
    summary("first plumbline cell, took over (other LANG/TERM/SHELL)",
            figures["first, took over a standby (other LANG/TERM/SHELL)"])
    print("\nwarm cells (Plumbline | Python kernel, same run):")
    for name, _, _ in WARM_KINDS:
        summary("  " + name, figures[name], "target median <= 0.4 s, worst <= 0.6 s")
        summary("    python: " + name, figures["python " + name])
        builds = figures["builds " + name]
        print(f"    builds per cell: {sorted(set(builds))}")
    print("\nengine phases over all warm Plumbline cells:")
    for key in sorted(k for k in figures if k.startswith("phase ")):
        summary("  " + key[len("phase "):], figures[key])
    print("\npeak resident memory (host + cell process):")
    for key in ("standby peak", "kernel peak"):
        values = figures[key]
        if values:
            print(f"  {key:<20} median {statistics.median(values):.2f} GB   worst {max(values):.2f} GB   "
                  "target <= 0.8 GB")


if __name__ == "__main__":
    main()
