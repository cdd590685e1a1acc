"""Benchmark of Weights.eigenvalue_bounds against ARPACK (scipy.sparse.linalg.eigsh / eigs).

Run: python tests/benchmarks/bench_eigen.py [--sizes 10000 100000 1000000] [--tol 1e-8]
     [--cases queen-row knn-row rook cycle] [--timeout 900]

Prints one row per (case, n): wall time of each route, the ratio ARPACK /
vicino, products with the matrix (vicino's count; ARPACK's counted by a
LinearOperator around the same CSR product), and the largest difference of
the two answers. It never fails: a route that runs out of time is reported
as such.

Cases (n = side^2 units, side = round(sqrt(n))):
* queen-row: row-standardized queen lattice, W = D^-1 A. ARPACK gets the
  symmetric similar matrix D^-1/2 A D^-1/2 and eigsh(k=1, which="SA");
  lambda_max = 1 (constant row sums) is needed by neither route.
* knn-row: row-standardized 8 nearest neighbours of seeded uniform points
  (asymmetric). ARPACK: eigs(k=1, which="SR") on W; lambda_max = 1.
* rook: binary rook lattice (bipartite, so lambda_min = -lambda_max).
  ARPACK: eigsh(k=2, which="BE").
* cycle: a weighted directed cycle (closed form in vicino). ARPACK:
  eigs(k=1, which="LR") for the spectral radius (the leftmost real
  eigenvalue of an odd cycle is out of its reach).

Both routes run in one fresh process per (case, n), on the same matrix,
with the same relative tolerance (--tol, 1e-8 by default; ARPACK's tol is
relative to the eigenvalue, vicino's to the spectral radius, 1 for the
row-standardized cases). Building the matrix is never timed.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import textwrap

CHILD = textwrap.dedent(
    r"""
    import json, sys, time
    import numpy as np, scipy.sparse as sp, scipy.sparse.linalg as spla
    from scipy.spatial import cKDTree
    import vicino

    case, n, tol, route = sys.argv[1], int(sys.argv[2]), float(sys.argv[3]), sys.argv[4]
    side = int(round(n ** 0.5))

    def lattice(queen):
        p = sp.diags([np.ones(side - 1), np.ones(side - 1)], [-1, 1], shape=(side, side))
        i = sp.eye(side)
        a = sp.kron(i, p) + sp.kron(p, i)
        if queen:
            a = a + sp.kron(p, p)
        return sp.csr_array(a)

    if case == "queen-row":
        a = lattice(True)
        d = np.asarray(a.sum(axis=1)).ravel()
        w = sp.csr_array(sp.diags(1 / d) @ a)
        s = 1 / np.sqrt(d)
        ref_matrix = sp.csr_array(sp.diags(s) @ a @ sp.diags(s))
    elif case == "knn-row":
        xy = np.random.default_rng(12345).random((n, 2))
        _, j = cKDTree(xy).query(xy, 9, workers=-1)
        w = sp.csr_array((np.full(n * 8, 0.125), (np.repeat(np.arange(n), 8), j[:, 1:].ravel())), shape=(n, n))
        w.sort_indices()
        ref_matrix = w
    elif case == "rook":
        w = lattice(False).astype(float)
        ref_matrix = w
    else:
        wt = np.random.default_rng(7).uniform(0.5, 2.0, n)
        w = sp.csr_array((wt, (np.arange(n), (np.arange(n) + 1) % n)), shape=(n, n))
        ref_matrix = w
    weights = vicino.from_matrix(w)
    out = {}
    if route == "vicino":
        t = time.perf_counter()
        b = weights.eigenvalue_bounds(tol=tol)
        out = {"time": time.perf_counter() - t, "products": b.products,
               "min": b.lambda_min, "max": b.lambda_max, "how": b.min_method}
    else:
        calls = [0]
        m = ref_matrix
        def mv(x):
            calls[0] += 1
            return m @ x
        op = spla.LinearOperator(m.shape, matvec=mv, dtype=np.float64)
        t = time.perf_counter()
        if case == "queen-row":
            v = spla.eigsh(op, k=1, which="SA", tol=tol, return_eigenvectors=False, maxiter=10**6)
            res = {"min": float(v.min()), "max": 1.0}
        elif case == "knn-row":
            v = spla.eigs(op, k=1, which="SR", tol=tol, return_eigenvectors=False, maxiter=10**6)
            res = {"min": float(v.real.min()), "max": 1.0}
        elif case == "rook":
            v = spla.eigsh(op, k=2, which="BE", tol=tol, return_eigenvectors=False, maxiter=10**6)
            res = {"min": float(v.min()), "max": float(v.max())}
        else:
            v = spla.eigs(op, k=1, which="LR", tol=tol, return_eigenvectors=False, maxiter=10**6)
            res = {"min": float("nan"), "max": float(v.real.max())}
        out = {"time": time.perf_counter() - t, "products": calls[0], **res}
    print(json.dumps(out))
    """
)


def run(case: str, n: int, tol: float, route: str, timeout: float) -> dict | None:
    try:
        p = subprocess.run(
            [sys.executable, "-c", CHILD, case, str(n), str(tol), route],
            capture_output=True,
            text=True,
            timeout=timeout,
            check=False,
        )
    except subprocess.TimeoutExpired:
        return None
    if p.returncode != 0:
        return {"error": (p.stderr.strip().splitlines() or ["?"])[-1]}
    return json.loads(p.stdout.strip().splitlines()[-1])


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--sizes", type=int, nargs="+", default=[10_000, 100_000, 1_000_000])
    ap.add_argument("--cases", nargs="+", default=["queen-row", "knn-row", "rook", "cycle"])
    ap.add_argument("--tol", type=float, default=1e-8)
    ap.add_argument("--timeout", type=float, default=900.0)
    args = ap.parse_args()
    head = f"{'case':<10} {'n':>9} {'vicino s':>9} {'ARPACK s':>9} {'ratio':>7} {'products':>9} {'ARPACK mv':>9}"
    print(head + f" {'max |diff|':>10}  method")
    for case in args.cases:
        for n in args.sizes:
            v = run(case, n, args.tol, "vicino", args.timeout)
            a = run(case, n, args.tol, "arpack", args.timeout)

            def cell(r: dict | None, key: str, fmt: str) -> str:
                if r is None:
                    return "timeout"
                if "error" in r:
                    return "error"
                return format(r[key], fmt)

            ratio = diff = "-"
            if v and a and "error" not in v and "error" not in a:
                ratio = f"{a['time'] / v['time']:.2f}"
                pairs = [(v[k], a[k]) for k in ("min", "max") if a[k] == a[k]]
                diff = f"{max(abs(x - y) for x, y in pairs):.1e}"
            how = v.get("how", v.get("error", "")) if v else ""
            print(
                f"{case:<10} {n:>9} {cell(v, 'time', '.3f'):>9} {cell(a, 'time', '.3f'):>9} {ratio:>7} "
                f"{cell(v, 'products', 'd'):>9} {cell(a, 'products', 'd'):>9} {diff:>10}  {how}",
                flush=True,
            )


if __name__ == "__main__":
    main()
