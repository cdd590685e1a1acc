"""Benchmarks of the global statistics (Geary's C, Getis-Ord G, join counts) against the
general-purpose route: the statistic, its moments and a permutation loop written with
numpy and scipy.sparse.

Run: python tests/benchmarks/bench_stats.py [--sizes 10000 100000 1000000] [--permutations 99] [--reps 2]

Prints wall time, the ratio general-purpose route / vicino, the peak memory of
each route and whether both gave the same statistic. It never fails: it
measures, it does not judge.

Data: n seeded uniform random points in the unit square,
W = vicino.k_nearest(points, 8) (binary, asymmetric, 8 links per unit), values
1 + x-coordinate + exponential noise (non-negative, so G applies); join counts
use values above their median. The baseline gets the same matrix as a
scipy.sparse.csr_array. Building the data is never timed.

The baseline route, per statistic, is what a Python user would write:
* geary: S0, S1, S2 from scipy (W + W.T squared, row and column sums), the
  kurtosis and the Cliff-Ord variances with numpy, the numerator
  sum_ij w_ij (x_i - x_j)^2 over the stored entries, and for each permutation
  (numpy Generator.permutation) the same sum again.
* getis_ord: x @ (W @ x) over the distinct-pair sum, the B0..B4 moments, and
  x_r @ (W @ x_r) per permutation.
* join_counts: x @ (W @ x) / 2 and the same for 1 - x per permutation (BW from
  the total), with the free and non-free moments.
Both routes use R permutations; vicino's run them in parallel on the rayon pool
(2 cores here), the baseline in one thread, as numpy does.

Each (statistic, route, n) runs in a fresh process: best of --reps runs, and
the peak resident set of that process (ru_maxrss, data included).
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
    import numpy as np, scipy.sparse as sp
    import vicino

    step, route, n, R, reps = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), int(sys.argv[5])
    rng = np.random.default_rng(12345)
    pts = rng.random((n, 2))
    w = vicino.k_nearest(pts, 8)
    x = 1 + pts[:, 0] + rng.exponential(size=n)
    b = (x > np.median(x)).astype(float)
    M = w.to_scipy()
    I, J = M.nonzero()

    def sums():
        S = M + M.T
        s0 = M.sum()
        s1 = 0.5 * (S.data ** 2).sum()
        s2 = ((M.sum(axis=1) + M.sum(axis=0)) ** 2).sum()
        return s0, s1, s2

    def numpy_geary():
        s0, s1, s2 = sums()
        z = x - x.mean()
        m2 = z @ z
        b2 = n * (z ** 4).sum() / m2 ** 2
        scale = (n - 1) / (2 * s0 * m2)
        c = scale * (M.data * (x[I] - x[J]) ** 2).sum()
        var = ((n - 1) * s1 * (n * n - 3 * n + 3 - (n - 1) * b2)
               - 0.25 * (n - 1) * s2 * (n * n + 3 * n - 6 - (n * n - n + 2) * b2)
               + s0 ** 2 * (n * n - 3 - (n - 1) ** 2 * b2)) / (n * (n - 2) * (n - 3) * s0 ** 2)
        g = np.random.default_rng(1)
        draws = np.empty(R)
        for r in range(R):
            xp = g.permutation(x)
            draws[r] = scale * (M.data * (xp[I] - xp[J]) ** 2).sum()
        return c, var, draws

    def numpy_getis():
        s0, s1, s2 = sums()
        m1, m2, m3, m4 = (float((x ** k).sum()) for k in (1, 2, 3, 4))
        den = m1 ** 2 - m2
        gstat = x @ (M @ x) / den
        b0 = (n * n - 3 * n + 3) * s1 - n * s2 + 3 * s0 ** 2
        b1 = -((n * n - n) * s1 - 2 * n * s2 + 6 * s0 ** 2)
        b2 = -(2 * n * s1 - (n + 3) * s2 + 6 * s0 ** 2)
        b3 = 4 * (n - 1) * s1 - 2 * (n + 1) * s2 + 8 * s0 ** 2
        b4 = s1 - s2 + s0 ** 2
        eg = s0 / (n * (n - 1))
        var = (b0 * m2 ** 2 + b1 * m4 + b2 * m1 ** 2 * m2 + b3 * m1 * m3 + b4 * m1 ** 4) / (
            den ** 2 * n * (n - 1) * (n - 2) * (n - 3)) - eg ** 2
        g = np.random.default_rng(1)
        draws = np.empty(R)
        for r in range(R):
            xp = g.permutation(x)
            draws[r] = xp @ (M @ xp) / den
        return gstat, var, draws

    def numpy_joins():
        s0, s1, s2 = sums()
        n1 = b.sum()
        p = n1 / n
        e_free = s0 * p * p / 2
        v_free = (s1 * p ** 2 + (s2 - 2 * s1) * p ** 3 + (s1 - s2) * p ** 4) / 4
        bb = 0.5 * b @ (M @ b)
        g = np.random.default_rng(1)
        draws = np.empty((R, 3))
        for r in range(R):
            xp = g.permutation(b)
            one = 0.5 * xp @ (M @ xp)
            zero = 0.5 * (1 - xp) @ (M @ (1 - xp))
            draws[r] = (one, zero, s0 / 2 - one - zero)
        return bb, (e_free, v_free), draws

    routes = {
        ("geary", "numpy"): numpy_geary,
        ("geary", "vicino"): lambda: vicino.geary(x, w, permutations=R, seed=1),
        ("getis_ord", "numpy"): numpy_getis,
        ("getis_ord", "vicino"): lambda: vicino.getis_ord(x, w, permutations=R, seed=1),
        ("join_counts", "numpy"): numpy_joins,
        ("join_counts", "vicino"): lambda: vicino.join_counts(b, w, permutations=R, seed=1),
    }
    f = routes[(step, route)]
    best = float("inf")
    for _ in range(reps):
        t = time.perf_counter()
        out = f()
        best = min(best, time.perf_counter() - t)
    if route == "numpy":
        stat = float(out[0])
    else:
        stat = float(out.like[0].count if step == "join_counts" else out.statistic)
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024
    print(json.dumps({"time": best, "stat": stat, "peak_mb": peak}))
    """
)

STEPS = ("geary", "getis_ord", "join_counts")


def child(step: str, route: str, n: int, permutations: int, reps: int) -> dict:
    out = subprocess.run(
        [sys.executable, "-c", CHILD, step, route, str(n), str(permutations), str(reps)],
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--sizes", type=int, nargs="+", default=[10_000, 100_000, 1_000_000])
    parser.add_argument("--permutations", type=int, default=99)
    parser.add_argument("--reps", type=int, default=2)
    parser.add_argument("--steps", nargs="+", default=list(STEPS), choices=STEPS)
    args = parser.parse_args()
    head = (
        f"{'step':<12} {'n':>9} {'R':>6} {'numpy s':>9} {'vicino s':>9} {'ratio':>7} "
        f"{'numpy MB':>9} {'vicino MB':>10} same"
    )
    print(head)
    print("-" * len(head))
    for n in args.sizes:
        for step in args.steps:
            base = child(step, "numpy", n, args.permutations, args.reps)
            ours = child(step, "vicino", n, args.permutations, args.reps)
            same = abs(base["stat"] - ours["stat"]) <= 1e-9 * abs(base["stat"])
            print(
                f"{step:<12} {n:>9} {args.permutations:>6} {base['time']:>9.3f} {ours['time']:>9.3f} "
                f"{base['time'] / ours['time']:>7.1f} {base['peak_mb']:>9.0f} {ours['peak_mb']:>10.0f} "
                f"{'yes' if same else 'no'}"
            )
    print(
        "\nratio = numpy route / vicino, best of --reps runs in a fresh process each; MB = peak resident set "
        "of that process (data included). Both routes draw R permutations; their draws differ (other generators)."
    )


if __name__ == "__main__":
    main()
