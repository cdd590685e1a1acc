"""Benchmarks of weights files against the general-purpose route.

Run: python tests/benchmarks/bench_io.py [--sizes 100000 1000000] [--reps 2]

Prints wall times and ratios (general-purpose route / vicino) for writing and
reading an 8-nearest-neighbour, row-standardized matrix of n random points,
both routes on the same matrix in the same process, alternately, best of
--reps runs. It never fails: it measures, it does not judge.

Routes, each pair on the same data:
* Matrix Market: scipy.io.mmwrite / scipy.io.mmread vs Weights.write(".mtx") /
  vicino.read (vicino also writes and reads the ids sidecar);
* triplet text: numpy.savetxt / numpy.loadtxt of the 1-based (i, j, w) rows
  vs Weights.write(".txt") / vicino.read;
* npz: scipy.sparse.save_npz / load_npz (its default, compressed) vs
  Weights.write(".npz") / vicino.read (uncompressed, with ids and facts);
* CSV edge table: pandas DataFrame.to_csv / read_csv of to_edges() vs
  Weights.write(".csv") / vicino.read.
"""

from __future__ import annotations

import argparse
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import scipy.io
import scipy.sparse as sp

import vicino


def best(f, reps: int) -> float:
    t = float("inf")
    for _ in range(reps):
        start = time.perf_counter()
        f()
        t = min(t, time.perf_counter() - start)
    return t


def routes(w: vicino.Weights, folder: Path):
    m = w.to_scipy()
    coo = m.tocoo()
    triplets = np.column_stack([coo.row + 1, coo.col + 1, coo.data])
    edges = w.to_edges()
    p = {
        k: folder / f"{k}" for k in ("base.mtx", "w.mtx", "base.txt", "w.txt", "base.npz", "w.npz", "base.csv", "w.csv")
    }
    return [
        ("Matrix Market write", lambda: scipy.io.mmwrite(p["base.mtx"], m), lambda: w.write(p["w.mtx"])),
        ("Matrix Market read", lambda: scipy.io.mmread(p["base.mtx"]), lambda: vicino.read(p["w.mtx"])),
        ("triplet write", lambda: np.savetxt(p["base.txt"], triplets, fmt="%d %d %.17g"), lambda: w.write(p["w.txt"])),
        ("triplet read", lambda: np.loadtxt(p["base.txt"]), lambda: vicino.read(p["w.txt"])),
        ("npz write", lambda: sp.save_npz(p["base.npz"], m), lambda: w.write(p["w.npz"])),
        ("npz read", lambda: sp.load_npz(p["base.npz"]), lambda: vicino.read(p["w.npz"])),
        ("csv write", lambda: edges.to_csv(p["base.csv"], index=False), lambda: w.write(p["w.csv"])),
        ("csv read", lambda: pd.read_csv(p["base.csv"]), lambda: vicino.read(p["w.csv"])),
    ]


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[100_000, 1_000_000])
    ap.add_argument("--reps", type=int, default=2)
    ap.add_argument("--k", type=int, default=8)
    args = ap.parse_args()
    warnings.simplefilter("ignore")
    print(f"{'step':<22}{'n':>11}{'baseline s':>12}{'vicino s':>11}{'ratio':>8}", flush=True)
    for n in args.sizes:
        pts = np.random.default_rng(12345).random((n, 2))
        w = vicino.k_nearest(pts, args.k, ids=np.arange(n)).standardize("row")
        with tempfile.TemporaryDirectory() as d:
            for name, base, ours in routes(w, Path(d)):
                tb = tv = float("inf")
                for _ in range(args.reps):  # alternate, so both see the same machine
                    tb = min(tb, best(base, 1))
                    tv = min(tv, best(ours, 1))
                print(f"{name:<22}{n:>11,}{tb:>12.3f}{tv:>11.3f}{tb / tv:>7.2f}x", flush=True)
    print("ratio = baseline time / vicino time (higher is better)")


if __name__ == "__main__":
    main()
