"""`plumbline run --in-place` killed at any moment leaves the old notebook or the new one, never a torn
file, and nothing of it left running.

The run is killed with SIGKILL (no handler can run) at points spread over a whole run — while the
engine starts, while cells execute, and around the end, when the notebook is written — chosen by a
seeded generator so that a failure can be replayed. After each kill the notebook must parse as
nbformat 4 and be either byte-identical to the notebook before the run or a complete executed
notebook (every code cell run, with its outputs); the processes the run started must be gone. The
guarantee comes from writing through a temporary file in the same folder and a rename (POSIX
rename(2) is atomic), so this test checks the property from outside, as a user would meet it.
"""
import json
import os
import random
import signal
import subprocess
import time

import nbformat

from conftest import alive, descendants_of, plumbline_binary

CELLS = [
    'let sales: Vec<f64> = (1..=1000).map(|i| 100_000.0 + 37.0 * i as f64).collect();',
    # A large output, so that writing the notebook takes a moment of its own.
    'for (i, s) in sales.iter().enumerate() { println!("sale {i}: {s:.2} — an invented price"); }',
    'sales.iter().sum::<f64>() / sales.len() as f64',
]


def notebook_text():
    cells = [{"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [], "source": c,
              "id": f"cell-{i}"} for i, c in enumerate(CELLS)]
    return json.dumps({"cells": cells, "metadata": {"kernelspec": {"name": "plumbline", "language": "rust",
                                                                   "display_name": "Plumbline (Rust)"}},
                       "nbformat": 4, "nbformat_minor": 5}, indent=1) + "\n"


def run_in_place(path, kill_after=None):
    """Runs the notebook in place; with `kill_after` (seconds), SIGKILLs the run then and returns the
    processes it had started; otherwise waits and returns the run's duration."""
    process = subprocess.Popen([str(plumbline_binary()), "run", str(path), "--in-place"],
                               stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=dict(os.environ))
    started = time.monotonic()
    if kill_after is None:
        _, err = process.communicate(timeout=600)
        assert process.returncode == 0, err.decode()[-2000:]
        return time.monotonic() - started
    seen = set()
    while time.monotonic() - started < kill_after and process.poll() is None:
        seen.update(descendants_of(process.pid))
        time.sleep(0.02)
    seen.update(descendants_of(process.pid))
    process.send_signal(signal.SIGKILL)
    process.wait(timeout=60)
    return seen


def executed(text):
    notebook = nbformat.reads(text, as_version=4)
    nbformat.validate(notebook)
    code = [c for c in notebook.cells if c.cell_type == "code"]
    return all(c.execution_count is not None for c in code) and len(code[1].outputs) > 0 \
        and "sale 999" in "".join(o.get("text", "") for o in code[1].outputs)


def test_a_killed_run_leaves_the_old_or_the_new_notebook(tmp_path):
    path = tmp_path / "study.ipynb"
    before = notebook_text()
    path.write_text(before)
    duration = run_in_place(path)
    assert executed(path.read_text()), "a complete run writes the executed notebook"

    rng = random.Random(20261205)
    # Spread over the run, with extra weight near its end, where the notebook is written.
    kill_points = [rng.uniform(0.0, duration) for _ in range(3)] + \
                  [duration * rng.uniform(0.9, 1.05) for _ in range(3)]
    outcomes = []
    for at in kill_points:
        path.write_text(before)
        started = run_in_place(path, kill_after=at)
        text = path.read_text()
        if text == before:
            outcomes.append("old")
        else:
            assert executed(text), f"killed at {at:.2f} s of {duration:.2f} s: the notebook is neither old nor new"
            outcomes.append("new")
        # The cell process and anything else the run started end with it.
        deadline = time.monotonic() + 30
        while any(alive(pid) for pid in started) and time.monotonic() < deadline:
            time.sleep(0.1)
        left = [pid for pid in started if alive(pid)]
        assert not left, f"killed at {at:.2f} s: processes of the run still running: {left}"
    print(f"run of {duration:.2f} s killed at {[round(a, 2) for a in kill_points]}: {outcomes}")
