#!/usr/bin/env python3
"""Fits inside DataFusion beside the tools a model team would reach for,
measured side by side in one run.

For each size (default 2 x 10^7 and 2 x 10^8 rows) of y and 19 regressors
(9 real-valued, 10 small integers, as sale data have), in Parquet folders of
2 x 10^6-row files (the data of `analysis/benches/scale_vs_numpy.py
--stream`), each tool end to end in a fresh process:

  engine      `plumbline-engine fit DIR --target y --terms ... --format json`
              (DataFusion on every core: three aggregate rounds, TSQR and
              double-double residual sums, provenance hash, full inference);
  batches     `plumbline fit DIR --batch-rows 1000000` (our own batch loop);
  duckdb      the normal equations X'X, X'y summed in DuckDB's SQL (253 sums
              in one pass), solved with numpy: one pass, less accurate
              (the condition number squared), classical errors;
  scan        DataFusion (its Python package) summing the same 20 columns:
              the floor of any method that reads the data once.

Prints seconds and peak resident memory (getrusage of the child) and the
ratios engine / duckdb (target <= 1.0) and engine / scan (target <= 2.0).
The coefficients of engine and duckdb are compared (max relative
difference), a sanity check, not a test. A benchmark: it asserts nothing.

Usage:
  cargo build --release -p plumbline-engine -p plumbline-kernel
  pip install numpy pyarrow duckdb datafusion
  python3 engine/bench/scale.py [--rows 20000000 200000000] [--skip batches]
Data go to $PLUMBLINE_BENCH_DIR (default: the system temp dir) and are reused.
"""
import argparse
import json
import os
import pathlib
import sys

HERE = pathlib.Path(__file__).resolve()
sys.path.insert(0, str(HERE.parents[2] / "analysis" / "benches"))
from scale_vs_numpy import REPO, measured, stream_directory  # noqa: E402

ENGINE = os.environ.get("PLUMBLINE_ENGINE_BIN", str(REPO / "target" / "release" / "plumbline-engine"))
PLUMBLINE = os.environ.get("PLUMBLINE_BIN", str(REPO / "target" / "release" / "plumbline"))
REGRESSORS = [f"r{j}" for j in range(9)] + [f"k{j}" for j in range(10)]

DUCKDB = r"""
import json, sys, duckdb, numpy as np
folder, names = sys.argv[1], sys.argv[2].split(",")
columns = ["1"] + [f"CAST({n} AS DOUBLE)" for n in names] + ["y"]
sums = [f"SUM({a} * {b})" for i, a in enumerate(columns) for b in columns[i:]]
con = duckdb.connect()
con.execute("SET enable_progress_bar = false")
row = con.execute(f"SELECT {', '.join(sums)} FROM read_parquet('{folder}/*.parquet')").fetchone()
m = len(columns)
g = np.zeros((m, m))
k = 0
for i in range(m):
    for j in range(i, m):
        g[i, j] = g[j, i] = row[k]
        k += 1
p = m - 1
xtx, xty, yty, n = g[:p, :p], g[:p, p], g[p, p], g[0, 0]
b = np.linalg.solve(xtx, xty)
rss = yty - b @ xty
se = np.sqrt(np.diag(np.linalg.inv(xtx)) * rss / (n - p))
print(json.dumps({"coefficients": b.tolist(), "std_errors": se.tolist()}))
"""

SCAN = r"""
import sys, datafusion
folder, names = sys.argv[1], sys.argv[2].split(",")
ctx = datafusion.SessionContext()
ctx.register_parquet("t", folder)
sums = ", ".join(f"SUM(CAST({n} AS DOUBLE))" for n in ["y"] + names)
ctx.sql(f"SELECT {sums} FROM t").collect()
"""


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, nargs="+", default=[20_000_000, 200_000_000])
    parser.add_argument("--skip", nargs="*", default=[], choices=["batches", "duckdb", "scan"])
    args = parser.parse_args()
    terms = ",".join(REGRESSORS)
    for rows in args.rows:
        folder = stream_directory(rows)
        size = sum(p.stat().st_size for p in folder.glob("*.parquet"))
        print(f"{rows:,} rows x 20 columns, {len(list(folder.glob('*.parquet')))} Parquet files, "
              f"{size / 1e9:.1f} GB ({os.cpu_count()} cores)")
        results = {}
        seconds, peak, out = measured([ENGINE, "fit", str(folder), "--target", "y", "--terms", terms,
                                       "--format", "json"])
        engine = json.loads(out)
        results["engine"] = (seconds, peak)
        if "batches" not in args.skip:
            seconds, peak, _ = measured([PLUMBLINE, "fit", str(folder), "--target", "y", "--terms", terms,
                                         "--batch-rows", "1000000", "--format", "json"])
            results["batches"] = (seconds, peak)
        duck = None
        if "duckdb" not in args.skip:
            seconds, peak, out = measured([sys.executable, "-c", DUCKDB, str(folder), ",".join(REGRESSORS)])
            duck = json.loads(out.strip().splitlines()[-1])
            results["duckdb"] = (seconds, peak)
        if "scan" not in args.skip:
            seconds, peak, _ = measured([sys.executable, "-c", SCAN, str(folder), ",".join(REGRESSORS)])
            results["scan"] = (seconds, peak)
        for name, (seconds, peak) in results.items():
            print(f"  {name:<8} {seconds:8.2f} s   peak RSS {peak / 1024:7.0f} MiB")
        base = results["engine"][0]
        for peer, target in (("duckdb", 1.0), ("scan", 2.0)):
            if peer in results:
                print(f"  engine / {peer:<7} {base / results[peer][0]:6.2f}   (target <= {target})")
        if duck is not None:
            ours = [c["estimate"] for c in engine["coefficients"]]
            worst = max(abs(a - b) / max(abs(a), 1e-300) for a, b in zip(ours, duck["coefficients"]))
            print(f"  coefficients, engine vs normal equations: max relative difference {worst:.1e}")


if __name__ == "__main__":
    main()
