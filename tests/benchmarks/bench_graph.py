"""Benchmarks of the graph steps (audit, k-step order, connect_islands) against
the general-purpose route.

Run: python tests/benchmarks/bench_graph.py [--sizes 100000 1000000] [--reps 3]

Prints a table of wall times, ratios (general-purpose route / vicino), peak
memory and whether both routes gave the same result. It never fails: it
measures, it does not judge (a "no" in the last column is reported, not
raised).

Data: n seeded uniform random points in the unit square and
W = vicino.k_nearest(points, 8).symmetrize("union") (binary, symmetric,
about 9.2 links per unit). The general-purpose route gets the same matrix as
a scipy.sparse.csr_array with int32 indices, as scipy builds it itself.
For connect_islands, a seeded random 1% of the units lose all their links:
scipy zeroes their rows and columns (D W D with D the 0/1 diagonal of kept
units, explicit zeros eliminated) and vicino.from_matrix wraps the result.
Building the data is never timed.

Steps, each on the same data for both routes:
* audit: Weights.audit() vs scipy/numpy computing the same facts:
  scipy.sparse.csgraph.connected_components(directed=True,
  connection="weak") with component sizes (np.bincount, largest first),
  neighbour counts np.diff(indptr) (median, islands), in-degree
  np.bincount(indices) (zero columns), symmetry and the largest |W - W.T|
  with its place from W - W.T, one-way links from the same difference of
  the binary patterns, self-links from W.diagonal().
  "audit core" is vicino._core.health(w._csr()) alone: the facts without
  the Python report (counts summary, histogram, findings).
* order(2): Weights.order(2) vs scipy: B = binary W, R2 = B @ B (binary),
  X = R2 + 2 (B + I), keep the entries equal to 1 (reached in two steps,
  neither a link nor the diagonal), eliminate zeros. The baseline's result
  is left unsorted (scipy's product is); it is sorted only for the check.
  "order(2) core" is vicino._core.order(w._csr(), 2, False) alone.
* connect_islands: Weights.connect_islands(points, k=1) vs
  scipy.spatial.cKDTree(points).query(points[islands], k=2, workers=-1),
  dropping the unit itself, and the new links added both ways with scipy
  (W + S with S = new + new.T set to weight 1, so that two islands that are
  each other's nearest get one link). "islands core" is
  vicino._core.connect_islands alone (Weights.connect_islands also checks
  its arguments, converts the locations and wraps the result).
"same" compares the results once, outside the timing: the audit facts, the
pattern of the order-2 matrices, and the connected matrices entry by entry.

Times: all routes of a step run alternately in one process, best of --reps
runs (3 by default, at every size: a run takes under ten seconds even at
n = 10^6), so they see the same machine. The default sizes take about three
minutes on two cores.
Peak memory: a fresh process builds the data, then runs one route once. On
Linux it first resets its peak resident set (writing 5 to
/proc/self/clear_refs), so "MB" is the peak resident set (resource.getrusage
ru_maxrss) while the route runs, data included, and "+MB" is that peak minus
the resident set just before the route: the route's own working memory and
result. Where the reset is not allowed, "MB" also covers building the data
and "+MB" only shows memory beyond that earlier peak; the footer says which.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import textwrap

CHILD = textwrap.dedent(
    r"""
    import gc, json, resource, sys, time
    import numpy as np, scipy.sparse as sp
    from scipy.sparse.csgraph import connected_components
    from scipy.spatial import cKDTree
    import vicino
    from vicino import _core

    mode, step, n, reps = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4])
    rng = np.random.default_rng(12345)
    pts = rng.random((n, 2))
    w = vicino.k_nearest(pts, 8).symmetrize("union")

    def as_scipy(weights):
        m = weights.to_scipy()
        return sp.csr_array((m.data.copy(), m.indices.astype(np.int32), m.indptr.astype(np.int32)), shape=m.shape)

    M = as_scipy(w)
    if step == "islands":
        gone = np.random.default_rng(54321).choice(n, n // 100, replace=False)
        keep = np.ones(n)
        keep[gone] = 0.0
        D = sp.diags_array(keep, format="csr")
        Mi = sp.csr_array(D @ M @ D)
        Mi.eliminate_zeros()
        Mi.sort_indices()
        w_isl = vicino.from_matrix(Mi)
        M = Mi = as_scipy(w_isl)
        xy = np.ascontiguousarray(pts, dtype=np.float64).reshape(-1)
        del D, keep, gone
    else:
        w_isl = None

    def scipy_audit():
        ncomp, labels = connected_components(M, directed=True, connection="weak")
        sizes = np.sort(np.bincount(labels, minlength=ncomp))[::-1]
        counts = np.diff(M.indptr)
        median = np.median(counts)
        islands = np.flatnonzero(counts == 0)
        in_counts = np.bincount(M.indices, minlength=n)
        zero_columns = np.flatnonzero(in_counts == 0)
        diff = M - M.T
        diff.eliminate_zeros()
        if diff.nnz:
            at = int(np.argmax(np.abs(diff.data)))
            row = int(np.searchsorted(diff.indptr, at, side="right") - 1)
            max_asym = (float(abs(diff.data[at])), row, int(diff.indices[at]))
        else:
            max_asym = None
        P = M.copy()
        P.data[:] = 1.0
        pattern_diff = P - P.T
        one_way = int((pattern_diff.data > 0).sum())
        self_links = int(np.count_nonzero(M.diagonal()))
        return dict(count=ncomp, sizes=sizes, in_counts=in_counts, self_links=self_links, one_way=one_way,
                    symmetric=max_asym is None, median=median, islands=islands, zero_columns=zero_columns)

    def scipy_order2():
        B = M.copy()
        B.data[:] = 1.0
        R2 = B @ B
        R2.data[:] = 1.0
        X = R2 + 2.0 * (B + sp.eye_array(n, format="csr"))
        X.data = (X.data == 1.0).astype(np.float64)
        X.eliminate_zeros()
        return X

    def scipy_connect():
        isl = np.flatnonzero(np.diff(Mi.indptr) == 0)
        _, idx = cKDTree(pts).query(pts[isl], k=2, workers=-1)
        near = np.where(idx[:, 0] == isl, idx[:, 1], idx[:, 0])  # drop the unit itself
        new = sp.csr_array((np.ones(len(isl)), (isl, near)), shape=(n, n))
        S = new + new.T
        S.data[:] = 1.0
        return Mi + S

    if step == "audit":
        routes = (scipy_audit, w.audit, lambda: _core.health(w._csr()))
    elif step == "order":
        routes = (scipy_order2, lambda: w.order(2), lambda: _core.order(w._csr(), 2, False))
    elif step == "islands":
        routes = (scipy_connect, lambda: w_isl.connect_islands(pts, k=1),
                  lambda: _core.connect_islands(w_isl._csr(), xy, "euclidean", 1, 1.0))

    def same(results):
        base, vic = results[0], results[1]
        if step == "audit":
            c = vic.components
            return bool(c.count == base["count"] and np.array_equal(c.sizes, base["sizes"])
                        and np.array_equal(np.asarray(vic.zero_columns), base["zero_columns"])
                        and np.array_equal(vic.counts.to_numpy(), np.diff(M.indptr))
                        and vic.self_links == base["self_links"] and vic.one_way_links == base["one_way"]
                        and vic.symmetric == base["symmetric"] and vic.summary["median"] == base["median"]
                        and np.array_equal(np.asarray(vic.islands), base["islands"]))
        a, b = base.copy(), vic.to_scipy()
        a.sum_duplicates()
        a.sort_indices()
        ok = a.shape == b.shape and np.array_equal(a.indptr, b.indptr) and np.array_equal(a.indices, b.indices)
        if step == "islands":
            ok = ok and np.array_equal(a.data, b.data)
        return bool(ok)

    if mode == "time":
        best = [float("inf")] * len(routes)
        for _ in range(reps):
            for i, f in enumerate(routes):
                t = time.perf_counter(); f(); best[i] = min(best[i], time.perf_counter() - t)
        print(json.dumps({"times": best, "same": same([routes[0](), routes[1]()])}))
    else:
        f = routes[int(mode[-1])]
        gc.collect()
        try:
            with open("/proc/self/clear_refs", "w") as fh:
                fh.write("5")  # reset the peak resident set to the current one
            reset = True
        except OSError:
            reset = False
        base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        out = f()  # kept alive: the result counts towards the peak
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        print(json.dumps({"peak_mb": peak / 1024, "extra_mb": max(peak - base, 0) / 1024, "reset": reset}))
    """
)

LABEL = {"audit": "audit", "order": "order(2)", "islands": "connect_islands"}
CORE = {"audit": "audit core", "order": "order(2) core", "islands": "islands core"}


def child(mode: str, step: str, n: int, reps: int):
    out = subprocess.run(
        [sys.executable, "-c", CHILD, mode, step, str(n), str(reps)], capture_output=True, text=True, check=True
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def row(label: str, n: int, tb: float, tv: float, mb: dict, mv: dict, same: str) -> str:
    return (
        f"{label:<16}{n:>10,}{tb:>12.4f}{tv:>11.4f}{tb / tv:>7.2f}x{mb['peak_mb']:>9.0f}{mv['peak_mb']:>10.0f}"
        f"{mb['extra_mb']:>10.0f}{mv['extra_mb']:>11.0f}{same:>6}"
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[100_000, 1_000_000])
    ap.add_argument("--reps", type=int, default=3, help="runs per route, best kept")
    args = ap.parse_args()
    print(
        f"{'step':<16}{'n':>10}{'baseline s':>12}{'vicino s':>11}{'ratio':>8}{'base MB':>9}{'vicino MB':>10}"
        f"{'base +MB':>10}{'vicino +MB':>11}{'same':>6}",
        flush=True,
    )
    resets = set()
    for n in args.sizes:
        for step in ("audit", "order", "islands"):
            t = child("time", step, n, args.reps)
            tb, tv, tc = t["times"]
            mb, mv, mc = (child(f"mem{i}", step, n, 1) for i in range(3))
            resets.update(m["reset"] for m in (mb, mv, mc))
            print(row(LABEL[step], n, tb, tv, mb, mv, "yes" if t["same"] else "no"), flush=True)
            print(row(CORE[step], n, tb, tc, mb, mc, "-"), flush=True)
    print(
        "ratio = baseline time / vicino time (higher is better); core rows: the vicino core call alone, "
        "against the same baseline"
    )
    if resets == {True}:
        print(
            "MB = peak resident memory while the route runs in a fresh process holding the data (peak reset "
            "after building it); +MB = that peak minus the resident memory just before the route"
        )
    else:
        print(
            "MB = peak resident memory of a fresh process that builds the data and runs the route once (the "
            "peak could not be reset after building); +MB = memory beyond the peak reached while building"
        )


if __name__ == "__main__":
    main()
