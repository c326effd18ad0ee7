"""Speed and memory of a local fit (geographically weighted regression), bandwidth search
included, beside numpy and scipy doing one evaluation of the same local fits in the same run.

    python3 analysis/benches/local_fit.py [--n 10000] [--binary target/release/plumbline]

Invented sales: n places in a 20 km square, 5 terms and an intercept, the living-area
coefficient varying from west to east. Prints the figures; asserts nothing about time.
numpy's reference finds each sale's N nearest with scipy's cKDTree, weights them by the
adaptive bisquare kernel and solves the k x k normal equations with numpy.linalg.solve,
batched: one evaluation of the AICc at the bandwidth plumbline chose.
"""
import argparse
import json
import pathlib
import resource
import subprocess
import tempfile
import time

import numpy as np
from scipy.spatial import cKDTree

REPO = pathlib.Path(__file__).resolve().parents[2]


def sales(n, seed=1):
    rng = np.random.default_rng(seed)
    x, y = 20 * rng.random(n), 20 * rng.random(n)
    cols = {
        "log_area": rng.normal(7.5, 0.3, n),
        "log_lot": rng.normal(8.8, 0.4, n),
        "age": rng.integers(0, 90, n).astype(float),
        "quality": rng.integers(1, 6, n).astype(float),
        "baths": rng.integers(1, 5, n).astype(float),
    }
    slope = 0.45 + 0.02 * x
    price = (9.0 + slope * (cols["log_area"] - 7.5) + 0.1 * cols["log_lot"] - 0.004 * cols["age"]
             + 0.08 * cols["quality"] + 0.04 * cols["baths"] + rng.normal(0, 0.1, n))
    return dict(cols, log_price=price, x=x, y=y)


def numpy_evaluation(data, count):
    X = np.column_stack([np.ones(len(data["x"]))] + [data[c] for c in ("log_area", "log_lot", "age", "quality", "baths")])
    y = data["log_price"]
    places = np.column_stack([data["x"], data["y"]])
    start = time.perf_counter()
    d, idx = cKDTree(places).query(places, k=count)
    reach = d[:, -1:]
    w = np.where(d < reach, (1 - (d / reach) ** 2) ** 2, 0.0)
    Xn = X[idx]                                  # n × N × k
    A = np.einsum("inp,in,inq->ipq", Xn, w, Xn)  # n × k × k
    c = np.einsum("inp,in,in->ip", Xn, w, y[idx])
    beta = np.linalg.solve(A, c[..., None])[..., 0]
    v = np.linalg.solve(A, X[..., None])[..., 0]
    trace_s = np.einsum("ip,ip->", X, v)
    rss = np.sum((y - np.einsum("ip,ip->i", X, beta)) ** 2)
    n = len(y)
    aicc = 2 * n * np.log(np.sqrt(rss / n)) + n * np.log(2 * np.pi) + n * (n + trace_s) / (n - 2 - trace_s)
    return time.perf_counter() - start, aicc


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--n", type=int, default=10_000)
    parser.add_argument("--binary", default=str(REPO / "target" / "release" / "plumbline"))
    args = parser.parse_args()
    data = sales(args.n)
    with tempfile.TemporaryDirectory() as tmp:
        path = pathlib.Path(tmp) / "sales.csv"
        names = list(data)
        np.savetxt(path, np.column_stack([data[c] for c in names]), delimiter=",", header=",".join(names),
                   comments="", fmt="%.17g")
        start = time.perf_counter()
        run = subprocess.run([args.binary, "fit", str(path), "--target", "log_price", "--terms",
                              "log_area,log_lot,age,quality,baths", "--local", "x,y", "--format", "json"],
                             capture_output=True, text=True)
        seconds = time.perf_counter() - start
        assert run.returncode == 0, run.stderr
    peak_mib = resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024
    doc = json.loads(run.stdout)
    count = doc["bandwidth"]["neighbours"]
    evaluations = len(doc["search"])
    numpy_seconds, numpy_aicc = numpy_evaluation(data, count)
    print(f"local fit, n = {args.n:,}, 6 terms, adaptive bisquare, bandwidth by least AICc")
    print(f"  plumbline: {seconds:.2f} s end to end (CSV read, {evaluations} bandwidths evaluated, the fit at "
          f"{count} nearest sales with standard errors and Moran's I), peak RSS {peak_mib:.0f} MiB")
    print(f"  numpy + scipy cKDTree, one evaluation at {count}: {numpy_seconds:.2f} s "
          f"(x {evaluations} evaluations = {numpy_seconds * evaluations:.1f} s)")
    print(f"  ratio, plumbline search / numpy's evaluations: {seconds / (numpy_seconds * evaluations):.2f}")
    print(f"  AICc at {count}: plumbline {doc['aicc']:.6f}, numpy {numpy_aicc:.6f}")


if __name__ == "__main__":
    main()
