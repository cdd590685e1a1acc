"""Benchmarks of the point-based pipeline against the general-purpose route.

Run: python tests/benchmarks/bench_points.py [--sizes 10000 100000 1000000] [--quick]

Prints a table of wall times, ratios (general-purpose route / vicino) and
peak memory. It never fails: it measures, it does not judge.

Routes compared, on the same data in the same run:
* k nearest (k = 8): scipy.spatial.cKDTree(workers=-1) query of k + 1
  neighbours plus building the scipy.sparse.csr_array, vs vicino.k_nearest.
* lag: scipy csr_array @ x vs Weights.lag(x), row-standardized k = 8.
* Moran's I with 999 permutations: a numpy loop that permutes the values
  and recomputes I with the scipy matrix, vs vicino.moran.
Peak memory is the peak resident set of a fresh child process running
only that step (so earlier steps do not hide it).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import textwrap
import time

CHILD = textwrap.dedent(
    r"""
    import json, resource, sys, time
    import numpy as np, scipy.sparse as sp
    from scipy.spatial import cKDTree
    import vicino

    task, n, k, reps = sys.argv[1], int(sys.argv[2]), int(sys.argv[3]), int(sys.argv[4])
    rng = np.random.default_rng(12345)
    pts = rng.random((n, 2))

    def scipy_knn():
        tree = cKDTree(pts)
        _, idx = tree.query(pts, k=k + 1, workers=-1)
        idx = idx[:, 1:]
        indptr = np.arange(0, n * k + 1, k, dtype=np.int64)
        m = sp.csr_array((np.ones(n * k), idx.ravel(), indptr), shape=(n, n))
        m.sort_indices()
        return m

    def best(f):
        times = []
        for _ in range(reps):
            t = time.perf_counter(); f(); times.append(time.perf_counter() - t)
        return min(times)

    base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    if task == "knn_scipy":
        t = best(scipy_knn)
    elif task == "knn_vicino":
        t = best(lambda: vicino.k_nearest(pts, k))
    elif task in ("lag_scipy", "lag_vicino"):
        w = vicino.k_nearest(pts, k).standardize("row")
        m = w.to_scipy()
        x = rng.random(n)
        base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        t = best((lambda: m @ x) if task == "lag_scipy" else (lambda: w.lag(x)))
    elif task in ("moran_numpy", "moran_vicino"):
        w = vicino.k_nearest(pts, k).standardize("row")
        m = w.to_scipy()
        x = pts[:, 0] + rng.normal(0, 0.5, n)
        base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        R = 999
        def numpy_loop():
            z = x - x.mean(); s0 = m.sum(); zz = z @ z
            g = np.random.default_rng(1)
            draws = np.empty(R)
            for r in range(R):
                zp = g.permutation(z)
                draws[r] = n / s0 * (zp @ (m @ zp)) / zz
            return draws
        t = best(numpy_loop if task == "moran_numpy" else (lambda: vicino.moran(x, w, permutations=R, seed=1)))
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    print(json.dumps({"time": t, "peak_mb": peak / 1024, "extra_mb": max(peak - base, 0) / 1024}))
    """
)


def run(task: str, n: int, k: int, reps: int) -> dict:
    out = subprocess.run([sys.executable, "-c", CHILD, task, str(n), str(k), str(reps)],
                         capture_output=True, text=True, check=True, env=os.environ.copy())
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[10_000, 100_000, 1_000_000])
    ap.add_argument("--moran-sizes", type=int, nargs="+", default=[10_000, 100_000])
    ap.add_argument("--reps", type=int, default=3)
    ap.add_argument("--k", type=int, default=8)
    args = ap.parse_args()
    rows = []
    for n in args.sizes:
        for name, base, ours in (("k_nearest", "knn_scipy", "knn_vicino"), ("lag", "lag_scipy", "lag_vicino")):
            b, o = run(base, n, args.k, args.reps), run(ours, n, args.k, args.reps)
            rows.append((name, n, b, o))
    for n in args.moran_sizes:
        b, o = run("moran_numpy", n, args.k, 1), run("moran_vicino", n, args.k, 1)
        rows.append(("moran 999 perm", n, b, o))
    print(f"{'step':<16}{'n':>10}{'baseline s':>12}{'vicino s':>11}{'ratio':>8}{'base MB':>9}{'vicino MB':>10}")
    for name, n, b, o in rows:
        print(f"{name:<16}{n:>10,}{b['time']:>12.4f}{o['time']:>11.4f}{b['time'] / o['time']:>7.2f}x"
              f"{b['peak_mb']:>9.0f}{o['peak_mb']:>10.0f}")
    print("ratio = baseline time / vicino time (higher is better); MB = peak resident memory of the step's process")


if __name__ == "__main__":
    main()
