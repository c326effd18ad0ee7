"""Shared fixtures: the `plumbline` binary and a helper that fits a CSV through it.

The binary is the one `cargo build` produced (target/debug/plumbline), or
$PLUMBLINE_BIN. If it is missing the tests fail loudly rather than skip.
"""
import functools
import json
import os
import pathlib
import subprocess
import tempfile

import numpy as np
import pytest

REPO = pathlib.Path(__file__).resolve().parents[2]
# External reference data: ../shared/reference beside the checkout, or $PLUMBLINE_REFERENCE_DIR.
REFERENCE = pathlib.Path(os.environ.get("PLUMBLINE_REFERENCE_DIR", REPO.parent / "shared" / "reference"))
NIST = REFERENCE / "nist-strd"
# Every kernel and notebook run in the tests shares one engine build directory,
# compiled at optimisation level 0 (install/test.sh warms it first).
os.environ.setdefault("PLUMBLINE_ENGINE_DIR", str(REPO / "target" / "engine-test"))
os.environ.setdefault("PLUMBLINE_ENGINE_OPT", "0")
# Standby kernels are off, so that each test's kernel prepares its own engine
# as a fresh one does; test_kernel_standby.py turns them on for its kernels.
os.environ["PLUMBLINE_STANDBY"] = "off"


def require_nist(name):
    """Path of a NIST StRD file; fails loudly (never skips) when the reference data are absent."""
    path = NIST / name
    if not path.exists():
        pytest.fail(f"external reference data missing: {path} (place shared/ beside the checkout "
                    "or set PLUMBLINE_REFERENCE_DIR)", pytrace=False)
    return path


def plumbline_binary() -> pathlib.Path:
    explicit = os.environ.get("PLUMBLINE_BIN")
    path = pathlib.Path(explicit) if explicit else REPO / "target" / "debug" / "plumbline"
    if not path.exists():
        pytest.fail(f"plumbline binary not found at {path}; run `cargo build --workspace` first "
                    "or set PLUMBLINE_BIN", pytrace=False)
    return path


@functools.cache
def install_kernelspec() -> pathlib.Path:
    """Installs the Plumbline kernelspec into a scratch prefix (once per session) and
    puts it on JUPYTER_PATH, so that jupyter_client and nbclient find kernel "plumbline".

    Kernels share the engine build directory set above.
    """
    prefix = pathlib.Path(tempfile.mkdtemp(prefix="plumbline-kernelspec-"))
    installed = subprocess.run([str(plumbline_binary()), "install", "--prefix", str(prefix), "--no-warm"],
                               capture_output=True, text=True)
    assert installed.returncode == 0, installed.stderr
    os.environ["JUPYTER_PATH"] = str(prefix / "share" / "jupyter") + os.pathsep + os.environ.get("JUPYTER_PATH", "")
    return prefix


def run_fit(csv_path, *args):
    """Runs `plumbline fit CSV ARGS --format json` and returns the parsed document."""
    result = subprocess.run([str(plumbline_binary()), "fit", str(csv_path), *args, "--format", "json"],
                            capture_output=True, text=True)
    if result.returncode != 0:
        raise AssertionError(f"plumbline failed ({result.returncode}): {result.stderr}")
    return json.loads(result.stdout)


def run_raw(*args, cwd=None):
    """Runs the binary with ARGS (in directory CWD when given) and returns the CompletedProcess."""
    return subprocess.run([str(plumbline_binary()), *args], capture_output=True, text=True, cwd=cwd)


def write_csv(path, columns: dict):
    names = list(columns)
    n = len(columns[names[0]])
    with open(path, "w") as f:
        f.write(",".join(names) + "\n")
        for i in range(n):
            f.write(",".join(repr(float(columns[c][i])) if not isinstance(columns[c][i], str) else columns[c][i]
                             for c in names) + "\n")
    return path


@pytest.fixture
def heteroskedastic_data(tmp_path):
    """A small synthetic regression with error spread growing in x1 and 12 clusters.

    Made up for the test only; what is checked is our arithmetic against a direct
    numpy implementation of the published formulas, not these numbers.
    """
    rng = np.random.default_rng(20261202)
    n = 120
    x1 = rng.uniform(1, 10, n)
    x2 = rng.normal(0, 2, n)
    cluster = rng.integers(0, 12, n)
    y = 3.0 + 0.8 * x1 - 1.5 * x2 + rng.normal(0, 0.3 * x1) + 0.4 * rng.normal(0, 1, 12)[cluster]
    w = rng.uniform(0.5, 2.0, n)
    path = write_csv(tmp_path / "het.csv", {
        "y": y, "x1": x1, "x2": x2, "w": w, "g": [f"c{c}" for c in cluster]})
    X = np.column_stack([np.ones(n), x1, x2])
    return path, X, y, w, cluster


def descendants_of(pid):
    """Every live process below `pid` (children, their children, …), read from /proc (Linux)."""
    parents = {}
    for entry in pathlib.Path("/proc").iterdir():
        if entry.name.isdigit():
            try:
                fields = (entry / "stat").read_text().split(")")[-1].split()
                parents[int(entry.name)] = int(fields[1])
            except (OSError, ValueError, IndexError):
                continue
    found, frontier = [], [pid]
    while frontier:
        parent = frontier.pop()
        children = [p for p, pp in parents.items() if pp == parent]
        found += children
        frontier += children
    return found


def alive(pid):
    """Whether process `pid` runs (a zombie, ended but not yet reaped, does not)."""
    try:
        return pathlib.Path(f"/proc/{pid}/stat").read_text().split(")")[-1].split()[0] != "Z"
    except OSError:
        return False
