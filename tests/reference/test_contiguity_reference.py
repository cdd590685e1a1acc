"""Polygon contiguity of vicino checked against references outside the project.

References used here:
* shapely 2 (GEOS) predicates and measures: ``STRtree.query(predicate=
  "intersects" / "dwithin")`` for queen contacts, ``relate_pattern(a, b,
  "****1****")`` (boundary / boundary intersection of dimension 1, DE-9IM)
  for rook contacts, ``length(intersection(a.boundary, b.boundary))`` for
  shared border lengths, ``length`` for perimeters, ``centroid`` and
  ``distance`` for Cliff-Ord distances;
* exact rational arithmetic (floats as exact integers times 2**-1100,
  checked against ``fractions.Fraction``) where GEOS itself is not exact
  (nearly collinear segments after densification);
* networkx lattice graphs (``grid_2d_graph`` = rook lattice,
  ``strong_product`` of two paths = queen lattice);
* the haversine formula (Sinnott 1984) on the IUGG mean sphere
  R1 = 6371.0088 km (Moritz 2000);
* the Natural Earth low-resolution countries shipped with pyogrio's tests
  (public domain data).

Conventions of the documented rules (rust/vicino-core/src/contiguity/mod.rs):
queen = boundaries share a point (within t if t > 0), rook = they share a
stretch of positive length (longer than t if t > 0); a unit inside
another's exterior ring, or whose boundary crosses the other's, is a
neighbour under both rules.
"""

from __future__ import annotations

import os
import warnings
from fractions import Fraction

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import shapely
from _shapes import shapely_queen, voronoi
from shapely import MultiPolygon, Polygon, box

import vicino

gpd = pytest.importorskip("geopandas")
pyogrio = pytest.importorskip("pyogrio")

R1_KM = 6371.0088  # IUGG mean Earth radius R1 (Moritz 2000)


# ---------------------------------------------------------------------------
# helpers: data and independent references
# ---------------------------------------------------------------------------
def vicino_pairs(w: vicino.Weights) -> set[tuple[int, int]]:
    """Ordered (row, column) positions of the links of w."""
    m = w.to_scipy().tocoo()
    return set(zip(m.row.tolist(), m.col.tolist()))


def shapely_rook(geoms) -> set[tuple[int, int]]:
    """Ordered pairs whose boundaries meet in dimension 1 (DE-9IM ****1****)."""
    geoms = np.asarray(geoms, dtype=object)
    pairs = np.array(sorted(shapely_queen(geoms)), dtype=np.int64).reshape(-1, 2)
    ok = shapely.relate_pattern(geoms[pairs[:, 0]], geoms[pairs[:, 1]], "****1****")
    return set(map(tuple, pairs[ok].tolist()))


def shapely_border(geoms, i, j) -> np.ndarray:
    """Length of the intersection of the boundaries of geoms[i] and geoms[j]."""
    geoms = np.asarray(geoms, dtype=object)
    return shapely.length(shapely.intersection(shapely.boundary(geoms[i]), shapely.boundary(geoms[j])))


def edges_arrays(w: vicino.Weights):
    e = w.to_edges()
    pos = pd.Series(np.arange(w.n), index=w.ids)
    return pos[e["source"]].to_numpy(), pos[e["target"]].to_numpy(), e


def segments(geom) -> np.ndarray:
    """All boundary segments of a (multi)polygon, shape (s, 2, 2)."""
    out = []
    for part in shapely.get_parts(geom):
        for ring in shapely.get_rings(part):
            c = shapely.get_coordinates(ring)
            out.append(np.stack([c[:-1], c[1:]], axis=1))
    return np.concatenate(out) if out else np.zeros((0, 2, 2))


def _exact(v) -> int:
    """A finite float as the exact integer v * 2**1100 (every float is a whole multiple of 2**-1074)."""
    n, d = float(v).as_integer_ratio()  # d is a power of two
    return n << (1100 - (d.bit_length() - 1))


def _orient_exact(p, q, r) -> int:
    px, py, qx, qy, rx, ry = (_exact(v) for v in (*p, *q, *r))
    v = (qx - px) * (ry - py) - (qy - py) * (rx - px)
    return (v > 0) - (v < 0)


def exact_rook(geoms, candidates) -> set[tuple[int, int]]:
    """Pairs with two exactly collinear boundary segments overlapping in positive length.

    Exact rational orientation tests (a float pre-filter only discards
    segment pairs that are clearly not collinear).
    """
    geoms = np.asarray(geoms, dtype=object)
    segs = [segments(g) for g in geoms]
    out = set()
    for i, j in candidates:
        if i > j:
            continue
        a, b = segs[i], segs[j]
        a0, a1 = a[:, None, 0, :], a[:, None, 1, :]
        b0, b1 = b[None, :, 0, :], b[None, :, 1, :]
        d = a1 - a0
        o1 = d[..., 0] * (b0[..., 1] - a0[..., 1]) - d[..., 1] * (b0[..., 0] - a0[..., 0])
        o2 = d[..., 0] * (b1[..., 1] - a0[..., 1]) - d[..., 1] * (b1[..., 0] - a0[..., 0])
        near = (np.abs(o1) < 1e-9) & (np.abs(o2) < 1e-9)
        found = False
        for s, t in zip(*np.nonzero(near)):
            p0, p1, q0, q1 = a[s, 0], a[s, 1], b[t, 0], b[t, 1]
            if _orient_exact(p0, p1, q0) or _orient_exact(p0, p1, q1):
                continue
            axis = 0 if p0[0] != p1[0] else 1  # collinear: compare along a non-degenerate axis
            lo = max(min(p0[axis], p1[axis]), min(q0[axis], q1[axis]))
            hi = min(max(p0[axis], p1[axis]), max(q0[axis], q1[axis]))
            if hi > lo:
                found = True
                break
        if found:
            out.update({(i, j), (j, i)})
    return out


def _inside_exact_one(p, a, b) -> tuple[bool, bool]:
    """(on the segment a-b, crossed by the ray from p to +x): exact rational arithmetic."""
    px, py, ax, ay, bx, by = (_exact(v) for v in (*p, *a, *b))
    on = _orient_exact(a, b, p) == 0 and min(ax, bx) <= px <= max(ax, bx) and min(ay, by) <= py <= max(ay, by)
    # px < ax + (py - ay) (bx - ax) / (by - ay), multiplied through by (by - ay)
    lhs, rhs = (px - ax) * (by - ay), (py - ay) * (bx - ax)
    crossed = (ay > py) != (by > py) and (lhs < rhs if by > ay else lhs > rhs)
    return bool(on), bool(crossed)


def _inside_exact(p, segs) -> int:
    """1 when p lies strictly inside the rings of `segs`, 0 on them, -1 outside.

    Exact: orientation for the boundary, crossing number for the inside. Floats
    decide only where their answer is certain (coordinates of order one, float
    error below 1e-15 against a margin of 1e-9); every segment within the margin
    is decided in exact rational arithmetic.
    """
    a, b = segs[:, 0], segs[:, 1]
    px, py = float(p[0]), float(p[1])
    cross = (b[:, 0] - a[:, 0]) * (py - a[:, 1]) - (b[:, 1] - a[:, 1]) * (px - a[:, 0])
    lo, hi = np.minimum(a, b) - 1e-9, np.maximum(a, b) + 1e-9
    in_box = (lo[:, 0] <= px) & (px <= hi[:, 0]) & (lo[:, 1] <= py) & (py <= hi[:, 1])
    doubtful = (np.abs(cross) <= 1e-9) & in_box
    straddle = (a[:, 1] > py) != (b[:, 1] > py)  # exact: float comparisons
    with np.errstate(divide="ignore", invalid="ignore"):
        xc = a[:, 0] + (py - a[:, 1]) * (b[:, 0] - a[:, 0]) / (b[:, 1] - a[:, 1])
    near = straddle & ~(np.abs(px - xc) > 1e-9)
    odd = bool(np.count_nonzero(straddle & ~near & (px < xc)) % 2)
    for s in np.nonzero(doubtful | near)[0]:
        on, crossed = _inside_exact_one(p, a[s], b[s])
        if on:
            return 0
        if near[s] and crossed:
            odd = not odd
    return 1 if odd else -1


def test_exact_helpers_agree_with_fractions():
    """The scaled-integer orientation and crossing tests give what Fraction arithmetic gives."""
    rng = np.random.default_rng(7)
    base = rng.uniform(-1, 1, (400, 6))
    tricky = np.array([0.0, 5e-324, -5e-324, 1e-300, 0.1, 1 / 3, 2.0**-1000, -0.75])
    base[:100] = rng.choice(tricky, (100, 6))
    base[100:200, 4:] = base[100:200, :2] + 0.5 * (base[100:200, 2:4] - base[100:200, :2])  # near collinear
    for p0, p1, q0, q1, r0, r1 in base:
        f = [Fraction(float(v)) for v in (p0, p1, q0, q1, r0, r1)]
        v = (f[2] - f[0]) * (f[5] - f[1]) - (f[3] - f[1]) * (f[4] - f[0])
        # reference: Python's exact fractions.Fraction arithmetic
        assert _orient_exact((p0, p1), (q0, q1), (r0, r1)) == (v > 0) - (v < 0)
        px, py, ax, ay, bx, by = f
        crossed = (ay > py) != (by > py) and px < ax + (py - ay) * (bx - ax) / (by - ay)
        assert _inside_exact_one((p0, p1), (q0, q1), (r0, r1))[1] == crossed  # reference: Fraction
    # reference: exact identity, 2**-1074 is the smallest positive float
    assert _exact(5e-324) == 2**26 and _exact(1.0) == 2**1100 and _exact(-0.5) == -(2**1099)


def exact_vertex_inside(geoms, candidates) -> set[tuple[int, int]]:
    """Pairs where a vertex of one unit lies strictly inside the other (single polygons
    without holes): shapely decides vertices farther than 1e-9 from the other boundary,
    exact rational arithmetic the others (an ulp inside is an overlap of the interiors)."""
    geoms = np.asarray(geoms, dtype=object)
    out = set()
    for i, j in candidates:
        v = shapely.get_coordinates(geoms[i].exterior)[:-1]
        near = shapely.distance(shapely.points(v), geoms[j].boundary) <= 1e-9
        if shapely.contains_xy(geoms[j], v[~near, 0], v[~near, 1]).any():
            out.update({(i, j), (j, i)})
            continue
        segs = segments(geoms[j])
        if any(_inside_exact(q, segs) == 1 for q in v[near]):
            out.update({(i, j), (j, i)})
    return out


def haversine(p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Great-circle distance in km between (lon, lat) degrees (haversine, R1)."""
    lam1, phi1, lam2, phi2 = (np.radians(v) for v in (p[..., 0], p[..., 1], q[..., 0], q[..., 1]))
    h = np.sin((phi2 - phi1) / 2) ** 2 + np.cos(phi1) * np.cos(phi2) * np.sin((lam2 - lam1) / 2) ** 2
    return 2 * R1_KM * np.arcsin(np.sqrt(np.clip(h, 0.0, 1.0)))


def haversine_length(geom) -> float:
    """Sum of haversine lengths of the segments of a (multi)line or polygon boundary."""
    total = 0.0
    for part in shapely.get_parts(geom):
        rings = shapely.get_rings(part) if shapely.get_type_id(part) == 3 else [part]
        for line in rings:
            c = shapely.get_coordinates(line)
            if len(c) > 1:
                total += haversine(c[:-1], c[1:]).sum()
    return total


# ---------------------------------------------------------------------------
# random Voronoi tessellations
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("n,seed", [(300, 1), (1000, 2), (2000, 3)])
def test_voronoi_queen_and_rook_match_shapely(n, seed):
    cells = voronoi(n, seed)
    queen = vicino.contiguity(cells, "queen")
    rook = vicino.contiguity(cells, "rook")
    ref_queen = shapely_queen(cells)
    assert len(ref_queen) > 2 * n  # the tessellation is connected in bulk
    assert vicino_pairs(queen) == ref_queen  # reference: shapely STRtree query(predicate="intersects"), i != j
    assert vicino_pairs(rook) == shapely_rook(cells)  # reference: shapely relate_pattern(a, b, "****1****")
    assert queen.n == rook.n == n


@pytest.mark.parametrize("n,seed", [(300, 11), (2000, 12)])
def test_voronoi_border_lengths_and_perimeters_match_shapely(n, seed):
    cells = voronoi(n, seed)
    for rule in ("queen", "rook"):
        w = vicino.contiguity(cells, rule)
        i, j, e = edges_arrays(w)
        expected = shapely_border(cells, i, j)
        # reference: shapely.length(shapely.intersection(a.boundary, b.boundary))
        np.testing.assert_allclose(e["border_length"].to_numpy(), expected, rtol=0, atol=1e-9)
        # reference: shapely.length(polygon)
        np.testing.assert_allclose(w.perimeter.to_numpy(), shapely.length(cells), rtol=0, atol=1e-9)
        assert (w.to_edges()["weight"] == 1.0).all()  # common practice: binary contiguity weights are 1


def test_voronoi_rook_is_subset_of_queen_and_symmetric():
    cells = voronoi(500, 21)
    q = vicino_pairs(vicino.contiguity(cells, "queen"))
    r = vicino_pairs(vicino.contiguity(cells, "rook"))
    assert r <= q  # reference: DE-9IM, dim(B∩B) = 1 implies B∩B non-empty
    assert all((j, i) in q for i, j in q)  # reference: shapely intersects is symmetric


# ---------------------------------------------------------------------------
# T-junctions
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("n,seed,step", [(300, 31, 0.003), (700, 32, 0.002)])
def test_densified_voronoi_t_junctions(n, seed, step):
    """Even cells densified: their new vertices sit (nearly) on the odd neighbours' edges."""
    cells = voronoi(n, seed)
    dense = cells.copy()
    even = np.arange(n) % 2 == 0
    dense[even] = shapely.segmentize(cells[even], step)
    assert shapely.get_num_coordinates(dense).sum() > 2 * shapely.get_num_coordinates(cells).sum()
    queen = vicino_pairs(vicino.contiguity(dense, "queen"))
    rook = vicino_pairs(vicino.contiguity(dense, "rook"))
    assert queen == shapely_queen(dense)  # reference: shapely STRtree query(predicate="intersects")
    # Interpolated vertices are mostly off the original edge by an ulp, so
    # exact rook holds only where collinearity is exact. GEOS's relate is
    # not exact for such nearly collinear segments (it reports some
    # stretches that exact arithmetic rejects), so the reference for rook
    # is exact rational arithmetic; shapely must agree wherever it says no.
    exact = exact_rook(dense, queen)
    # Where an interpolated vertex lies an ulp beyond the other edge the
    # boundaries cross and the interiors overlap by a sliver: documented
    # rule, such units are neighbours under rook too.
    # Where a vertex lies an ulp inside the other cell without a proper crossing
    # (its neighbours exactly on the edge) the interiors overlap too: GEOS does
    # not always see it, exact rational arithmetic does.
    overlapping = {(i, j) for i, j in queen if shapely.relate(dense[i], dense[j])[0] != "F"}
    inside = exact_vertex_inside(dense, queen)
    assert exact <= rook <= queen  # reference: exact rational orientation tests; shapely intersects
    # reference: shapely relate (interiors intersect), exact rational point-in-polygon tests
    assert rook <= exact | overlapping | inside
    assert exact <= shapely_rook(
        dense
    )  # reference: shapely relate_pattern "****1****" (GEOS over-reports, never misses)
    # pairs between two odd (undensified) cells keep their exact shared edges
    odd_pairs = {(i, j) for i, j in shapely_rook(cells) if i % 2 and j % 2}
    assert odd_pairs and odd_pairs <= rook  # reference: shapely relate_pattern on the original cells


def test_explicit_t_junction_axis_aligned():
    # A's right edge (2,0)-(2,2) has no vertex at (2,1), where B and C meet.
    big = Polygon([(0, 0), (2, 0), (2, 2), (0, 2)])
    low = Polygon([(2, 0), (3, 0), (3, 1), (2, 1)])
    high = Polygon([(2, 1), (3, 1), (3, 2), (2, 2)])
    geoms = [big, low, high]
    rook = vicino.contiguity(geoms, "rook", weight="border_length", ids=["A", "B", "C"])
    assert set(rook.neighbors_of("A").index) == {"B", "C"}  # reference: shapely relate_pattern "****1****"
    assert shapely.relate_pattern(big, low, "****1****") and shapely.relate_pattern(big, high, "****1****")
    assert rook.neighbors_of("A")["B"] == 1.0  # reference: shapely length of shared border = 1 (exact)
    assert rook.neighbors_of("A")["C"] == 1.0  # reference: shapely length of shared border = 1 (exact)
    assert rook.neighbors_of("B")["C"] == 1.0  # reference: shapely length of shared border = 1 (exact)
    assert shapely_border(geoms, [0, 0, 1], [1, 2, 2]).tolist() == [1.0, 1.0, 1.0]
    np.testing.assert_array_equal(rook.perimeter.to_numpy(), shapely.length(geoms))  # reference: shapely.length


def test_explicit_t_junction_diagonal():
    # B's vertex (2, 1) lies exactly on A's edge (0,0)-(4,2); A has no vertex there.
    a = Polygon([(0, 0), (4, 2), (0, 4)])
    b = Polygon([(0, 0), (4, 0), (4, 2), (2, 1)])
    rook = vicino.contiguity([a, b], "rook", weight="border_length")
    assert rook.nnz == 2  # reference: shapely relate_pattern(a, b, "****1****") is True
    assert shapely.relate_pattern(a, b, "****1****")
    np.testing.assert_allclose(rook.to_edges()["weight"], 2 * np.sqrt(5), rtol=1e-15)  # reference: |(4,2)| = 2 sqrt 5
    np.testing.assert_allclose(rook.to_edges()["weight"], shapely_border([a, b], [0], [1])[0], rtol=1e-15)


def brick_wall(rows: int, width: int, seed: int):
    """Rows of bricks with integer cuts drawn at random: T-junctions everywhere, exact in floats."""
    rng = np.random.default_rng(seed)
    bricks, spans = [], []
    for r in range(rows):
        cuts = np.unique(np.concatenate([[0, width], rng.choice(np.arange(1, width), size=width // 3, replace=False)]))
        for x0, x1 in zip(cuts[:-1], cuts[1:]):
            bricks.append(box(float(x0), float(r), float(x1), float(r + 1)))
            spans.append((r, int(x0), int(x1)))
    return np.array(bricks, dtype=object), spans


def test_brick_wall_t_junctions_exact():
    bricks, spans = brick_wall(12, 30, 41)
    n = len(bricks)
    rook = vicino.contiguity(bricks, "rook", weight="border_length")
    queen = vicino.contiguity(bricks, "queen")
    # reference: integer interval arithmetic (common practice): same row and
    # abutting -> shared vertical edge of length 1; adjacent rows -> shared
    # length = overlap of the x-intervals; queen also takes touching endpoints
    ref_rook, ref_queen = {}, set()
    for i in range(n):
        ri, a0, a1 = spans[i]
        for j in range(n):
            rj, b0, b1 = spans[j]
            if i == j or abs(ri - rj) > 1:
                continue
            if ri == rj:
                if a1 == b0 or b1 == a0:
                    ref_rook[(i, j)] = 1.0
                    ref_queen.add((i, j))
            else:
                overlap = min(a1, b1) - max(a0, b0)
                if overlap > 0:
                    ref_rook[(i, j)] = float(overlap)
                if overlap >= 0:
                    ref_queen.add((i, j))
    assert vicino_pairs(queen) == ref_queen  # reference: integer interval arithmetic
    assert ref_queen == shapely_queen(bricks)  # reference: shapely intersects (cross-check of the reference)
    assert vicino_pairs(rook) == set(ref_rook)  # reference: integer interval arithmetic
    assert set(ref_rook) == shapely_rook(bricks)  # reference: shapely relate_pattern "****1****"
    i, j, e = edges_arrays(rook)
    expected = np.array([ref_rook[(a, b)] for a, b in zip(i.tolist(), j.tolist())])
    # The lengths are whole numbers, but vicino measures a partial overlap as
    # (t_hi - t_lo) * segment length with t = 1/3, 2/3, ..., so the last bits
    # may differ from the exact integer (see the report); 1e-12 relative.
    np.testing.assert_allclose(e["weight"].to_numpy(), expected, rtol=1e-12)  # reference: integer interval arithmetic
    np.testing.assert_allclose(
        expected, shapely_border(bricks, i, j), rtol=0, atol=0
    )  # reference: shapely lengths (exact here)


# ---------------------------------------------------------------------------
# gaps absorbed by the tolerance
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("n,seed", [(300, 51), (1000, 52)])
def test_gaps_closed_by_tolerance(n, seed):
    cells = voronoi(n, seed)
    shrunk = shapely.buffer(cells, -1e-6, join_style="mitre")
    assert (shapely.get_type_id(shrunk) == 3).all() and not shapely.is_empty(shrunk).any()
    assert not shapely_queen(shrunk)  # reference: shapely intersects, the gaps are ~2e-6 wide
    assert vicino.contiguity(shrunk, "queen").nnz == 0  # reference: shapely intersects finds no pair
    assert vicino.contiguity(shrunk, "rook").nnz == 0  # reference: shapely intersects finds no pair

    t = 1e-5
    queen = vicino_pairs(vicino.contiguity(shrunk, "queen", tolerance=t))
    rook = vicino_pairs(vicino.contiguity(shrunk, "rook", tolerance=t))
    tree = shapely.STRtree(shrunk)
    a, b = tree.query(shrunk, predicate="dwithin", distance=t)
    within = set(zip(a[a != b].tolist(), b[a != b].tolist()))
    assert queen == within  # reference: shapely STRtree query(predicate="dwithin", distance=t)

    # Rook: the near-coincident stretch of a shrunk border is the original
    # border within O(t) at its ends, so every original border clearly
    # longer than t (here > 2 t) must give a rook link; short ones may go
    # either way. Nothing outside the queen pairs may be rook.
    orig = sorted(shapely_rook(cells))
    oi, oj = np.array(orig).T
    length = shapely_border(cells, oi, oj)
    long_pairs = {p for p, L in zip(orig, length) if 2 * t < L}
    assert len(long_pairs) > 0.9 * len(orig)
    assert long_pairs <= rook  # reference: shapely relate_pattern + length on the unshrunk cells
    assert rook <= queen  # reference: the rook rule implies the queen rule (documented)


# ---------------------------------------------------------------------------
# regular lattice
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("rows,cols", [(2, 2), (3, 5), (7, 9)])
def test_lattice_counts(rows, cols):
    cells = [box(c, r, c + 1, r + 1) for r in range(rows) for c in range(cols)]
    ids = [(r, c) for r in range(rows) for c in range(cols)]
    rook = vicino.contiguity(cells, "rook", ids=pd.Index(ids, tupleize_cols=False))
    queen = vicino.contiguity(cells, "queen", ids=pd.Index(ids, tupleize_cols=False))

    def kind(r, c):
        border_r, border_c = r in (0, rows - 1), c in (0, cols - 1)
        return "corner" if border_r and border_c else "edge" if border_r or border_c else "interior"

    rook_count = {"interior": 4, "edge": 3, "corner": 2}  # common practice
    queen_count = {"interior": 8, "edge": 5, "corner": 3}  # common practice
    for pos, (r, c) in enumerate(ids):
        assert rook.counts.iloc[pos] == rook_count[kind(r, c)]  # common practice: 4 / 3 / 2
        assert queen.counts.iloc[pos] == queen_count[kind(r, c)]  # common practice: 8 / 5 / 3

    grid = nx.grid_2d_graph(rows, cols)  # nodes (row, col)
    king = nx.strong_product(nx.path_graph(rows), nx.path_graph(cols))
    as_set = lambda w: {(w.ids[i], w.ids[j]) for i, j in vicino_pairs(w)}  # noqa: E731
    assert as_set(rook) == {(u, v) for u, v in grid.edges()} | {
        (v, u) for u, v in grid.edges()
    }  # reference: networkx grid_2d_graph
    assert as_set(queen) == {(u, v) for u, v in king.edges()} | {
        (v, u) for u, v in king.edges()
    }  # reference: networkx strong_product of paths

    _, _, e = edges_arrays(rook)
    assert (e["border_length"] == 1.0).all()  # reference: shapely length of a shared unit edge = 1
    _, _, eq = edges_arrays(queen)
    diagonal = [abs(a[0] - b[0]) == 1 and abs(a[1] - b[1]) == 1 for a, b in zip(eq["source"], eq["target"])]
    assert (eq["border_length"][diagonal] == 0.0).all()  # reference: shapely, corner contact has length 0
    assert (rook.perimeter == 4.0).all()  # reference: shapely.length(unit square) = 4


# ---------------------------------------------------------------------------
# holes, enclaves, multipolygons
# ---------------------------------------------------------------------------
def holes_case():
    hole1 = [(3, 3), (6, 3), (6, 6), (3, 6)]
    hole2 = [(7, 7), (9, 7), (9, 9), (7, 9)]
    outer = Polygon([(0, 0), (10, 0), (10, 10), (0, 10)], [hole1, hole2])
    enclave = Polygon(hole1)  # fills hole 1 exactly
    floating = box(7.5, 7.5, 8.5, 8.5)  # strictly inside hole 2, touching nothing
    multi = MultiPolygon([box(10, 0, 11, 1), box(20, 0, 21, 1)])  # part 1 touches outer, part 2 touches east
    east = box(21, 0, 22, 1)
    corner = box(11, 1, 12, 2)  # touches multi's first part at the point (11, 1) only
    far = box(30, 30, 31, 31)
    names = ["outer", "enclave", "floating", "multi", "east", "corner", "far"]
    return [outer, enclave, floating, multi, east, corner, far], names


def test_holes_enclaves_and_multipolygons():
    geoms, names = holes_case()
    queen = vicino.contiguity(geoms, "queen", ids=names)
    rook = vicino.contiguity(geoms, "rook", ids=names)
    q = {(queen.ids[i], queen.ids[j]) for i, j in vicino_pairs(queen)}
    r = {(rook.ids[i], rook.ids[j]) for i, j in vicino_pairs(rook)}
    ref_q = {(names[i], names[j]) for i, j in shapely_queen(geoms)}
    ref_r = {(names[i], names[j]) for i, j in shapely_rook(geoms)}
    enclave_link = {("outer", "floating"), ("floating", "outer")}
    # the floating unit is in outer's hole without touching it: shapely says disjoint,
    # the documented rule says neighbour under both rules
    assert not shapely.intersects(geoms[0], geoms[2])  # reference: shapely intersects is False here
    assert q == ref_q | enclave_link  # reference: shapely intersects, plus the documented enclave rule
    assert r == ref_r | enclave_link  # reference: shapely relate_pattern "****1****", plus the documented enclave rule
    assert ("outer", "enclave") in r and ("outer", "multi") in r and ("multi", "east") in r  # reference: shapely relate
    assert ("multi", "corner") in q and ("multi", "corner") not in r  # reference: shapely relate (point contact, dim 0)
    assert (
        "outer",
        "east",
    ) not in q  # reference: shapely intersects False: multi's parts do not link their other neighbours
    assert list(queen.islands) == ["far"]  # reference: shapely intersects nothing for "far"

    lengths = rook.to_edges().set_index(["source", "target"])["border_length"]
    hole_perimeter = shapely.length(shapely.get_interior_ring(geoms[0], 0))
    assert hole_perimeter == 12.0  # reference: shapely.length of the 3 x 3 hole ring
    assert lengths[("outer", "enclave")] == hole_perimeter  # reference: shapely length of the filled hole's ring
    assert (
        lengths[("outer", "enclave")] == shapely_border(geoms, [0], [1])[0]
    )  # reference: shapely boundary intersection
    assert lengths[("outer", "multi")] == 1.0  # reference: shapely length of intersection of boundaries
    assert lengths[("multi", "east")] == 1.0  # reference: shapely length of intersection of boundaries
    # documented rule: an enclave shares its whole boundary (a rook link has a positive length)
    assert shapely.intersection(geoms[0].boundary, geoms[2].boundary).length == 0.0  # reference: shapely
    assert lengths[("outer", "floating")] == shapely.length(geoms[2])  # reference: shapely length of the enclave, 4
    # perimeters include holes and every part
    np.testing.assert_array_equal(rook.perimeter.to_numpy(), shapely.length(geoms))  # reference: shapely.length


def test_unit_inside_another_without_hole_is_neighbour():
    big, small = box(0, 0, 10, 10), box(2, 2, 3, 3)
    assert shapely.intersects(big, small) and not shapely.relate_pattern(big, small, "****1****")
    assert vicino.contiguity([big, small], "queen").nnz == 2  # reference: shapely intersects
    assert vicino.contiguity([big, small], "rook").nnz == 2  # documented rule: overlapping units are rook neighbours


def test_crossing_boundaries_are_rook_neighbours():
    a, b = box(0, 0, 2, 2), box(1, 1, 3, 3)
    assert shapely.relate(a, b) == "212101212"  # reference: shapely, boundaries cross at two points
    assert vicino.contiguity([a, b], "queen").nnz == 2  # reference: shapely intersects
    assert vicino.contiguity([a, b], "rook").nnz == 2  # documented rule (mod.rs): crossing boundaries -> neighbours


# ---------------------------------------------------------------------------
# Natural Earth countries
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def countries():
    path = os.path.join(
        os.path.dirname(pyogrio.__file__), "tests", "fixtures", "naturalearth_lowres", "naturalearth_lowres.shp"
    )
    if not os.path.exists(path):
        pytest.skip("pyogrio's Natural Earth fixture is not installed")
    gdf = pyogrio.read_dataframe(path)
    assert "name" in gdf.columns and gdf["name"].is_unique
    return gdf


def test_countries_match_shapely(countries):
    geoms = np.asarray(countries.geometry.values, dtype=object)
    queen = vicino.contiguity(countries, "queen")
    rook = vicino.contiguity(countries, "rook")
    q, r = vicino_pairs(queen), vicino_pairs(rook)
    assert q == shapely_queen(geoms)  # reference: shapely STRtree query(predicate="intersects")
    assert r == shapely_rook(geoms)  # reference: shapely relate_pattern "****1****"
    assert r <= q  # reference: DE-9IM, a dimension-1 boundary contact is a contact
    i, j, e = edges_arrays(rook)
    # reference: shapely.length(intersection(a.boundary, b.boundary))
    np.testing.assert_allclose(e["border_length"].to_numpy(), shapely_border(geoms, i, j), rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(
        rook.perimeter.to_numpy(), shapely.length(geoms), rtol=1e-12
    )  # reference: shapely.length


def test_countries_geography(countries):
    w = vicino.contiguity(countries, "queen", ids=countries["name"])
    assert w.ids.equals(pd.Index(countries["name"]))
    brazil = set(w.neighbors_of("Brazil").index)
    # common practice: every South American country but Chile and Ecuador,
    # with French Guiana inside France's multipolygon
    assert brazil == {
        "Argentina",
        "Bolivia",
        "Colombia",
        "France",
        "Guyana",
        "Paraguay",
        "Peru",
        "Suriname",
        "Uruguay",
        "Venezuela",
    }
    assert len(brazil) == 10  # common practice
    assert shapely.get_type_id(countries.set_index("name").geometry["France"]) == 6  # France is a MultiPolygon here

    geoms = countries.set_index("name").geometry
    for island in [
        "Iceland",
        "Madagascar",
        "New Zealand",
        "Sri Lanka",
        "Japan",
        "Cuba",
        "Jamaica",
        "Taiwan",
        "Australia",
        "Philippines",
    ]:
        others = geoms.drop(island)
        assert not shapely.intersects(geoms[island], others.values).any()  # reference: shapely, an island in this data
        assert len(w.neighbors_of(island)) == 0  # reference: shapely intersects nothing
        assert island in w.islands


def test_countries_ids_from_index(countries):
    gdf = countries.copy()
    gdf.index = pd.Index(gdf.index.to_numpy() * 3 + 100, name="code")
    w = vicino.contiguity(gdf, "rook")
    assert w.ids.equals(gdf.index)  # documented: ids come from the pandas index
    by_pos = vicino.contiguity(countries, "rook")
    assert vicino_pairs(w) == vicino_pairs(by_pos)  # reference: shapely relate (same geometries, same pairs)
    series = vicino.contiguity(gdf.geometry, "rook")
    assert series.ids.equals(gdf.index)  # documented: a GeoSeries's index is used too


# ---------------------------------------------------------------------------
# Cliff-Ord weights
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("a,b", [(1.0, 1.0), (1.0, 2.0), (0.5, 2.0), (2.0, 0.0), (0.0, 1.0)])
def test_cliff_ord_formula(a, b):
    cells = voronoi(150, 61)
    w = vicino.cliff_ord(cells, border_power=a, distance_power=b)
    pairs = np.array(sorted(shapely_rook(cells)))
    i, j = pairs[:, 0], pairs[:, 1]
    share = shapely_border(cells, i, j) / shapely.length(cells)[i]  # b_ij / p_i with shapely
    cen = shapely.centroid(cells)
    d = shapely.distance(cen[i], cen[j])  # centroid distance with shapely
    expected = share**a / d**b  # reference: Cliff and Ord (1981) w_ij = (b_ij / p_i)^a / d_ij^b
    m = w.to_scipy()
    assert vicino_pairs(w) == set(map(tuple, pairs.tolist()))  # reference: shapely relate_pattern "****1****"
    np.testing.assert_allclose(np.asarray(m[i, j]).ravel(), expected, rtol=1e-9)  # reference: formula with shapely
    np.testing.assert_allclose(w.perimeter.to_numpy(), shapely.length(cells), rtol=1e-12)  # reference: shapely.length


def test_cliff_ord_is_asymmetric():
    cells = voronoi(100, 62)
    w = vicino.cliff_ord(cells)
    m = w.to_scipy().toarray()
    p = shapely.length(cells)
    i, j = np.nonzero(m)
    # reference: the formula, w_ij / w_ji = p_j / p_i for a = b = 1
    np.testing.assert_allclose(m[i, j] / m[j, i], p[j] / p[i], rtol=1e-9)
    assert not np.allclose(m, m.T)  # reference: perimeters differ, so the formula is asymmetric
    assert w.recipe[-1].action == "cliff_ord" and w.recipe[-1].params["symmetric"] is False


def test_cliff_ord_great_circle():
    cells = voronoi(120, 63, bounds=(10.0, 44.0, 13.0, 47.0))  # lon/lat degrees
    pairs = np.array(sorted(shapely_rook(cells)))
    i, j = pairs[:, 0], pairs[:, 1]
    cen = shapely.get_coordinates(shapely.centroid(cells))  # centroids in the lon/lat plane

    inv_d = vicino.cliff_ord(cells, border_power=0.0, distance_power=1.0, metric="great_circle")
    d = 1.0 / np.asarray(inv_d.to_scipy()[i, j]).ravel()
    np.testing.assert_allclose(d, haversine(cen[i], cen[j]), rtol=1e-9)  # reference: numpy haversine, R1 = 6371.0088 km

    perimeter_km = np.array([haversine_length(g) for g in cells])
    np.testing.assert_allclose(
        inv_d.perimeter.to_numpy(), perimeter_km, rtol=1e-9
    )  # reference: haversine of ring segments

    share = vicino.cliff_ord(cells, border_power=1.0, distance_power=0.0, metric="great_circle")
    border_km = np.array(
        [haversine_length(shapely.intersection(cells[a].boundary, cells[b].boundary)) for a, b in zip(i, j)]
    )
    got = np.asarray(share.to_scipy()[i, j]).ravel()
    np.testing.assert_allclose(
        got, border_km / perimeter_km[i], rtol=1e-9
    )  # reference: haversine lengths of shapely borders


# ---------------------------------------------------------------------------
# lon/lat input and border-length weights
# ---------------------------------------------------------------------------
def test_lonlat_contiguity_is_topological():
    cells = voronoi(400, 71, bounds=(-20.0, 30.0, 40.0, 70.0))
    assert vicino_pairs(vicino.contiguity(cells, "queen")) == shapely_queen(cells)  # reference: shapely intersects
    assert vicino_pairs(vicino.contiguity(cells, "rook")) == shapely_rook(cells)  # reference: shapely relate_pattern


def test_border_length_weights():
    cells = voronoi(300, 81)
    w = vicino.contiguity(cells, "rook", weight="border_length")
    i, j, e = edges_arrays(w)
    # reference: shapely.length(shapely.intersection(a.boundary, b.boundary))
    np.testing.assert_allclose(e["weight"].to_numpy(), shapely_border(cells, i, j), rtol=0, atol=1e-9)
    assert (e["weight"] > 0).all()  # reference: rook borders have positive shapely length
    with pytest.raises(vicino.InvalidParameterError, match="border_length"):
        vicino.contiguity(cells, "queen", weight="border_length")


def test_empty_geometry_island_among_voronoi():
    cells = voronoi(50, 91).copy()
    cells[7] = Polygon()
    with pytest.warns(UserWarning, match="empty geometry"):
        w = vicino.contiguity(cells, "queen")
    assert 7 in w.islands  # documented: empty geometries become islands
    assert vicino_pairs(w) == shapely_queen(
        cells
    )  # reference: shapely intersects (an empty geometry intersects nothing)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        assert vicino.contiguity(cells, "rook").neighbors_of(7).empty


def test_rook_with_small_tolerance_keeps_lattice_counts():
    cells = [box(c, r, c + 1, r + 1) for r in range(3) for c in range(3)]
    assert vicino_pairs(vicino.contiguity(cells, "rook", tolerance=0.0)) == shapely_rook(cells)
    # reference: shapely relate_pattern "****1****" (corner contacts have dimension 0); common practice 4 / 3 / 2
    assert vicino_pairs(vicino.contiguity(cells, "rook", tolerance=1e-6)) == shapely_rook(cells)
