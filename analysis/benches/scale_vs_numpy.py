#!/usr/bin/env python3
"""Plumbline at scale beside the array libraries, measured side by side.

Part 1 — 10^6 rows x 50 design columns (intercept + 49 regressors), one
Parquet file, each tool end to end from the file:

  plumbline   `plumbline fit FILE --target y --terms x0,...,x48 --format json`
              (a fresh process: load, design, fit, full inference, JSON out);
  numpy       pyarrow load -> numpy.linalg.lstsq -> classical standard errors;
  gelsy       pyarrow load -> scipy.linalg.lstsq(lapack_driver="gelsy")
              (LAPACK's pivoted-QR driver) -> classical standard errors.

Standard errors for the Python sides come from (X'X)^-1 s^2 formed with numpy,
the cheapest honest way to complete what the fit document reports. Each is
timed as the median of three runs; printed with the ratios plumbline / numpy
(target <= 0.5, goal 0.2) and plumbline / gelsy (target <= 1.0).

Part 2 (`--stream`) — a fit of data larger than memory: 2 x 10^8 rows x 20
columns (y, 9 real-valued and 10 small-integer regressors, as sale data have),
written as 100 Parquet files of 2 x 10^6 rows, fitted with
`plumbline fit DIR --batch-rows 1000000`; prints its wall time and the
child's peak resident memory (getrusage), against the 32 GB the same numbers
take in memory as f64.

Part 3 (`--roll`) — a county's value roll: the demo town's sales fitted, then
10^7 parcels (Parquet, 5 files) valued by `plumbline value --parcel-batch-rows
100000` into a Parquet roll; prints its wall time and peak resident memory
beside the parcels' own size as f64 in memory (a limit a user can hit: the
roll must stay within bounded memory, not grow with the parcels).

A benchmark, not a test: it asserts nothing. The fitting core beside a bare
faer QR is `cargo bench -p plumbline-analysis --bench fit_large`.

Usage:
  cargo build --release -p plumbline-kernel
  pip install numpy scipy pyarrow
  python3 analysis/benches/scale_vs_numpy.py [--rows 1000000] [--stream] [--stream-rows 200000000]
                                            [--roll] [--roll-parcels 10000000]
Data go to $PLUMBLINE_BENCH_DIR (default: the system temp dir) and are reused.
"""
import argparse
import json
import os
import pathlib
import statistics
import subprocess
import sys
import tempfile
import time

REPO = pathlib.Path(__file__).resolve().parents[2]
BIN = os.environ.get("PLUMBLINE_BIN", str(REPO / "target" / "release" / "plumbline"))
DATA = pathlib.Path(os.environ.get("PLUMBLINE_BENCH_DIR", tempfile.gettempdir()))
DATA.mkdir(parents=True, exist_ok=True)


def design_file(rows: int, regressors: int) -> pathlib.Path:
    """y = 1 + sum_j (0.1 + 0.01 j) x_j + noise, x_j uniform on [-5, 5]; seeded."""
    path = DATA / f"plumbline-scale-{rows}x{regressors + 1}.parquet"
    if path.exists():
        return path
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(20261203)
    x = rng.uniform(-5.0, 5.0, size=(rows, regressors))
    y = 1.0 + x @ (0.1 + 0.01 * np.arange(regressors)) + rng.standard_normal(rows)
    table = pa.table({"y": y, **{f"x{j}": x[:, j] for j in range(regressors)}})
    pq.write_table(table, path, row_group_size=250_000)
    return path


def load_matrix(path, regressors):
    import numpy as np
    import pyarrow.parquet as pq

    table = pq.read_table(path)
    y = table.column("y").to_numpy()
    x = np.empty((len(y), regressors + 1))
    x[:, 0] = 1.0
    for j in range(regressors):
        x[:, j + 1] = table.column(f"x{j}").to_numpy()
    return x, y


def standard_errors(x, y, b):
    import numpy as np

    residuals = y - x @ b
    n, k = x.shape
    s2 = residuals @ residuals / (n - k)
    return np.sqrt(np.diag(np.linalg.inv(x.T @ x)) * s2)


def numpy_end_to_end(path, regressors):
    import numpy as np

    x, y = load_matrix(path, regressors)
    b = np.linalg.lstsq(x, y, rcond=None)[0]
    return b, standard_errors(x, y, b)


def gelsy_end_to_end(path, regressors):
    import scipy.linalg

    x, y = load_matrix(path, regressors)
    b = scipy.linalg.lstsq(x, y, lapack_driver="gelsy")[0]
    return b, standard_errors(x, y, b)


def plumbline_end_to_end(path, regressors):
    terms = ",".join(f"x{j}" for j in range(regressors))
    out = subprocess.run(
        [BIN, "fit", str(path), "--target", "y", "--terms", terms, "--format", "json"],
        check=True, capture_output=True, text=True,
    )
    return out.stdout


def median_time(run, repeats=3):
    times = []
    for _ in range(repeats):
        start = time.perf_counter()
        result = run()
        times.append(time.perf_counter() - start)
    return statistics.median(times), result


def part_one(rows):
    import numpy as np

    regressors = 49
    path = design_file(rows, regressors)
    print(f"{rows:,} rows x {regressors + 1} columns, {path} ({path.stat().st_size / 1e6:.0f} MB)")
    t_numpy, (b_numpy, se_numpy) = median_time(lambda: numpy_end_to_end(path, regressors))
    t_gelsy, _ = median_time(lambda: gelsy_end_to_end(path, regressors))
    t_ours, text = median_time(lambda: plumbline_end_to_end(path, regressors))
    document = json.loads(text)
    ours = np.array([c["estimate"] for c in document["coefficients"]])
    ours_se = np.array([c["std_error"] for c in document["coefficients"]])
    # Same answer first (design order: intercept, x0, ..., x48 for both).
    agree_b = np.max(np.abs(ours - b_numpy) / np.abs(b_numpy))
    agree_se = np.max(np.abs(ours_se - se_numpy) / np.abs(se_numpy))
    print(f"  plumbline fit (end to end)              {t_ours:7.2f} s   solver {document['solver']}")
    print(f"  pyarrow + numpy lstsq + SEs             {t_numpy:7.2f} s")
    print(f"  pyarrow + scipy gelsy + SEs             {t_gelsy:7.2f} s")
    print(f"  ratio plumbline / numpy                 {t_ours / t_numpy:7.2f}   (target <= 0.5, goal 0.2)")
    print(f"  ratio plumbline / gelsy                 {t_ours / t_gelsy:7.2f}   (target <= 1.0)")
    print(f"  largest relative difference from numpy: coefficients {agree_b:.1e}, standard errors {agree_se:.1e}")


# Runs argv, waits for it, and prints its time, its own peak resident set
# (wait4's ru_maxrss, kB on Linux), exit status and output as JSON.
MEASURE = """
import json, os, subprocess, sys, tempfile, time
with tempfile.TemporaryFile() as out, tempfile.TemporaryFile() as err:
    start = time.perf_counter()
    child = subprocess.Popen(sys.argv[1:], stdout=out, stderr=err)
    _, status, usage = os.wait4(child.pid, 0)
    elapsed = time.perf_counter() - start
    out.seek(0)
    err.seek(0)
    print(json.dumps({"elapsed": elapsed, "peak_kib": usage.ru_maxrss, "status": status,
                      "out": out.read().decode(), "err": err.read().decode()}))
"""


def data_folder(name):
    """A folder of generated data under DATA, and whether it is complete from an earlier run."""
    directory = DATA / name
    directory.mkdir(parents=True, exist_ok=True)
    return directory, (directory / "COMPLETE").exists()


def measured(command):
    """Runs `command` under a fresh small Python that only starts it and waits, and returns
    its (seconds, peak KiB, stdout): Linux carries the pre-exec memory of the forked process
    into the child's peak (ru_maxrss), so started from this process — which may hold part
    one's arrays — the peak would be this process's, not plumbline's."""
    run = subprocess.run([sys.executable, "-c", MEASURE, *command], capture_output=True, text=True)
    if run.returncode != 0:
        raise SystemExit(run.stderr)
    report = json.loads(run.stdout)
    if report["status"] != 0:
        raise SystemExit(report["err"])
    return report["elapsed"], report["peak_kib"], report["out"]


def stream_directory(rows):
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    per_file = 2_000_000
    directory, complete = data_folder(f"plumbline-stream-{rows}x20")
    if complete:
        return directory
    rng = np.random.default_rng(20261204)
    for k in range(rows // per_file):
        real = rng.uniform(0.0, 10.0, size=(per_file, 9))
        small = rng.integers(0, 12, size=(per_file, 10))
        y = 50.0 + real @ (1.0 + 0.1 * np.arange(9)) + small @ (0.5 - 0.05 * np.arange(10)) \
            + rng.standard_normal(per_file) * 3.0
        columns = {"y": y}
        columns.update({f"r{j}": real[:, j] for j in range(9)})
        columns.update({f"k{j}": small[:, j].astype(np.int16) for j in range(10)})
        pq.write_table(pa.table(columns), directory / f"part-{k:04d}.parquet", row_group_size=1_000_000)
    (directory / "COMPLETE").write_text("done\n")
    return directory


def part_two(rows):
    directory = stream_directory(rows)
    size = sum(p.stat().st_size for p in directory.glob("*.parquet"))
    terms = ",".join([f"r{j}" for j in range(9)] + [f"k{j}" for j in range(10)])
    command = [BIN, "fit", str(directory), "--target", "y", "--terms", terms, "--cov", "hc1",
               "--batch-rows", "1000000", "--format", "json"]
    elapsed, peak_kib, out = measured(command)
    document = json.loads(out)
    print(f"{rows:,} rows x 20 columns in {directory} ({size / 1e9:.1f} GB of Parquet; "
          f"{rows * 20 * 8 / 1e9:.0f} GB as f64 in memory)")
    print(f"  plumbline fit --batch-rows 1000000 (HC1)   {elapsed:8.1f} s   peak RSS {peak_kib / 1024:.0f} MiB")
    print(f"  rows used {document['n_obs']:,}   R² {document['r_squared']:.6f}")


def parcel_directory(parcels):
    """Parcels drawn like the demo town's (invented): the characteristics the model uses."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    files = 5
    directory, complete = data_folder(f"plumbline-roll-{parcels}")
    if complete:
        return directory
    rng = np.random.default_rng(20261205)
    districts = np.array(["Brambleknot", "Corvel Heights", "Mossgrieve", "Pellowick", "Tidewright Quay", "Wickerholm"])
    per_file = parcels // files
    for k in range(files):
        ids = np.arange(k * per_file, (k + 1) * per_file)
        pq.write_table(pa.table({
            "parcel_id": pa.array([f"P-{i:08d}" for i in ids]),
            "living_area": rng.uniform(700, 3600, per_file).round(),
            "lot_size": rng.uniform(2500, 20000, per_file).round(),
            "age": rng.integers(0, 90, per_file).astype(np.int64),
            "quality": rng.integers(1, 6, per_file).astype(np.int64),
            "district": pa.array(districts[rng.integers(0, len(districts), per_file)]),
        }), directory / f"parcels-{k}.parquet", row_group_size=500_000)
    (directory / "COMPLETE").write_text("done\n")
    return directory


def part_three(parcels):
    directory = parcel_directory(parcels)
    size = sum(p.stat().st_size for p in directory.glob("*.parquet"))
    out = DATA / "plumbline-roll-values.parquet"
    sales = REPO / "notebooks-demo" / "data" / "sales.csv"
    command = [BIN, "value", str(sales), "--target", "sale_price", "--log-target",
               "--log", "living_area", "--log", "lot_size", "--terms", "age,quality", "--category", "district",
               "--parcels", str(directory), "--id", "parcel_id", "--out", str(out),
               "--parcel-batch-rows", "100000"]
    elapsed, peak_kib, _ = measured(command)
    print(f"{parcels:,} parcels in {directory} ({size / 1e9:.2f} GB of Parquet; "
          f"{parcels * 5 * 8 / 1e9:.1f} GB as f64 in memory)")
    print(f"  plumbline value --parcel-batch-rows 100000   {elapsed:8.1f} s   "
          f"peak RSS {peak_kib / 1024:.0f} MiB   roll {out.stat().st_size / 1e9:.2f} GB")


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=1_000_000)
    parser.add_argument("--stream", action="store_true", help="also run the larger-than-memory fit")
    parser.add_argument("--stream-rows", type=int, default=200_000_000)
    parser.add_argument("--roll", action="store_true", help="also value a county's roll of parcels")
    parser.add_argument("--roll-parcels", type=int, default=10_000_000)
    parser.add_argument("--skip-in-memory", action="store_true", help="leave out part one")
    args = parser.parse_args()
    if not pathlib.Path(BIN).exists():
        raise SystemExit(f"no plumbline binary at {BIN}; build it with `cargo build --release -p plumbline-kernel` "
                         "or set PLUMBLINE_BIN")
    if not args.skip_in_memory:
        part_one(args.rows)
    if args.stream:
        part_two(args.stream_rows)
    if args.roll:
        part_three(args.roll_parcels)


if __name__ == "__main__":
    main()
