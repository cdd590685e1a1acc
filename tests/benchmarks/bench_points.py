"""Benchmarks of the point-based pipeline against the general-purpose route.

Run: python tests/benchmarks/bench_points.py [--sizes 10000 100000 1000000]

Prints a table of wall times, ratios (general-purpose route / vicino) and
peak memory. It never fails: it measures, it does not judge.

Steps, each on the same data for both routes:
* k_nearest (k = 8): scipy.spatial.cKDTree(workers=-1) query of k + 1
  neighbours plus building the scipy.sparse.csr_array, vs vicino.k_nearest.
* within_distance: a radius of sqrt(k / (pi n)) (about k neighbours per
  unit); cKDTree.query_pairs(r, output_type="ndarray") mirrored into a
  symmetric binary csr_array with sorted indices, vs vicino.within_distance
  (which also keeps the distances).
* inverse dist k16: cKDTree query of 17 neighbours, 1 / d and a csr_array, vs
  vicino.inverse_distance(k=16).
* adaptive kernel: cKDTree query of k + 1 (the unit itself and its k nearest),
  triangular weights 1 - d / d_k and a csr_array, vs vicino.kernel_weights(k=k).
* lag: scipy csr_array @ x vs Weights.lag(x), row-standardized k = 8.
* lag 4 columns: scipy csr_array @ X vs Weights.lag(X) for an (n, 4) array.
* moran: 999 permutations; a numpy loop that permutes the values and
  recomputes I with the scipy matrix, vs vicino.moran (which also computes
  the analytic moments).
* moran analytic: Moran's I with its normality and randomization variances
  (no permutations); scipy/numpy: z @ (W @ z), S0, S1 from W + W.T, S2 from
  the row and column sums, the kurtosis, vs vicino.moran(permutations=0).
* spectral radius: scipy.sparse.linalg.eigsh(k=1) vs Weights.spectral_radius()
  on symmetric distance-band weights (about 8 neighbours per unit).
Order (--orders): "drawn" keeps the points in the order drawn (uniform
random, not sorted in space); "sorted" sorts them first in strips of about
4 points' height, each strip by x (a spatially sorted input, as files often
are). Comparing the two shows how much each route depends on input order.
Times: both routes run alternately in one process, best of several runs, so
both see the same machine. Peak memory: the peak resident set of a fresh
process that builds the inputs and runs one route once.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import textwrap

CHILD = textwrap.dedent(
    r"""
    import json, resource, sys, time
    import numpy as np, scipy.sparse as sp, scipy.sparse.linalg as sla
    from scipy.spatial import cKDTree
    import vicino

    mode, step, n, k, reps = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5])
    rng = np.random.default_rng(12345)
    pts = rng.random((n, 2))
    if sys.argv[6] == "sorted":  # strips of about 4 points' height, each by x
        strips = max(np.sqrt(n) / 4.0, 1.0)
        pts = pts[np.lexsort((pts[:, 0], np.floor(pts[:, 1] * strips)))]

    def scipy_knn():
        _, idx = cKDTree(pts).query(pts, k=k + 1, workers=-1)
        indptr = np.arange(0, n * k + 1, k, dtype=np.int64)
        m = sp.csr_array((np.ones(n * k), idx[:, 1:].ravel(), indptr), shape=(n, n))
        m.sort_indices()
        return m

    if step == "knn":
        routes = (scipy_knn, lambda: vicino.k_nearest(pts, k))
    elif step == "within":
        radius = np.sqrt(k / (np.pi * n))
        def scipy_within():
            ij = cKDTree(pts).query_pairs(radius, output_type="ndarray")
            i, j = np.concatenate([ij[:, 0], ij[:, 1]]), np.concatenate([ij[:, 1], ij[:, 0]])
            m = sp.csr_array((np.ones(len(i)), (i, j)), shape=(n, n))
            m.sort_indices()
            return m
        routes = (scipy_within, lambda: vicino.within_distance(pts, radius))
    elif step == "idw16":
        def scipy_idw():
            d, idx = cKDTree(pts).query(pts, k=17, workers=-1)
            indptr = np.arange(0, n * 16 + 1, 16, dtype=np.int64)
            m = sp.csr_array((1.0 / d[:, 1:].ravel(), idx[:, 1:].ravel(), indptr), shape=(n, n))
            m.sort_indices()
            return m
        routes = (scipy_idw, lambda: vicino.inverse_distance(pts, k=16))
    elif step == "kernel":
        def scipy_kernel():
            d, idx = cKDTree(pts).query(pts, k=k + 1, workers=-1)  # self first, the k-th last
            u = d / d[:, -1:]
            indptr = np.arange(0, n * (k + 1) + 1, k + 1, dtype=np.int64)
            m = sp.csr_array((1.0 - u.ravel(), idx.ravel(), indptr), shape=(n, n))
            m.eliminate_zeros()
            m.sort_indices()
            return m
        routes = (scipy_kernel, lambda: vicino.kernel_weights(pts, k=k))
    elif step == "lag":
        w = vicino.k_nearest(pts, k).standardize("row"); m = w.to_scipy(); x = rng.random(n)
        routes = (lambda: m @ x, lambda: w.lag(x))
    elif step == "lag4":
        w = vicino.k_nearest(pts, k).standardize("row"); m = w.to_scipy(); x = rng.random((n, 4))
        routes = (lambda: m @ x, lambda: w.lag(x))
    elif step == "moran":
        w = vicino.k_nearest(pts, k).standardize("row"); m = w.to_scipy()
        x = pts[:, 0] + rng.normal(0, 0.5, n)
        R = 999
        def numpy_loop():
            z = x - x.mean(); s0 = m.sum(); zz = z @ z
            g = np.random.default_rng(1)
            draws = np.empty(R)
            for r in range(R):
                zp = g.permutation(z)
                draws[r] = n / s0 * (zp @ (m @ zp)) / zz
            return draws
        routes = (numpy_loop, lambda: vicino.moran(x, w, permutations=R, seed=1))
    elif step == "moran0":
        w = vicino.k_nearest(pts, k).standardize("row"); m = w.to_scipy()
        x = pts[:, 0] + rng.normal(0, 0.5, n)
        def scipy_moments():
            z = x - x.mean(); s0 = m.sum(); zz = z @ z
            i = n / s0 * (z @ (m @ z)) / zz
            s1 = 0.5 * ((m + m.T).power(2)).sum()
            s2 = ((np.asarray(m.sum(axis=1)).ravel() + np.asarray(m.sum(axis=0)).ravel()) ** 2).sum()
            b2 = n * (z**4).sum() / zz**2
            nn = float(n)
            var_norm = (nn * nn * s1 - nn * s2 + 3 * s0 * s0) / ((nn * nn - 1) * s0 * s0) - 1 / (nn - 1) ** 2
            var_rand = (nn * ((nn * nn - 3 * nn + 3) * s1 - nn * s2 + 3 * s0 * s0)
                        - b2 * ((nn * nn - nn) * s1 - 2 * nn * s2 + 6 * s0 * s0)) / (
                (nn - 1) * (nn - 2) * (nn - 3) * s0 * s0) - 1 / (nn - 1) ** 2
            return i, var_norm, var_rand
        routes = (scipy_moments, lambda: vicino.moran(x, w, permutations=0))
    elif step == "spectral":
        radius = np.sqrt(k / (np.pi * n))
        w = vicino.within_distance(pts, radius); m = w.to_scipy()
        routes = (lambda: sla.eigsh(m, k=1, which="LA", return_eigenvectors=False), w.spectral_radius)

    if mode == "time":
        best = [float("inf"), float("inf")]
        for _ in range(reps):
            for i, f in enumerate(routes):
                t = time.perf_counter(); f(); best[i] = min(best[i], time.perf_counter() - t)
        print(json.dumps(best))
    else:
        base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        routes[int(mode[-1])]()
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        print(json.dumps({"peak_mb": peak / 1024, "extra_mb": max(peak - base, 0) / 1024}))
    """
)

LABEL = {
    "knn": "k_nearest",
    "within": "within_distance",
    "idw16": "inverse dist k16",
    "kernel": "adaptive kernel",
    "lag": "lag",
    "lag4": "lag 4 columns",
    "moran": "moran 999 perm",
    "moran0": "moran analytic",
    "spectral": "spectral radius",
}


def child(mode: str, step: str, n: int, k: int, reps: int, order: str):
    out = subprocess.run(
        [sys.executable, "-c", CHILD, mode, step, str(n), str(k), str(reps), order],
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[10_000, 100_000, 1_000_000])
    ap.add_argument("--moran-sizes", type=int, nargs="+", default=[10_000, 100_000])
    ap.add_argument("--reps", type=int, default=3, help="runs of the slow steps (fast ones run 10x as often)")
    ap.add_argument("--k", type=int, default=8)
    ap.add_argument(
        "--steps",
        nargs="+",
        default=["knn", "within", "idw16", "kernel", "lag", "lag4", "moran0", "spectral", "moran"],
        help="steps to run",
    )
    ap.add_argument(
        "--orders",
        nargs="+",
        default=["drawn"],
        choices=["drawn", "sorted"],
        help="point orders: as drawn (random), or sorted in space (strips)",
    )
    ap.add_argument("--no-memory", action="store_true", help="times only (skip the fresh processes for peak memory)")
    args = ap.parse_args()
    steps = ("knn", "within", "idw16", "kernel", "lag", "lag4", "moran0", "spectral")
    plan = [(s, n) for n in args.sizes for s in steps] + [("moran", n) for n in args.moran_sizes]
    plan = [(s, n, o) for s, n in plan if s in args.steps for o in args.orders]
    print(
        f"{'step':<16}{'n':>10}{'order':>8}{'baseline s':>12}{'vicino s':>11}{'ratio':>8}{'base MB':>9}"
        f"{'vicino MB':>10}",
        flush=True,
    )
    for step, n, order in plan:
        fast, slow = step in ("lag", "lag4", "moran0"), step == "moran" and n >= 100_000
        reps = args.reps * 10 if fast else (1 if slow else args.reps)
        tb, tv = child("time", step, n, args.k, reps, order)
        if args.no_memory:
            mb = mv = {"peak_mb": float("nan")}
        else:
            mb, mv = child("mem0", step, n, args.k, 1, order), child("mem1", step, n, args.k, 1, order)
        print(
            f"{LABEL[step]:<16}{n:>10,}{order:>8}{tb:>12.4f}{tv:>11.4f}{tb / tv:>7.2f}x"
            f"{mb['peak_mb']:>9.0f}{mv['peak_mb']:>10.0f}",
            flush=True,
        )
    print(
        "ratio = baseline time / vicino time (higher is better); MB = peak resident memory of a process "
        "that builds the inputs and runs that route once"
    )


if __name__ == "__main__":
    main()
