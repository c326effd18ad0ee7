#!/usr/bin/env python3
"""Kernel latency benchmark: prints figures, asserts nothing.

Measures, each as median and worst of several runs (figures in README, "The notebook kernel"):
  1. kernel start -> kernel_info reply;
  2. first cell using plumbline in a fresh kernel that prepares its own engine
     (standby kernels off; engine build already warm);
  3. first cell using plumbline in a kernel that took over a ready standby kernel
     (README, "Standby kernels"): first the one `plumbline install` starts (the first
     kernel after install), then the one each kernel starts for the next;
  4. warm trivial cells (`1 + 1`);
  5. warm fit cells (a log-price model on the demo sales).
Targets from the kernel issue (benchmarks, not tests): warm cells median <= 1.5 s and
worst <= 3 s; first plumbline cell of a new kernel after install <= 10 s (goal <= 3 s).

Usage (after `plumbline install`, or with the test kernelspec):
  JUPYTER_PATH=target/kernelspec/share/jupyter PLUMBLINE_ENGINE_DIR=... python3 kernel/bench/latency.py [--kernels 3] [--cells 5]
"""
import argparse
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
from kernel_messages import end_standbys  # noqa: E402
SALES = REPO / "notebooks-demo" / "data" / "sales.csv"


def timed(kc, code, timeout=3600):
    start = time.perf_counter()
    reply = kc.execute_interactive(code, timeout=timeout, output_hook=lambda m: None)
    elapsed = time.perf_counter() - start
    if reply["content"]["status"] != "ok":
        raise SystemExit(f"cell failed: {code!r}: {reply['content']}")
    return elapsed


def summary(name, values, target=None):
    line = f"{name:<52} median {statistics.median(values):7.2f} s   worst {max(values):7.2f} s   (n={len(values)})"
    if target:
        line += f"   target {target}"
    print(line)


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


def one_kernel(args, info, first, trivial, fits, env):
    start = time.perf_counter()
    km, kc = start_new_kernel(kernel_name="plumbline", startup_timeout=120, env=env)
    info.append(time.perf_counter() - start)
    try:
        first.append(timed(kc, f'let sales = load("{SALES}").unwrap();\nsales.height()'))
        for _ in range(args.cells):
            trivial.append(timed(kc, "1 + 1"))
        for i in range(args.cells):
            fits.append(timed(kc, f'let m{i} = fit(&sales, &ModelSpec::new("sale_price").log_target()'
                                  f'.term(Term::numeric("living_area").log()).numeric("age").category("district")).unwrap();\n'
                                  f'm{i}.statistics().r_squared'))
    finally:
        kc.stop_channels()
        km.shutdown_kernel(now=False)


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--kernels", type=int, default=3)
    parser.add_argument("--cells", type=int, default=5)
    args = parser.parse_args()
    info, fresh, taken_over, trivial, fits = [], [], [], [], []
    engine = engine_dir()
    log = engine / "standby" / "standby.log"
    end_standbys(engine)
    for _ in range(args.kernels):
        one_kernel(args, info, fresh, trivial, fits, dict(os.environ, PLUMBLINE_STANDBY="off"))
    # With standbys on: each kernel after the first takes over the standby its
    # predecessor started, once that one is ready.
    standby_env = dict(os.environ, PLUMBLINE_STANDBY="on")
    log.unlink(missing_ok=True)
    # `plumbline install` (the program of the kernelspec, into a scratch
    # prefix) warms the engine and starts the first standby. Warm cells are
    # counted in the first phase only: here a new standby prepares meanwhile.
    program = KernelSpecManager().get_kernel_spec("plumbline").argv[0]
    with tempfile.TemporaryDirectory() as prefix:
        subprocess.run([program, "install", "--prefix", prefix], env=standby_env, check=True,
                       stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    for _ in range(args.kernels):
        wait_for_ready_standby(log)
        one_kernel(args, info, taken_over, [], [], standby_env)
    end_standbys(engine)
    summary("kernel start -> kernel_info reply", info)
    summary("first plumbline cell, kernel preparing its engine", fresh, "<= 10 s")
    summary("first plumbline cell, kernel taking over a standby", taken_over, "<= 10 s (goal <= 3 s)")
    summary("warm trivial cell", trivial, "median <= 1.5 s, worst <= 3 s")
    summary("warm fit cell", fits, "median <= 1.5 s, worst <= 3 s")


if __name__ == "__main__":
    main()
