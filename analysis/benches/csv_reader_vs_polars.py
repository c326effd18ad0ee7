#!/usr/bin/env python3
"""Loading a 10^6 x 40 numeric CSV: Plumbline's reader beside polars' own CSV
reader (Python polars from PyPI), on the same file, in the same run.

Prints time and peak resident memory of each, and the two ratios the reader
is held to: Plumbline's peak RSS / the bytes of its f64 columns (target <= 2)
and Plumbline's time / polars' time (target <= 1.5). A benchmark, not a test:
it asserts nothing.

Usage: python3 analysis/benches/csv_reader_vs_polars.py [ROWS] [COLS]
(needs `pip install polars numpy`; the file is written to $TMPDIR once and reused.)
"""
import json
import os
import pathlib
import subprocess
import sys
import tempfile
import textwrap

REPO = pathlib.Path(__file__).resolve().parents[2]
ROWS = int(sys.argv[1]) if len(sys.argv) > 1 else 1_000_000
COLS = int(sys.argv[2]) if len(sys.argv) > 2 else 40


def make_file() -> pathlib.Path:
    path = pathlib.Path(tempfile.gettempdir()) / f"plumbline-bench-{ROWS}x{COLS}.csv"
    if not path.exists():
        import numpy as np
        import polars as pl
        rng = np.random.default_rng(20261203)
        frame = pl.DataFrame({f"x{j}": rng.normal(1000.0, 250.0, ROWS) for j in range(COLS)})
        frame.write_csv(path)
    return path


POLARS_READ = textwrap.dedent("""
    import json, sys, time
    import polars as pl
    def status(field):
        for line in open("/proc/self/status"):
            if line.startswith(field):
                return int(line.split()[1]) * 1024
    baseline = status("VmRSS:")
    t = time.perf_counter()
    frame = pl.read_csv(sys.argv[1])
    seconds = time.perf_counter() - t
    print(json.dumps({"reader": "polars " + pl.__version__, "rows": frame.height, "cols": frame.width,
                      "seconds": seconds, "peak_rss_bytes": status("VmHWM:"), "baseline_rss_bytes": baseline,
                      "threads": pl.thread_pool_size()}))
""")


def best_of(runs, command):
    results = [json.loads(subprocess.run(command, capture_output=True, text=True, check=True).stdout.strip()
                          .splitlines()[-1]) for _ in range(runs)]
    return min(results, key=lambda r: r["seconds"])


def main():
    path = make_file()
    size = path.stat().st_size
    subprocess.run(["cargo", "bench", "-p", "plumbline", "--bench", "csv_read", "--no-run", "--quiet"], cwd=REPO,
                   check=True)
    ours = best_of(3, ["cargo", "bench", "-p", "plumbline", "--bench", "csv_read", "--quiet", "--", str(path)])
    theirs = best_of(3, [sys.executable, "-c", POLARS_READ, str(path)])
    mib = 1 << 20
    print(f"file: {path} ({ROWS:,} rows x {COLS} numeric columns, {size / mib:,.0f} MiB)")
    print(f"f64 columns: {ours['f64_column_bytes'] / mib:,.0f} MiB")
    for r in (ours, theirs):
        grown = r["peak_rss_bytes"] - r["baseline_rss_bytes"]
        print(f"{r['reader']:<16} {r['seconds']:7.2f} s   peak RSS {r['peak_rss_bytes'] / mib:7,.0f} MiB "
              f"(+{grown / mib:,.0f} MiB over the process at start)")
    print(f"plumbline peak RSS / f64 column bytes: {ours['peak_rss_bytes'] / ours['f64_column_bytes']:.2f} (target <= 2)")
    print(f"plumbline time / polars time:          {ours['seconds'] / theirs['seconds']:.2f} (target <= 1.5; "
          f"polars used {theirs.get('threads', '?')} threads)")


if __name__ == "__main__":
    main()
