"""Benchmark of the spatial lag against scipy.sparse, with effective bandwidths.

Run: python tests/benchmarks/bench_lag.py [--sizes 100000 1000000] [--columns 1 8] [--reps 15]

Prints, per size and number of columns, the best time of scipy's
``csr_array @ x`` and of ``Weights.lag(x)`` (both in one process, run
alternately, so both see the same machine), the ratio scipy / vicino, and
each route's effective bandwidth: the bytes its kernel must read and write
at least once (matrix buffers, x and the output) divided by its time. The
machine's streaming bandwidth is measured beside them with a numpy sum of
a 256 MB array (the best of the same runs). It never fails: it measures, it
does not judge.

Data: n seeded uniform random points in the unit square, in the order drawn
(not sorted), W = vicino.k_nearest(points, 8).standardize("row") (as the
builder returns it), x uniform random values. The scipy route uses the same
matrix (``w.to_scipy()``, int64 indices as vicino stores them). vicino's
first lag uses the matrix as stored; from the second on, a packed copy kept
by the Weights (32-bit positions, one weight per row, rows in a locality
order). The time of the first lag and of building the packed copy are
printed too. Both routes give the same numbers bit for bit ("same").
"""

from __future__ import annotations

import argparse
import time

import numpy as np

import vicino


def best_of(reps: int, *fs):
    best = [float("inf")] * len(fs)
    out = [None] * len(fs)
    for _ in range(reps):
        for i, f in enumerate(fs):
            t = time.perf_counter()
            out[i] = f()
            best[i] = min(best[i], time.perf_counter() - t)
    return best, out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[100_000, 1_000_000])
    ap.add_argument("--columns", type=int, nargs="+", default=[1, 8])
    ap.add_argument("--reps", type=int, default=15)
    args = ap.parse_args()
    big = np.ones(1 << 25)
    head = (
        f"{'n':>10} {'cols':>4} {'scipy s':>9} {'vicino s':>9} {'ratio':>6} {'scipy GB/s':>10} "
        f"{'vicino GB/s':>11} {'stream GB/s':>11} {'1st lag s':>9} {'pack s':>7} same"
    )
    print(head)
    print("-" * len(head))
    for n in args.sizes:
        rng = np.random.default_rng(12345)
        pts = rng.random((n, 2))
        for m in args.columns:
            w = vicino.k_nearest(pts, 8).standardize("row")
            mat = w.to_scipy()
            x = rng.random(n) if m == 1 else rng.random((n, m))
            t = time.perf_counter()
            w.lag(x)  # the first lag: the stored buffers
            first = time.perf_counter() - t
            t = time.perf_counter()
            w.lag(x)  # the second: packs, then lags
            pack = time.perf_counter() - t - first
            (ts, tv, tb), (ys, yv, _) = best_of(
                args.reps, lambda mat=mat, x=x: mat @ x, lambda w=w, x=x: w.lag(x), big.sum
            )
            same = np.array_equal(ys, yv)
            nnz, xb = w.nnz, 8 * n * m
            scipy_bytes = 8 * (n + 1) + 16 * nnz + 2 * xb
            packed = w._packed
            vicino_bytes = (packed.nbytes if packed is not None else scipy_bytes - 2 * xb) + 2 * xb
            print(
                f"{n:>10,} {m:>4} {ts:>9.4f} {tv:>9.4f} {ts / tv:>5.2f}x {scipy_bytes / ts / 1e9:>10.2f} "
                f"{vicino_bytes / tv / 1e9:>11.2f} {big.nbytes / tb / 1e9:>11.2f} {first:>9.4f} {max(pack, 0):>7.3f} "
                f"{'yes' if same else 'NO'}",
                flush=True,
            )
    print(
        "\nratio = scipy time / vicino time (higher is better), best of --reps alternating runs; GB/s = bytes the "
        "kernel must read and write at least once / time (scipy: int64 indptr and indices, float64 data; vicino: "
        "its packed copy), stream = numpy sum of 256 MB; '1st lag' uses the stored buffers, 'pack' is the extra "
        "time of the second lag, which builds the packed copy."
    )


if __name__ == "__main__":
    main()
