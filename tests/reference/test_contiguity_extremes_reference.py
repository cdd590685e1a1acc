"""Contiguity and Cliff-Ord weights on hard inputs, checked against shapely (GEOS).

* the candidate structure: units far apart, one huge box beside small ones;
* long shared borders (about linear in the vertices near the border);
* one definition of a link's border length for overlapping units and
  enclaves: |bd A ∩ fill(B)| + |bd B ∩ fill(A)| - |bd A ∩ bd B|, with
  fill(X) the unit with its holes filled (the documented rule, measured
  here with shapely);
* tiny and large coordinates: the same links and exactly scaled lengths
  as at unit scale;
* Cliff-Ord parameters and longitude / latitude ranges.
"""

from __future__ import annotations

import numpy as np
import pytest
import shapely
from _shapes import shapely_queen, voronoi
from shapely import Polygon, box

import vicino


def pairs(w: vicino.Weights) -> set[tuple[int, int]]:
    m = w.to_scipy().tocoo()
    return set(zip(m.row.tolist(), m.col.tolist()))


def shapely_rook(geoms) -> set[tuple[int, int]]:
    """Ordered pairs whose boundaries meet in dimension 1 (DE-9IM ****1****)."""
    geoms = np.asarray(geoms, dtype=object)
    return {(i, j) for i, j in shapely_queen(geoms) if shapely.relate_pattern(geoms[i], geoms[j], "****1****")}


def fill(g):
    """The unit with its holes filled (shapely)."""
    parts = shapely.get_parts(g)
    return shapely.union_all([Polygon(p.exterior) for p in parts])


def shared_length(a, b) -> float:
    """|bd A ∩ fill(B)| + |bd B ∩ fill(A)| - |bd A ∩ bd B|, measured with shapely (GEOS)."""
    return (
        shapely.intersection(a.boundary, fill(b)).length
        + shapely.intersection(b.boundary, fill(a)).length
        - shapely.intersection(a.boundary, b.boundary).length
    )


def border_lengths(w: vicino.Weights) -> dict[tuple[int, int], float]:
    m = w.to_scipy().tocoo()
    lengths = w.to_edges()["border_length"].to_numpy()
    return {(int(i), int(j)): float(v) for i, j, v in zip(m.row, m.col, lengths)}


# ---------------------------------------------------------------------------
# the candidate structure
# ---------------------------------------------------------------------------
def test_units_far_apart_are_not_a_huge_grid():
    # asked for 226 GB and aborted when the grid was sized by the spread
    geoms = [box(0, 0, 1, 1e-6), box(1e14, 0, 1e14 + 1, 1e-6)]
    for rule in ("queen", "rook"):
        assert vicino.contiguity(geoms, rule).nnz == 0  # reference: shapely intersects is False
    assert not shapely.intersects(geoms[0], geoms[1])


def test_one_huge_box_beside_small_ones():
    small = [box(k, 0, k + 1, 1) for k in range(50)] + [box(k, 5, k + 1, 6) for k in range(0, 50, 7)]
    geoms = np.array([*small, box(-1e120, 2, 1e120, 3), box(1e-10, 0.25, 2e-10, 0.5)], dtype=object)
    q = vicino.contiguity(geoms, "queen")
    assert pairs(q) == shapely_queen(geoms)  # reference: shapely STRtree intersects
    r = vicino.contiguity(geoms, "rook")
    # the tiny box lies inside box 0 (documented enclave rule; shapely within)
    assert shapely.within(geoms[-1], geoms[0])
    assert pairs(r) == shapely_rook(geoms) | {(0, len(geoms) - 1), (len(geoms) - 1, 0)}


def test_strung_out_units_match_shapely():
    # units along a line, spread over 1e12, some far, some touching
    xs = np.concatenate([np.arange(40.0), 1e12 + np.arange(40.0)])
    geoms = np.array([box(x, 0, x + 1, 1) for x in xs], dtype=object)
    assert pairs(vicino.contiguity(geoms, "rook")) == shapely_rook(geoms)  # reference: shapely relate_pattern


# ---------------------------------------------------------------------------
# long shared borders
# ---------------------------------------------------------------------------
def long_border_pair(m: int, seed: int, midpoints: bool):
    """Two units sharing one wiggly border of m vertices; with midpoints the
    lower unit has an extra vertex inside every edge of the border (T-junctions)."""
    rng = np.random.default_rng(seed)
    # dyadic coordinates: the midpoints are exact, so they lie exactly on the border
    x = np.arange(m) / 2.0**16
    y = np.round(rng.uniform(-0.25, 0.25, m) * 2**10) / 2**10
    border = np.column_stack([x, y])
    upper = Polygon(np.vstack([border, [[x[-1], 1.0], [0.0, 1.0]]]))
    low = border
    if midpoints:
        mids = 0.5 * (border[:-1] + border[1:])
        low = np.empty((2 * m - 1, 2))
        low[0::2], low[1::2] = border, mids
    lower = Polygon(np.vstack([low[::-1], [[0.0, -1.0], [x[-1], -1.0]]]))
    assert upper.is_valid and lower.is_valid
    return np.array([upper, lower, box(2, 2, 3, 3)], dtype=object)


@pytest.mark.parametrize("m,midpoints", [(20_000, False), (20_000, True), (30_000, False)])
def test_long_shared_border(m, midpoints):
    geoms = long_border_pair(m, m, midpoints)
    w = vicino.contiguity(geoms, "rook", weight="border_length")
    assert pairs(w) == {(0, 1), (1, 0)}  # reference: shapely relate_pattern "****1****"
    assert shapely.relate_pattern(geoms[0], geoms[1], "****1****")
    expected = shapely.intersection(geoms[0].boundary, geoms[1].boundary).length
    # reference: shapely length of the intersection of the two boundaries
    np.testing.assert_allclose(w.to_scipy().toarray()[0, 1], expected, rtol=1e-12)
    assert pairs(vicino.contiguity(geoms, "queen")) == shapely_queen(geoms)  # reference: shapely intersects
    tolerant = vicino.contiguity(geoms, "rook", tolerance=1e-9, weight="border_length")
    assert pairs(tolerant) == {(0, 1), (1, 0)}
    # with a tolerance, stretches within it of a vertex may count too: at most a few t per vertex
    np.testing.assert_allclose(tolerant.to_scipy().toarray()[0, 1], expected, rtol=0, atol=4e-9 * m)


# ---------------------------------------------------------------------------
# one definition of a link: positive border lengths for overlaps and enclaves
# ---------------------------------------------------------------------------
OVERLAPS = {
    "crossing boxes": [box(0, 0, 2, 2), box(1, 1, 3, 3)],
    "box inside box": [box(0, 0, 10, 10), box(2, 2, 3, 3)],
    "cross shape": [box(0, 1, 3, 2), box(1, 0, 2, 3)],
    "triangle across a box": [box(0, 0, 2, 2), Polygon([(1, -1), (3, 1), (1, 3)])],
    "inside a hole": [
        Polygon(box(0, 0, 10, 10).exterior.coords, [box(3, 3, 6, 6).exterior.coords]),
        box(4, 4, 5, 5),
    ],
    "across a hole": [
        Polygon(box(0, 0, 10, 10).exterior.coords, [box(3, 3, 6, 6).exterior.coords]),
        box(2, 4, 5, 5),
    ],
    "filled hole": [Polygon(box(0, 0, 10, 10).exterior.coords, [box(3, 3, 6, 6).exterior.coords]), box(3, 3, 6, 6)],
}


@pytest.mark.parametrize("case", sorted(OVERLAPS))
def test_overlapping_units_share_a_positive_length(case):
    a, b = OVERLAPS[case]
    geoms = [a, b, box(50, 50, 51, 51)]
    expected = shared_length(a, b)  # reference: shapely intersections of boundaries and filled units
    assert expected > 0
    w = vicino.contiguity(geoms, "rook", weight="border_length")
    assert pairs(w) == {(0, 1), (1, 0)}
    np.testing.assert_allclose(border_lengths(w)[(0, 1)], expected, rtol=1e-12)
    assert (w.to_scipy().data > 0).all()
    # islands and standardization agree: the far unit only
    assert list(w.islands) == [2]
    row = w.standardize("row", islands="keep").to_scipy().toarray()
    np.testing.assert_allclose(row.sum(axis=1), [1.0, 1.0, 0.0])  # common practice: rows of linked units sum to 1
    with pytest.raises(vicino.IslandError, match="2"):
        w.standardize("row")
    c = vicino.cliff_ord(geoms, distance_power=0.0)
    perimeter = shapely.length(np.array(geoms, dtype=object))
    # reference: Cliff and Ord (1981) w_ij = b_ij / p_i with shapely lengths
    np.testing.assert_allclose(c.to_scipy().toarray()[0, 1], expected / perimeter[0], rtol=1e-12)
    np.testing.assert_allclose(c.to_scipy().toarray()[1, 0], expected / perimeter[1], rtol=1e-12)
    assert list(c.islands) == [2]


# overlaps whose boundaries touch but never cross properly
TOUCHING_OVERLAPS = {
    # collinear overlapping edges: the top and bottom edges overlap along [1, 2]
    "boxes overlapping along common edges": [box(0, 0, 2, 2), box(1, 0, 3, 2)],
    # one unit inside another, touching its boundary along a segment
    "box inside touching the bottom": [box(0, 0, 10, 10), box(2, 0, 3, 1)],
    "box inside touching two sides": [box(0, 0, 10, 10), box(0, 0, 3, 1)],
    "triangle inside along an edge": [box(0, 0, 4, 4), Polygon([(1, 0), (3, 0), (2, 1)])],
    # overlaps that touch the other boundary only at vertices
    "diamond inscribed in a box": [box(0, 0, 2, 2), Polygon([(1, 0), (2, 1), (1, 2), (0, 1)])],
    "triangle from a corner": [box(0, 0, 2, 2), Polygon([(0, 0), (2, 1), (1, 2)])],
    "triangle inside at one corner": [box(0, 0, 2, 2), Polygon([(2, 2), (1, 1.5), (1.5, 1)])],
    "triangle inside at one edge point": [box(0, 0, 2, 2), Polygon([(1, 0), (1.5, 1), (0.5, 1)])],
    # a multi-part unit: one part inside the other unit, one touching it from outside
    "parts inside and beside": [
        box(0, 0, 2, 2),
        shapely.MultiPolygon([box(0.5, 0.5, 1, 1), box(2, 0, 3, 1)]),
    ],
}


@pytest.mark.parametrize("case", sorted(TOUCHING_OVERLAPS))
@pytest.mark.parametrize("tolerance", [0.0, 1e-9])
def test_overlap_where_boundaries_only_touch(case, tolerance):
    a, b = TOUCHING_OVERLAPS[case]
    # the boundaries meet (at vertices or along stretches, never crossing properly)
    assert shapely.intersects(a.boundary, b.boundary)
    expected = shared_length(a, b)  # reference: shapely intersections of boundaries and filled units
    assert expected > shapely.intersection(a.boundary, b.boundary).length
    for u, v in ((a, b), (b, a)):
        w = vicino.contiguity([u, v, box(50, 50, 51, 51)], "rook", weight="border_length", tolerance=tolerance)
        assert pairs(w) == {(0, 1), (1, 0)}
        np.testing.assert_allclose(border_lengths(w)[(0, 1)], expected, rtol=1e-12)
        assert pairs(vicino.contiguity([u, v], "queen", tolerance=tolerance)) == {(0, 1), (1, 0)}


def test_overlap_along_common_edges_is_the_perimeter_of_the_overlap():
    a, b = box(0, 0, 2, 2), box(1, 0, 3, 2)
    w = vicino.contiguity([a, b], "rook", weight="border_length")
    # reference: shapely, the boundary of the overlap a ∩ b (the box [1, 2] x [0, 2]), 6
    assert w.to_scipy().data.tolist() == [shapely.intersection(a, b).boundary.length] * 2


@pytest.mark.parametrize(
    "a,b",
    [
        (box(0, 0, 1, 1), box(1, 0, 2, 1)),  # a common edge
        (box(0, 0, 1, 1), box(1, 0.25, 2, 0.75)),  # part of an edge
        (box(0, 0, 1, 1), Polygon([(1, 0), (2, 0.5), (1, 1)])),  # a triangle on an edge, outside
        (box(0, 0, 1, 1), box(0, 0, 1, 1)),  # identical units
    ],
)
def test_units_that_touch_from_outside_keep_their_common_border(a, b):
    w = vicino.contiguity([a, b], "rook", weight="border_length")
    # reference: shapely length of the intersection of the two boundaries
    np.testing.assert_allclose(w.to_scipy().data, [shapely.intersection(a.boundary, b.boundary).length] * 2)
    assert shared_length(a, b) == pytest.approx(shapely.intersection(a.boundary, b.boundary).length)


def test_enclave_shares_its_perimeter():
    outer, inner = box(0, 0, 10, 10), box(2, 2, 3, 3)
    w = vicino.contiguity([outer, inner], "rook", weight="border_length")
    assert w.to_scipy().data.tolist() == [inner.length] * 2  # reference: shapely length of the inner unit, 4


def test_stored_weights_are_never_zero_on_voronoi_with_overlaps():
    cells = voronoi(200, 5)
    # shift some cells so that they overlap their neighbours
    moved = cells.copy()
    moved[::7] = shapely.transform(cells[::7], lambda c: c + 0.003)
    w = vicino.contiguity(moved, "rook", weight="border_length")
    assert (w.to_scipy().data > 0).all()
    for i, j in list(pairs(w))[:200]:
        # reference: shapely intersections (the documented definition)
        np.testing.assert_allclose(border_lengths(w)[(i, j)], shared_length(moved[i], moved[j]), rtol=1e-9, atol=1e-12)


# ---------------------------------------------------------------------------
# tiny and large coordinates
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("exp", [-565, -400, 300, 490])
def test_scaled_polygons_give_the_same_links_and_scaled_lengths(exp):
    cells = voronoi(120, 11)
    scaled = shapely.transform(cells, lambda c: np.ldexp(c, exp))
    for rule, tol in (("queen", 0.0), ("rook", 0.0), ("rook", 1e-9)):
        w1 = vicino.contiguity(cells, rule, tolerance=tol)
        ws = vicino.contiguity(scaled, rule, tolerance=float(np.ldexp(tol, exp)))
        assert pairs(ws) == pairs(w1)
        if rule == "rook" and tol == 0.0:
            assert pairs(w1) == shapely_rook(cells)  # reference: shapely relate_pattern at unit scale
        # reference: shapely lengths at unit scale, scaled exactly by 2^exp
        e1, es = w1.to_edges()["border_length"].to_numpy(), ws.to_edges()["border_length"].to_numpy()
        np.testing.assert_allclose(es, np.ldexp(e1, exp), rtol=1e-12)
        np.testing.assert_allclose(ws.perimeter.to_numpy(), np.ldexp(shapely.length(cells), exp), rtol=1e-12)
    for a, b in ((1.0, 1.0), (1.0, 2.0)):
        c1 = vicino.cliff_ord(cells, border_power=a, distance_power=b).to_scipy()
        if -exp * b > 1000:  # weights beyond 1e308: refused, not stored as infinity
            with pytest.raises(vicino.InvalidMatrixError, match="Cliff-Ord weight"):
                vicino.cliff_ord(scaled, border_power=a, distance_power=b)
            continue
        cs = vicino.cliff_ord(scaled, border_power=a, distance_power=b).to_scipy()
        # reference: Cliff and Ord (1981), d scales by 2^exp so w by 2^(-exp b)
        np.testing.assert_allclose(cs.toarray(), c1.toarray() * 2.0 ** (-exp * b), rtol=1e-9)


def test_tiny_beside_large_coordinates_are_refused():
    geoms = [box(0, 0, 1, 1), box(1, 0, 2, 1e-150)]
    with pytest.raises(vicino.InvalidInputError, match="smaller than the largest"):
        vicino.contiguity(geoms, "rook")


def test_tiny_tolerance_at_tiny_scale_keeps_corners_out():
    s = 2.0**-300
    geoms = [box(0, 0, s, s), box(s, 0, 2 * s, s), box(2 * s, s, 3 * s, 2 * s)]
    w = vicino.contiguity(geoms, "rook", tolerance=0.1 * s)
    unit = [box(0, 0, 1, 1), box(1, 0, 2, 1), box(2, 1, 3, 2)]
    assert pairs(w) == shapely_rook(unit)  # reference: shapely relate_pattern (corner contact has dimension 0)


# ---------------------------------------------------------------------------
# Cliff-Ord parameters
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("name", ["border_power", "distance_power"])
@pytest.mark.parametrize("value", [float("nan"), float("inf"), -float("inf"), -1.0, -1e-300])
def test_cliff_ord_refuses_unusable_powers(name, value):
    with pytest.raises(vicino.InvalidParameterError, match=name):
        vicino.cliff_ord([box(0, 0, 1, 1), box(1, 0, 2, 1)], **{name: value})


def test_large_powers_give_finite_weights_or_a_clear_refusal():
    cells = voronoi(60, 21)
    rook = sorted(shapely_rook(cells))
    i, j = np.array(rook).T
    share = shapely.length(shapely.intersection(shapely.boundary(cells[i]), shapely.boundary(cells[j])))
    share = share / shapely.length(cells)[i]
    cen = shapely.centroid(cells)
    d = shapely.distance(cen[i], cen[j])
    # distances of about 0.1 and shares of about 1/6: (1/6)^200 and 0.1^-200 are in range
    w = vicino.cliff_ord(cells, border_power=60.0, distance_power=60.0).to_scipy()
    log_ref = 60.0 * np.log(share) - 60.0 * np.log(d)  # reference: the formula in log space with shapely measures
    np.testing.assert_allclose(np.log(np.asarray(w[i, j]).ravel()), log_ref, rtol=1e-9)
    assert np.isfinite(w.data).all() and (w.data > 0).all()
    with pytest.raises(vicino.InvalidMatrixError, match="Cliff-Ord weight"):
        vicino.cliff_ord(cells, border_power=1.0, distance_power=1e6)


def test_cliff_ord_great_circle_checks_longitude_and_latitude():
    good = [box(10, 40, 11, 41), box(11, 40, 12, 41)]
    assert vicino.cliff_ord(good, metric="great_circle").nnz == 2  # reference: shapely relate, one shared edge
    with pytest.raises(vicino.InvalidInputError, match="latitude"):
        vicino.cliff_ord([box(10, 89, 11, 91), box(11, 89, 12, 90)], metric="great_circle")
    with pytest.raises(vicino.InvalidInputError, match="longitude"):
        vicino.cliff_ord([box(359, 0, 361, 1), box(358, 0, 359, 1)], metric="great_circle")
    # longitudes up to 360 are accepted (the other spelling of -180..0)
    assert vicino.cliff_ord([box(300, 0, 301, 1), box(301, 0, 302, 1)], metric="great_circle").nnz == 2
