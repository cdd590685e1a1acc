"""Benchmark of local Moran's I and local G_i* with conditional permutations
against a vectorized NumPy route.

Run: python tests/benchmarks/bench_local.py [--sizes 1000 10000 100000] [--permutations 999]
     [--numpy-max-permutations 999]

Prints wall time, the ratio NumPy route / vicino and the peak memory
(ru_maxrss of a fresh process per measurement). It never fails: it
measures, it does not judge.

Data: n seeded uniform random points, W = vicino.k_nearest(points, 8)
row-standardized, values = x coordinate + noise. Building the data is not
timed.

The NumPy route is what a Python user would write without vicino: the
analytic part as array formulas (Anselin 1995), and R conditional
permutations as a loop over draws, each draw vectorized over all units:
k indices per unit from the other n - 1 units (np.random.Generator.integers,
shifted past the unit itself), rows with a repeated index drawn again until
none is left (so the draws are without replacement, as vicino's), the
neighbour sums as one gather and row sum, and the counts of extreme draws
accumulated. With large n the NumPy route may be timed on fewer draws
(--numpy-max-permutations) and scaled linearly to R; the table says so.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import textwrap

SETUP = """
import time, resource, json, numpy as np, vicino
n, R, step = {n}, {r}, {step!r}
rng = np.random.default_rng(1)
pts = rng.uniform(size=(n, 2))
w = vicino.k_nearest(pts, 8).standardize("row")
x = pts[:, 0] + rng.normal(scale=0.3, size=n)
"""

VICINO = """
t = time.perf_counter()
if step == "local_moran":
    r = vicino.local_moran(x, w, permutations=R, seed=3)
else:
    r = vicino.local_getis_ord(x - x.min(), w, star=True, permutations=R, seed=3)
dt = time.perf_counter() - t
out = float(np.nanmean(r.p_permutation))
"""

NUMPY = """
m = w.to_scipy()
k = 8
cols = m.indices.reshape(n, k)
wts = m.data.reshape(n, k)
if step == "local_moran":
    v = x - x.mean()
else:
    v = x - x.min()
t = time.perf_counter()
m2 = (v**2).mean()
lag = (wts * v[cols]).sum(axis=1)
if step == "local_moran":
    stat = v * lag / m2
    wi = wts.sum(1); w2 = (wts**2).sum(1); b2 = (v**4).mean() / m2**2
    e = -wi / (n - 1)
    var = w2 * (n - b2) / (n - 1) + (wi**2 - w2) * (2 * b2 - n) / ((n - 1) * (n - 2)) - wi**2 / (n - 1) ** 2
    z = (stat - e) / np.sqrt(var)
    sign = np.sign(v)
else:
    sign = np.ones(n)
centre = wts.sum(1) * (v.sum() - v) / (n - 1)
far = np.abs(lag - centre)
gen = np.random.default_rng(5)
unit = np.arange(n)[:, None]
extreme = np.zeros(n, dtype=np.int64)
for _ in range(R):
    idx = gen.integers(0, n - 1, size=(n, k))
    idx += idx >= unit
    while True:
        s = np.sort(idx, axis=1)
        bad = np.flatnonzero((s[:, 1:] == s[:, :-1]).any(axis=1))
        if not len(bad):
            break
        fresh = gen.integers(0, n - 1, size=(len(bad), k))
        idx[bad] = fresh + (fresh >= bad[:, None])
    sums = (wts * v[idx]).sum(axis=1)
    extreme += np.abs(sums - centre) >= far
p = (extreme + 1) / (R + 1)
dt = time.perf_counter() - t
out = float(p.mean())
"""

REPORT = """
print(json.dumps({"seconds": dt, "mean_p": out, "rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))
"""


def measure(n: int, r: int, step: str, route: str) -> dict:
    body = VICINO if route == "vicino" else NUMPY
    code = textwrap.dedent(SETUP.format(n=n, r=r, step=step)) + textwrap.dedent(body) + textwrap.dedent(REPORT)
    res = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=False)
    if res.returncode != 0:
        return {"seconds": float("nan"), "mean_p": float("nan"), "rss_mb": float("nan"), "error": res.stderr[-300:]}
    return json.loads(res.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", type=int, nargs="+", default=[1000, 10000, 100000])
    ap.add_argument("--permutations", type=int, default=999)
    ap.add_argument("--numpy-max-permutations", type=int, default=999)
    ap.add_argument("--steps", nargs="+", default=["local_moran", "local_getis_ord"])
    args = ap.parse_args()
    big_r = args.permutations
    print(f"{'step':<16} {'n':>9} {'vicino s':>9} {'numpy s':>9} {'ratio':>7} {'vicino MB':>9} {'numpy MB':>9}  note")
    for step in args.steps:
        for n in args.sizes:
            v = measure(n, big_r, step, "vicino")
            r_np = min(big_r, args.numpy_max_permutations)
            b = measure(n, r_np, step, "numpy")
            scale = big_r / r_np
            note = f"numpy timed on R = {r_np}, scaled x{scale:g}" if r_np < big_r else ""
            if "error" in v or "error" in b:
                note = (v.get("error") or b.get("error") or "").strip().splitlines()[-1]
            secs = b["seconds"] * scale
            print(
                f"{step:<16} {n:>9,} {v['seconds']:>9.2f} {secs:>9.2f} {secs / v['seconds']:>7.1f} "
                f"{v['rss_mb']:>9.0f} {b['rss_mb']:>9.0f}  {note}",
                flush=True,
            )


if __name__ == "__main__":
    main()
