"""Properties of the polygon builders: contiguity and cliff_ord.

Units are random guillotine partitions of an integer box (shared borders
with and without matching vertices, corner-only contacts, gaps, multi-part
units, empty units), scaled exactly by powers of two and shifted by integer
offsets. Queen and rook links, shared border lengths, perimeters and
Cliff-Ord weights must equal what shapely (GEOS) finds on the unscaled
units; a tolerance below the grid spacing must change no link; invalid
geometries and parameters must be refused.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import shapely
from _oracles import csr_of, link_set
from _strategies import (
    attempt,
    bad_floats,
    not_numbers,
    refused,
    succeeded,
    tilings,
    unknown_options,
)
from hypothesis import given
from hypothesis import strategies as st

import vicino

SCALES = (0, 0, 0, -4, 5, -300, -560, 340, 400)
FORMS = ("list", "array", "geoseries", "geodataframe", "series")


def polygon_input(geoms: np.ndarray, form: str, ids: pd.Index | None):
    """The polygons as users hold them, with the keyword arguments and the ids to expect."""
    index = ids if ids is not None else pd.RangeIndex(len(geoms))
    kw = {} if ids is None else {"ids": ids}
    if form == "list":
        return list(geoms), kw, index
    if form == "array":
        return geoms, kw, index
    import geopandas

    if form == "geoseries":
        return geopandas.GeoSeries(geoms, index=index), {}, index
    if form == "geodataframe":
        return geopandas.GeoDataFrame({"v": np.arange(len(geoms))}, geometry=list(geoms), index=index), {}, index
    return pd.Series(list(geoms), index=index), {}, index


def shapely_contacts(geoms: np.ndarray):
    """Queen and rook pairs and shared border lengths, from shapely (GEOS) predicates:
    intersects (a common point), relate "****1****" (boundaries meet along a line) or
    "T********" (interiors overlap)."""
    n = len(geoms)
    queen, rook, border = set(), set(), {}
    for i in range(n):
        for j in range(i + 1, n):
            a, b = geoms[i], geoms[j]
            if a.is_empty or b.is_empty or not shapely.intersects(a, b):
                continue
            queen |= {(i, j), (j, i)}
            if shapely.relate_pattern(a, b, "****1****") or shapely.relate_pattern(a, b, "T********"):
                rook |= {(i, j), (j, i)}
                border[(i, j)] = border[(j, i)] = shapely.intersection(a.boundary, b.boundary).length
    return queen, rook, border


def weights_by_pair(w: vicino.Weights) -> dict[tuple[int, int], float]:
    m = csr_of(w)
    return {
        (i, int(j)): float(v)
        for i in range(w.n)
        for j, v in zip(m.indices[m.indptr[i] : m.indptr[i + 1]], m.data[m.indptr[i] : m.indptr[i + 1]], strict=True)
    }


# ---------------------------------------------------------------------------
# contiguity
# ---------------------------------------------------------------------------
@given(t=tilings(scales=SCALES), form=st.sampled_from(FORMS), named=st.booleans())
def test_contiguity_matches_shapely(t, form, named):
    ids = pd.Index([f"d{k}" for k in range(t.n)]) if named else None
    obj, kw, index = polygon_input(t.shapes(), form, ids)
    plain = t.shapes(scaled=False)
    queen, rook, border = shapely_contacts(plain)  # reference: shapely (GEOS) on the unscaled units
    q = succeeded(attempt(vicino.contiguity, obj, "queen", **kw), form)
    assert q.ids.equals(index)
    assert link_set(q.to_dense()) == queen
    assert set(np.flatnonzero(q.counts.to_numpy() == 0)) >= set(t.empty)  # empty units are islands
    r = succeeded(attempt(vicino.contiguity, obj, "rook", **kw), form)
    assert link_set(r.to_dense()) == rook
    assert rook <= queen
    lengths = succeeded(attempt(vicino.contiguity, obj, "rook", weight="border_length", **kw))
    got = weights_by_pair(lengths)
    assert set(got) == rook
    for pair, value in got.items():
        # reference: shapely length of the intersection of the two boundaries (scaled exactly by 2^exp)
        assert value == pytest.approx(np.ldexp(border[pair], t.exp), rel=1e-12, abs=0)
    # reference: shapely length (perimeter) of each unit
    np.testing.assert_allclose(
        r.perimeter.to_numpy(), np.ldexp(shapely.length(plain).astype(np.float64), t.exp), rtol=1e-12
    )


@given(t=tilings(scales=SCALES), rule=st.sampled_from(["queen", "rook"]), fraction=st.sampled_from([1e-9, 1e-3, 0.2]))
def test_small_tolerance_changes_no_link_of_exact_borders(t, rule, fraction):
    geoms = t.shapes()
    # the grid spacing is 2^exp (1/2 with extra midpoint vertices): gaps are wider than the tolerance
    tolerance = float(np.ldexp(fraction, t.exp))
    exact = succeeded(attempt(vicino.contiguity, geoms, rule))
    tolerant = succeeded(attempt(vicino.contiguity, geoms, rule, tolerance=tolerance))
    queen, rook, _ = shapely_contacts(t.shapes(scaled=False))  # reference: shapely (GEOS)
    assert link_set(tolerant.to_dense()) == link_set(exact.to_dense()) == (queen if rule == "queen" else rook)


# ---------------------------------------------------------------------------
# Cliff-Ord weights
# ---------------------------------------------------------------------------
@given(
    t=tilings(scales=SCALES),
    border_power=st.sampled_from([0.0, 0.5, 1.0, 2.0]),
    distance_power=st.sampled_from([0.0, 1.0, 2.0, 3.0]),
)
def test_cliff_ord_matches_shapely(t, border_power, distance_power):
    plain = t.shapes(scaled=False)
    _, rook, border = shapely_contacts(plain)  # reference: shapely (GEOS) on the unscaled units
    perimeter = shapely.length(plain)
    centre = shapely.get_coordinates(shapely.centroid(plain))
    full = np.full((t.n, 2), np.nan)
    full[~shapely.is_empty(plain)] = centre
    out = attempt(vicino.cliff_ord, t.shapes(), border_power=border_power, distance_power=distance_power)
    dist = {p: float(np.hypot(*(full[p[0]] - full[p[1]]))) for p in rook}
    if distance_power != 0 and any(d == 0 for d in dist.values()):
        refused(out, vicino.InvalidParameterError)  # neighbours with one centroid: infinite weight
        return
    # reference: Cliff and Ord (1981) w_ij = (b_ij / p_i)^a / d_ij^b, with shapely lengths and centroids
    ref = {(i, j): (border[(i, j)] / perimeter[i]) ** border_power / dist[(i, j)] ** distance_power for i, j in rook}
    # the weights of the scaled units are 2^(-exp b) times these: beyond the normal floats, a refusal
    log2 = [np.log2(v) - t.exp * distance_power for v in ref.values()]
    if log2 and (max(log2) >= 1024 or min(log2) < -1022):
        refused(out, vicino.InvalidMatrixError)
        return
    w = succeeded(out)
    got = weights_by_pair(w)
    assert set(got) == rook
    for pair, value in got.items():
        assert value == pytest.approx(ref[pair] * 2.0 ** (-t.exp * distance_power), rel=1e-9, abs=0)


def haversine_pairs(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Great-circle distances in km between rows of (lon, lat) degrees (haversine, R1 = 6371.0088 km)."""
    lam1, phi1, lam2, phi2 = map(np.radians, (a[:, 0], a[:, 1], b[:, 0], b[:, 1]))
    h = np.sin((phi2 - phi1) / 2) ** 2 + np.cos(phi1) * np.cos(phi2) * np.sin((lam2 - lam1) / 2) ** 2
    return 2 * 6371.0088 * np.arcsin(np.sqrt(np.clip(h, 0, 1)))


def great_circle_length(geom) -> float:
    """Sum of the great-circle lengths of the straight (lon, lat) segments of a geometry's lines."""
    total = 0.0
    for part in shapely.get_parts(shapely.line_merge(geom) if geom.geom_type != "Polygon" else geom.boundary):
        for ring in [part] if part.geom_type != "Polygon" else [part.exterior, *part.interiors]:
            xy = shapely.get_coordinates(ring)
            total += haversine_pairs(xy[:-1], xy[1:]).sum()
    return total


@given(
    t=tilings(scales=(0,)),
    lon0=st.integers(-170, 160),
    lat0=st.integers(-80, 70),
    cell=st.sampled_from([1.0, 0.125]),
    border_power=st.sampled_from([0.0, 1.0]),
    distance_power=st.sampled_from([0.0, 1.0, 2.0]),
)
def test_cliff_ord_on_the_sphere_matches_haversine(t, lon0, lat0, cell, border_power, distance_power):
    plain = t.shapes(scaled=False)
    geoms = shapely.transform(plain, lambda c: c * cell + np.array([lon0, lat0]))
    _, rook, _ = shapely_contacts(plain)  # reference: shapely (GEOS), topology as in the plane
    out = attempt(
        vicino.cliff_ord, geoms, border_power=border_power, distance_power=distance_power, metric="great_circle"
    )
    centre = np.full((t.n, 2), np.nan)
    live = ~shapely.is_empty(geoms)
    centre[live] = shapely.get_coordinates(shapely.centroid(geoms[live]))
    dist = {(i, j): float(haversine_pairs(centre[[i]], centre[[j]])[0]) for i, j in rook}
    if distance_power != 0 and any(d == 0 for d in dist.values()):
        refused(out, vicino.InvalidParameterError)
        return
    w = succeeded(out)
    # reference: haversine great-circle lengths of each segment of the boundary
    perimeter = np.array([great_circle_length(g) if not g.is_empty else 0.0 for g in geoms])
    np.testing.assert_allclose(w.perimeter.to_numpy(), perimeter, rtol=1e-9, atol=0)
    got = weights_by_pair(w)
    assert set(got) == rook
    for (i, j), value in got.items():
        shared = great_circle_length(shapely.intersection(geoms[i].boundary, geoms[j].boundary))
        # reference: Cliff and Ord (1981) with haversine lengths and distances between planar centroids;
        # a stretch that covers part of a segment is measured as that share of the segment's arc
        ref = (shared / perimeter[i]) ** border_power / dist[(i, j)] ** distance_power
        assert value == pytest.approx(ref, rel=1e-9 if border_power == 0 else 5e-3, abs=0)


# ---------------------------------------------------------------------------
# enclaves, overlaps and broken geometry
# ---------------------------------------------------------------------------
@given(size=st.integers(4, 20), data=st.data())
def test_a_unit_inside_a_hole_is_a_neighbour(size, data):
    a, b = data.draw(st.integers(1, size - 3)), data.draw(st.integers(1, size - 3))
    hole = shapely.box(a, b, a + 2, b + 2)
    outer = shapely.Polygon(shapely.box(0, 0, size, size).exterior.coords, [hole.exterior.coords])
    inner = data.draw(st.sampled_from([hole, shapely.box(a + 0.5, b + 0.5, a + 1.5, b + 1.5)]))
    far = shapely.box(size + 5, 0, size + 6, 1)
    for rule in ("queen", "rook"):
        w = succeeded(attempt(vicino.contiguity, [outer, inner, far], rule))
        # documented rule; reference: shapely, the inner unit lies within the outer unit's exterior ring
        assert shapely.within(inner, shapely.Polygon(outer.exterior))
        assert link_set(w.to_dense()) == {(0, 1), (1, 0)}


@given(t=tilings(max_units=6, multipart=False), data=st.data())
def test_broken_geometry_is_refused_or_handled(t, data):
    geoms = list(t.shapes())
    i = data.draw(st.integers(0, len(geoms) - 1))
    kind = data.draw(st.sampled_from(["bowtie", "flat", "copy", "spike", "repeated_vertices", "z"]))
    if kind == "bowtie":
        geoms[i] = shapely.Polygon([(0, 0), (2, 2), (2, 0), (0, 2), (0, 0)])
    elif kind == "flat":
        geoms[i] = shapely.Polygon([(0, 0), (1, 0), (3, 0), (0, 0)])
    elif kind == "copy":
        geoms.append(geoms[0])
    elif kind == "spike":
        geoms[i] = shapely.Polygon([(0, 0), (4, 0), (4, 1), (9, 1), (4, 1), (0, 1)])
    elif kind == "repeated_vertices":
        geoms[i] = shapely.Polygon([(0, 0), (0, 0), (1, 0), (1, 0), (1, 1), (0, 1), (0, 0)])
    else:
        geoms[i] = shapely.force_3d(geoms[i], 5.0)
    for call in (
        lambda: vicino.contiguity(geoms, "queen"),
        lambda: vicino.contiguity(geoms, "rook", tolerance=0.01),
        lambda: vicino.cliff_ord(geoms),
    ):
        out = attempt(call)
        if out.ok:
            w = out.value
            assert w.n == len(geoms)
            assert (w.to_dense() > 0).sum() == (w.to_dense().T > 0).sum()
            assert np.isfinite(w.to_scipy().data).all() and (w.to_scipy().data > 0).all()
    if kind in ("copy", "repeated_vertices", "z"):
        # valid units: reference shapely (GEOS), overlapping copies are neighbours under both rules
        queen, _, _ = shapely_contacts(np.array([shapely.force_2d(g) for g in geoms], dtype=object))
        assert link_set(succeeded(attempt(vicino.contiguity, geoms, "queen")).to_dense()) == queen


# ---------------------------------------------------------------------------
# refusals
# ---------------------------------------------------------------------------
@st.composite
def bad_polygons(draw):
    t = draw(tilings(max_units=6, multipart=False))
    geoms = list(t.shapes())
    i = draw(st.integers(0, len(geoms) - 1))
    kind = draw(
        st.sampled_from(
            [
                "none",
                "point",
                "line",
                "ring",
                "multipoint",
                "multiline",
                "collection",
                "number",
                "text",
                "nan",
                "inf",
                "huge",
                "empty_list",
                "two_d",
                "frame_without_geometry",
                "string",
                "scalar",
            ]
        )
    )
    if kind in ("none", "point", "line", "ring", "multipoint", "multiline", "collection", "number", "text"):
        geoms[i] = {
            "none": None,
            "point": shapely.Point(0, 0),
            "line": shapely.LineString([(0, 0), (1, 1)]),
            "ring": shapely.LinearRing([(0, 0), (1, 0), (1, 1)]),
            "multipoint": shapely.MultiPoint([(0, 0), (1, 1)]),
            "multiline": shapely.MultiLineString([[(0, 0), (1, 1)]]),
            "collection": shapely.GeometryCollection([shapely.box(0, 0, 1, 1), shapely.Point(5, 5)]),
            "number": 3,
            "text": "POLYGON ((0 0, 1 0, 1 1, 0 0))",
        }[kind]
        return geoms, kind
    if kind in ("nan", "inf", "huge"):
        value = {"nan": np.nan, "inf": np.inf, "huge": 1e300}[kind]
        geoms[i] = shapely.Polygon([(0, 0), (value, 0), (1, 1), (0, 0)])
        return geoms, kind
    if kind == "empty_list":
        return draw(st.sampled_from([[], np.array([], dtype=object), pd.Series([], dtype=object)])), kind
    if kind == "two_d":
        return np.array(geoms, dtype=object).reshape(1, -1), kind
    if kind == "frame_without_geometry":
        return pd.DataFrame({"shape": geoms}), kind
    if kind == "string":
        return "POLYGON ((0 0, 1 0, 1 1, 0 0))", kind
    return draw(st.sampled_from([None, 3.0, shapely.box(0, 0, 1, 1)])), kind


@given(case=bad_polygons())
def test_polygon_builders_refuse_invalid_geometries(case):
    geoms, reason = case
    for call in (lambda: vicino.contiguity(geoms), lambda: vicino.cliff_ord(geoms)):
        refused(attempt(call), vicino.InvalidInputError, vicino.InvalidTypeError, what=reason)


@given(t=tilings(max_units=6), data=st.data())
def test_polygon_builders_refuse_bad_parameters(t, data):
    geoms = t.shapes()
    which = data.draw(st.sampled_from(["rule", "weight", "border_on_queen", "tolerance", "metric", "ids", "power"]))
    if which == "rule":
        out = attempt(vicino.contiguity, geoms, data.draw(unknown_options(("queen", "rook"))))
    elif which == "weight":
        out = attempt(vicino.contiguity, geoms, "rook", weight=data.draw(unknown_options(("binary", "border_length"))))
    elif which == "border_on_queen":
        out = attempt(vicino.contiguity, geoms, "queen", weight="border_length")
    elif which == "tolerance":
        bad = data.draw(st.one_of(bad_floats(), not_numbers(), st.booleans(), st.just(10**400)))
        call = data.draw(st.sampled_from([vicino.contiguity, vicino.cliff_ord]))
        out = attempt(call, geoms, tolerance=bad)
    elif which == "metric":
        out = attempt(vicino.cliff_ord, geoms, metric=data.draw(unknown_options(("euclidean", "great_circle"))))
    elif which == "ids":
        n = len(geoms)
        bad = data.draw(st.sampled_from([list(range(n + 1)), [0] * (n + 1), "abc", [None] * n, [[0]] * n]))
        out = attempt(vicino.contiguity, geoms, ids=bad)
    else:
        name = data.draw(st.sampled_from(["border_power", "distance_power"]))
        bad = data.draw(st.one_of(not_numbers(), st.booleans(), st.just(10**400)))
        out = attempt(vicino.cliff_ord, geoms, **{name: bad})
    refused(out, vicino.InvalidParameterError, vicino.IdError)


@given(t=tilings(max_units=8), data=st.data())
def test_cliff_ord_refuses_unusable_powers(t, data):
    name = data.draw(st.sampled_from(["border_power", "distance_power"]))
    bad = data.draw(bad_floats())
    refused(attempt(vicino.cliff_ord, t.shapes(), **{name: bad}), vicino.InvalidParameterError)


# ---------------------------------------------------------------------------
# regressions: minimal cases of bugs fixed (each once a strict xfail)
# ---------------------------------------------------------------------------
def _squares(scale: float) -> list:
    # two unit squares sharing an edge, and a third meeting the second at a corner only
    return [
        shapely.box(0, 0, scale, scale),
        shapely.box(scale, 0, 2 * scale, scale),
        shapely.box(2 * scale, scale, 3 * scale, 2 * scale),
    ]


def test_bug_rook_loses_links_of_tiny_polygons():
    w = vicino.contiguity(_squares(2.0**-560), "rook")  # about 2.6e-169: queen finds the links
    _, rook, _ = shapely_contacts(np.array(_squares(1.0), dtype=object))  # reference: shapely (GEOS)
    assert link_set(w.to_dense()) == rook
    assert (w.perimeter > 0).all()


def test_bug_rook_with_tolerance_links_tiny_corners():
    s = 2.0**-300  # about 4.9e-91
    w = vicino.contiguity(_squares(s), "rook", tolerance=0.1 * s)
    _, rook, _ = shapely_contacts(np.array(_squares(1.0), dtype=object))  # reference: shapely (GEOS)
    assert link_set(w.to_dense()) == rook  # units 1 and 2 meet at a corner only


def test_bug_cliff_ord_of_tiny_polygons():
    out = attempt(vicino.cliff_ord, _squares(2.0**-400))  # about 3.9e-121
    assert out.ok, out.error  # "centroids coincide", yet they are one square apart
    _, rook, _ = shapely_contacts(np.array(_squares(1.0), dtype=object))  # reference: shapely (GEOS)
    assert link_set(out.value.to_dense()) == rook


def test_bug_cliff_ord_of_large_polygons():
    w = vicino.cliff_ord(_squares(2.0**400))  # about 2.6e120, well below the 1e150 limit of coordinates
    _, rook, _ = shapely_contacts(np.array(_squares(1.0), dtype=object))  # reference: shapely (GEOS)
    assert link_set(w.to_dense()) == rook


def test_bug_rook_with_tolerance_loses_partial_edges_of_large_polygons():
    s = 2.0**300  # about 2e90
    units = [shapely.box(0, s, s, 2 * s), shapely.box(0, 0, 2 * s, s)]
    w = vicino.contiguity(units, "rook", tolerance=0.1 * s)
    # the top edge of the lower unit runs along the whole bottom edge of the other; reference: shapely (GEOS)
    _, rook, _ = shapely_contacts(np.array([shapely.box(0, 1, 1, 2), shapely.box(0, 0, 2, 1)], dtype=object))
    assert link_set(w.to_dense()) == rook


def test_bug_cliff_ord_accepts_a_nan_power():
    out = attempt(vicino.cliff_ord, _squares(1.0), border_power=float("nan"))
    refused(out, vicino.InvalidParameterError)
