"""Benchmarks of polygon contiguity against the general-purpose route.

Run: python tests/benchmarks/bench_contiguity.py [--sizes 10000 100000 1000000]
     [--reps 3] [--skip-rook-baseline-above 200000] [--border-sizes 10000 100000 1000000]

Prints a table of wall times, ratios (general-purpose route / vicino) and
peak memory. It never fails: it measures, it does not judge.

Data: a Voronoi tessellation of n seeded uniform random points in the unit
square (shapely.voronoi_polygons extended to the unit box, split with
shapely.get_parts, clipped to the box with shapely.intersection) in a
geopandas.GeoSeries. Building it is not timed; since it takes about 20 s at
n = 10^6, each tessellation is cached once as WKB in a .npy file in the
system temporary directory (never in the repository) and read back by
every process. Random points almost surely put no four cells at one
corner, so queen and rook find the same links here; the rook rows measure
the cost of deciding it.

Order (--orders): "given" keeps the cells in the order GEOS returns them;
"shuffled" puts them in a seeded random order; "sorted" sorts them in
strips of about 4 cells' height by the centres of their bounding boxes,
each strip by x (a spatially sorted input). Comparing shuffled and sorted
shows how much each route depends on the input order.

Steps, each on the same tessellation for both routes:
* queen: shapely.STRtree(geoms).query(geoms, predicate="intersects") and a
  scipy.sparse.csr_array of the pairs without self pairs, vs
  vicino.contiguity(gs, "queen").
* rook: the same STRtree query, then shapely.relate_pattern(a, b,
  "****1****") (boundaries share a stretch of positive length) on the
  candidate pairs i < j, mirrored into a symmetric csr_array, vs
  vicino.contiguity(gs, "rook"). The relate_pattern route takes minutes at
  n = 10^6: above --skip-rook-baseline-above units it is not run and its
  row prints "skipped".
* queen core / rook core: vicino._core.contiguity(buffers, rule, 0.0,
  "euclidean") alone, with buffers = vicino.geometry.as_polygons(gs)
  computed beforehand; the ratio is against the same shapely route as the
  end-to-end row.
* conversion: vicino.geometry.as_polygons(gs) on its own (GeoSeries to
  the flat buffers the core reads), the part of the end-to-end route that
  the core-only rows leave out; it has no baseline.
* long border: two units sharing one wiggly border of m vertices (the
  lower unit with an extra vertex inside every edge of it, so the borders
  meet at T-junctions), beside a third unit apart; shapely.STRtree query
  with "intersects", relate_pattern "****1****" and
  length(intersection(a.boundary, b.boundary)) on the pairs, vs
  vicino.contiguity(units, "rook", weight="border_length"). The pair test
  is about linear in m (it was quadratic: 12 s at m = 10^5).
Times: all routes of a rule run alternately in one process, best of
several runs (one run for n >= 10^6), so they see the same machine. Peak
memory: the peak resident set of a fresh process that loads the
tessellation and runs one route once; for the core rows the process loads
only the converted buffers (saved next to the cache by the timing process)
and runs the core once, so the conversion's own peak is not counted there.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import textwrap

CHILD = textwrap.dedent(
    r"""
    import json, os, resource, sys, tempfile, time
    import numpy as np, scipy.sparse as sp, shapely, geopandas as gpd
    import vicino, vicino.geometry

    mode, rule, n, reps, skip = sys.argv[1], sys.argv[2], int(sys.argv[3]), int(sys.argv[4]), sys.argv[5] == "1"
    order = sys.argv[6]
    seed = 12345
    cache = os.path.join(tempfile.gettempdir(), f"vicino_bench_voronoi_{n}_{seed}.npy")
    cached_buffers = cache[:-4] + f"_{order}_buffers.npz"
    if mode == "mem2":  # the core alone: load the converted buffers written by the timing process
        with np.load(cached_buffers) as z:
            # the first entry is the buffer kind ("rings" or "wkb"), saved as a 0-d text array
            buffers = (str(z["arr_0"]),) + tuple(z[f"arr_{k}"] for k in range(1, len(z.files)))
        base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        vicino._core.contiguity(buffers, rule, 0.0, "euclidean")
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        print(json.dumps({"peak_mb": peak / 1024, "extra_mb": max(peak - base, 0) / 1024}))
        sys.exit()
    if os.path.exists(cache):
        geoms = shapely.from_wkb(np.load(cache, allow_pickle=True))
    else:
        pts = np.random.default_rng(seed).random((n, 2))
        box = shapely.box(0.0, 0.0, 1.0, 1.0)
        geoms = shapely.intersection(
            shapely.get_parts(shapely.voronoi_polygons(shapely.multipoints(pts), extend_to=box)), box)
        tmp = f"{cache}.{os.getpid()}.npy"
        np.save(tmp, shapely.to_wkb(geoms), allow_pickle=True)
        os.replace(tmp, cache)
    if order == "shuffled":
        geoms = geoms[np.random.default_rng(seed + 1).permutation(len(geoms))]
    elif order == "sorted":  # strips of about 4 cells' height, each by x
        b = shapely.bounds(geoms)
        cx, cy = (b[:, 0] + b[:, 2]) / 2, (b[:, 1] + b[:, 3]) / 2
        geoms = geoms[np.lexsort((cx, np.floor(cy * max(np.sqrt(len(geoms)) / 4.0, 1.0))))]
    gs = gpd.GeoSeries(geoms)
    m = len(geoms)

    def csr(i, j):
        a = sp.csr_array((np.ones(len(i)), (i, j)), shape=(m, m))
        a.sort_indices()
        return a

    def candidates():
        i, j = shapely.STRtree(geoms).query(geoms, predicate="intersects")
        return i, j

    def shapely_queen():
        i, j = candidates()
        keep = i != j
        return csr(i[keep], j[keep])

    def shapely_rook():
        i, j = candidates()
        keep = i < j
        i, j = i[keep], j[keep]
        hit = shapely.relate_pattern(geoms[i], geoms[j], "****1****")
        i, j = i[hit], j[hit]
        return csr(np.concatenate([i, j]), np.concatenate([j, i]))

    buffers = None
    if mode == "time":
        buffers = vicino.geometry.as_polygons(gs)[0]
        tmp = f"{cached_buffers}.{os.getpid()}.npz"
        np.savez(tmp, *buffers)
        os.replace(tmp, cached_buffers)
    baseline = None if (rule == "rook" and skip) else (shapely_queen if rule == "queen" else shapely_rook)
    routes = [
        baseline,
        lambda: vicino.contiguity(gs, rule),
        lambda: vicino._core.contiguity(buffers, rule, 0.0, "euclidean"),
        (lambda: vicino.geometry.as_polygons(gs)) if rule == "queen" else None,
    ]

    if mode == "time":
        best = [None if f is None else float("inf") for f in routes]
        for _ in range(reps):
            for i, f in enumerate(routes):
                if f is None:
                    continue
                t = time.perf_counter(); f(); best[i] = min(best[i], time.perf_counter() - t)
        print(json.dumps(best))
    else:
        base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        routes[int(mode[-1])]()
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        print(json.dumps({"peak_mb": peak / 1024, "extra_mb": max(peak - base, 0) / 1024}))
    """
)


BORDER = textwrap.dedent(
    r"""
    import json, resource, sys, time
    import numpy as np, shapely
    import vicino

    mode, m, reps = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
    rng = np.random.default_rng(m)
    x = np.arange(m) / 2.0**20  # dyadic: the midpoints lie exactly on the border
    y = np.round(rng.uniform(-0.25, 0.25, m) * 2**10) / 2**10
    border = np.column_stack([x, y])
    low = np.empty((2 * m - 1, 2))
    low[0::2], low[1::2] = border, 0.5 * (border[:-1] + border[1:])
    geoms = np.array([
        shapely.Polygon(np.vstack([border, [[x[-1], 1.0], [0.0, 1.0]]])),
        shapely.Polygon(np.vstack([low[::-1], [[0.0, -1.0], [x[-1], -1.0]]])),
        shapely.box(2, 2, 3, 3),
    ], dtype=object)

    def baseline():
        i, j = shapely.STRtree(geoms).query(geoms, predicate="intersects")
        keep = i < j
        i, j = i[keep], j[keep]
        hit = shapely.relate_pattern(geoms[i], geoms[j], "****1****")
        return shapely.length(shapely.intersection(shapely.boundary(geoms[i[hit]]), shapely.boundary(geoms[j[hit]])))

    routes = [baseline, lambda: vicino.contiguity(geoms, "rook", weight="border_length")]
    if mode == "time":
        best = [float("inf")] * 2
        for _ in range(reps):
            for k, f in enumerate(routes):
                t = time.perf_counter(); f(); best[k] = min(best[k], time.perf_counter() - t)
        print(json.dumps(best))
    else:
        base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        routes[int(mode[-1])]()
        peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
        print(json.dumps({"peak_mb": peak / 1024, "extra_mb": max(peak - base, 0) / 1024}))
    """
)


def border_child(mode: str, m: int, reps: int):
    out = subprocess.run(
        [sys.executable, "-c", BORDER, mode, str(m), str(reps)], capture_output=True, text=True, check=True
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def child(mode: str, rule: str, n: int, reps: int, skip: bool, order: str = "given"):
    out = subprocess.run(
        [sys.executable, "-c", CHILD, mode, rule, str(n), str(reps), "1" if skip else "0", order],
        capture_output=True,
        text=True,
        check=True,
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


def row(label: str, n: int, tb, tv: float, mb, mv: dict, order: str = "") -> str:
    if tb is None:
        b, r = f"{'skipped' if mb == 'skipped' else '-':>12}", f"{'-':>8}"
        m = f"{'skipped' if mb == 'skipped' else '-':>9}"
    else:
        b, r, m = f"{tb:>12.4f}", f"{tb / tv:>7.2f}x", f"{mb['peak_mb']:>9.0f}"
    return f"{label:<16}{n:>10,}{order:>9}{b}{tv:>11.4f}{r}{m}{mv['peak_mb']:>10.0f}"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", type=int, nargs="*", default=[10_000, 100_000, 1_000_000])
    ap.add_argument("--reps", type=int, default=3, help="runs per route (1 for n >= 10^6)")
    ap.add_argument(
        "--skip-rook-baseline-above",
        type=int,
        default=200_000,
        metavar="N",
        help="do not run the relate_pattern rook baseline above N units (it takes minutes at 10^6)",
    )
    ap.add_argument(
        "--border-sizes",
        type=int,
        nargs="*",
        default=[10_000, 100_000, 1_000_000],
        metavar="M",
        help="vertices of the shared border of the long-border rows (none to skip them)",
    )
    ap.add_argument(
        "--orders",
        nargs="+",
        default=["given"],
        choices=["given", "shuffled", "sorted"],
        help="cell orders: as GEOS returns them, shuffled, or sorted in space (strips)",
    )
    ap.add_argument("--rules", nargs="+", default=["queen", "rook"], choices=["queen", "rook"])
    args = ap.parse_args()
    print(
        f"{'step':<16}{'n':>10}{'order':>9}{'baseline s':>12}{'vicino s':>11}{'ratio':>8}{'base MB':>9}"
        f"{'vicino MB':>10}",
        flush=True,
    )
    for n in args.sizes:
        reps = 1 if n >= 1_000_000 else args.reps
        for rule in args.rules:
            for o in args.orders:
                skip = rule == "rook" and n > args.skip_rook_baseline_above
                tb, tv, tc, tconv = child("time", rule, n, reps, skip, o)
                mb = "skipped" if skip else child("mem0", rule, n, 1, skip, o)
                mv, mc = child("mem1", rule, n, 1, skip, o), child("mem2", rule, n, 1, skip, o)
                print(row(rule, n, tb, tv, mb, mv, o), flush=True)
                print(row(f"{rule} core", n, tb, tc, mb, mc, o), flush=True)
                if rule == "queen":
                    print(row("conversion", n, None, tconv, None, child("mem3", rule, n, 1, skip, o), o), flush=True)
    for m in args.border_sizes:
        reps = 1 if m >= 1_000_000 else args.reps
        tb, tv = border_child("time", m, reps)
        print(row("long border", m, tb, tv, border_child("mem0", m, 1), border_child("mem1", m, 1)), flush=True)
    print(
        "ratio = baseline time / vicino time (higher is better); MB = peak resident memory of a process "
        "that loads the inputs and runs that route once; core rows exclude the conversion (as_polygons): "
        "their MB is a process that loads only the converted buffers"
    )


if __name__ == "__main__":
    main()
