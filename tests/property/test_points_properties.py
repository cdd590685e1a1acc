"""Properties of the point builders: k_nearest and within_distance.

Valid points (integer grids scaled exactly by powers of two from 2^-1070 to
2^470, arbitrary floats, longitude / latitude) must give the neighbours and
distances of a brute-force search; invalid points and parameters must be
refused with a VicinoError.
"""

from __future__ import annotations

import warnings
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from _oracles import (
    canonical_lonlat,
    csr_of,
    duplicate_units,
    euclidean_distances,
    exact_squared_distances,
    haversine_km,
    kdtree_sorted_distances,
    kdtree_within,
    nearest_by_distance_then_position,
)
from _strategies import (
    POINT_FORMS,
    attempt,
    bad_floats,
    bad_points,
    bad_whole_numbers,
    beyond_64_bits,
    float_points,
    grid_points,
    id_choices,
    lonlat_points,
    not_numbers,
    open_bug,
    point_input,
    refused,
    succeeded,
    unknown_options,
)
from hypothesis import assume, given
from hypothesis import strategies as st

import vicino


def rows_of(w: vicino.Weights) -> list[list[int]]:
    m = csr_of(w)
    return [m.indices[m.indptr[i] : m.indptr[i + 1]].tolist() for i in range(w.n)]


def distances_of(w: vicino.Weights) -> list[np.ndarray]:
    m = csr_of(w)
    d = w.to_edges()["distance"].to_numpy()
    return [d[m.indptr[i] : m.indptr[i + 1]] for i in range(w.n)]


def subnormal_ulp(pts) -> float:
    """Distances of points at subnormal scale are rounded to a subnormal: one unit of 2^-1074."""
    return 2.0**-1074 if pts.exp < -1022 else 0.0


def refused_for_span(xy: np.ndarray, metric: str = "euclidean") -> bool:
    """vicino's documented limit: a non-zero coordinate more than about 10^138 (2^459) times
    smaller than the largest cannot be told apart from 0 and is refused. Euclidean coordinates
    are first scaled by a power of two near the largest; longitude / latitude never are (and are
    first brought to one spelling of each place)."""
    a = np.abs(xy if metric == "euclidean" else canonical_lonlat(xy)).ravel()
    largest = a.max(initial=0.0)
    if largest == 0:
        return False
    smallest = a[a > 0].min()
    if smallest >= 2.0**-459 and largest >= 2.0**-63:
        return False
    shift = -(int(np.frexp(largest)[1]) - 1) if metric == "euclidean" else 0
    return bool(np.ldexp(smallest, shift) < 2.0**-459)


# ---------------------------------------------------------------------------
# k nearest
# ---------------------------------------------------------------------------
@given(pts=grid_points(), data=st.data())
def test_k_nearest_matches_exact_brute_force(pts, data):
    k = data.draw(st.integers(1, pts.n - 1), label="k")
    form = data.draw(st.sampled_from(POINT_FORMS), label="form")
    inp = point_input(pts.xy, form, data.draw(id_choices(pts.n)), pts.ints if pts.exp == 0 else None)
    w = succeeded(attempt(vicino.k_nearest, inp.obj, k, **inp.kwargs), form)
    assert w.ids.equals(inp.ids)
    d2 = exact_squared_distances(pts.ints)
    # reference: NumPy brute force on exact integer squared distances, ties to the lower position
    assert rows_of(w) == nearest_by_distance_then_position(d2, k)
    r, c = np.nonzero(w.to_dense())
    expected = np.ldexp(np.sqrt(d2[r, c].astype(np.float64)), pts.exp)
    # reference: NumPy brute force (scaling by 2^exp is exact, but for rounding to a subnormal)
    np.testing.assert_allclose(w.to_edges()["distance"].to_numpy(), expected, rtol=0, atol=subnormal_ulp(pts))
    kd = kdtree_sorted_distances(pts.xy, k)
    for i, d in enumerate(distances_of(w)):
        # reference: scipy cKDTree (k + 1 nearest of all points, the unit itself first at distance 0)
        np.testing.assert_allclose(np.sort(d), kd[i, 1:], rtol=1e-12, atol=0)
    assert (w.counts == k).all()
    np.testing.assert_array_equal(w.to_scipy().data, 1.0)


@given(xy=float_points(), data=st.data())
def test_k_nearest_of_any_floats_matches_kdtree(xy, data):
    n = len(xy)
    k = data.draw(st.integers(1, n - 1), label="k")
    out = attempt(vicino.k_nearest, xy, k)
    if refused_for_span(xy):
        refused(out, vicino.InvalidInputError)
        return
    w = succeeded(out)
    d = euclidean_distances(xy)  # reference: NumPy brute force
    kd = kdtree_sorted_distances(xy, k)
    for i, (nb, dist) in enumerate(zip(rows_of(w), distances_of(w), strict=True)):
        assert len(nb) == k and i not in nb
        np.testing.assert_allclose(dist, d[i, nb], rtol=1e-12, atol=0)
        # reference: scipy cKDTree
        np.testing.assert_allclose(np.sort(dist), kd[i, 1:], rtol=1e-9, atol=0)
        others = np.setdiff1d(np.arange(n), [*nb, i])
        if len(others):
            # nobody left out is nearer than the farthest neighbour kept
            assert d[i, others].min() >= d[i, nb].max() * (1 - 1e-12)


# ---------------------------------------------------------------------------
# within a distance
# ---------------------------------------------------------------------------
@given(pts=grid_points(), data=st.data())
def test_within_distance_matches_exact_brute_force(pts, data):
    d2 = exact_squared_distances(pts.ints)
    # the radius is often exactly one of the distances, to test that the bound is inclusive
    r2 = data.draw(st.one_of(st.sampled_from(sorted(set(d2.ravel().tolist()))), st.integers(0, 10**6)), label="r2")
    # the radius is usually one of the distances; sometimes the largest float (everyone within reach)
    huge = data.draw(st.sampled_from([None] * 9 + [np.finfo(np.float64).max]), label="huge radius")
    radius = float(np.ldexp(np.sqrt(float(r2)), pts.exp)) if huge is None else huge
    form = data.draw(st.sampled_from(POINT_FORMS), label="form")
    inp = point_input(pts.xy, form, data.draw(id_choices(pts.n)), pts.ints if pts.exp == 0 else None)
    w = succeeded(attempt(vicino.within_distance, inp.obj, radius, **inp.kwargs), form)
    assert w.ids.equals(inp.ids)
    n = pts.n
    # the radius as a float (rounded when subnormal), in the units of the integer grid (exact)
    bound = np.ldexp(radius, -pts.exp)
    root = np.sqrt(d2.astype(np.float64))
    # reference: NumPy brute force on exact integers (the distance is the rounded root of d^2)
    expected = [[j for j in range(n) if j != i and root[i, j] <= bound] for i in range(n)]
    assert rows_of(w) == expected
    r, c = np.nonzero(w.to_dense())
    np.testing.assert_allclose(
        w.to_edges()["distance"].to_numpy(), np.ldexp(root[r, c], pts.exp), rtol=0, atol=subnormal_ulp(pts)
    )
    assert list(w.islands) == [w.ids[i] for i in range(n) if not expected[i]]


@given(xy=float_points(), data=st.data())
def test_within_distance_of_any_floats_matches_kdtree(xy, data):
    d = euclidean_distances(xy)  # reference: NumPy brute force
    radius = data.draw(st.one_of(st.sampled_from(d.ravel().tolist()), st.floats(0, 3e6)), label="radius")
    out = attempt(vicino.within_distance, xy, radius)
    if refused_for_span(xy):
        refused(out, vicino.InvalidInputError)
        return
    w = succeeded(out)
    found = [set(r) for r in rows_of(w)]
    kd = kdtree_within(xy, radius)
    for i in range(len(xy)):
        clear = {j for j in range(len(xy)) if j != i and abs(d[i, j] - radius) > 1e-12 * max(radius, d[i, j])}
        # reference: scipy cKDTree query_ball_point (pairs not within rounding of the radius)
        assert found[i] & clear == kd[i] & clear
        assert all(d[i, j] <= radius * (1 + 1e-12) for j in found[i])
    assert (w.to_dense() == w.to_dense().T).all()


# ---------------------------------------------------------------------------
# great circle
# ---------------------------------------------------------------------------
@given(lonlat=lonlat_points(), data=st.data())
def test_great_circle_neighbours_match_haversine(lonlat, data):
    n = len(lonlat)
    d = haversine_km(lonlat)  # reference: haversine formula, R1 = 6371.0088 km (NumPy brute force)
    tol = 1e-3  # km: asin near antipodes amplifies last-digit differences of sin / cos
    k = data.draw(st.integers(1, n - 1), label="k")
    out = attempt(vicino.k_nearest, lonlat, k, metric="great_circle")
    if refused_for_span(lonlat, "great_circle"):
        refused(out, vicino.InvalidInputError)
        return
    w = succeeded(out)
    for i, (nb, dist) in enumerate(zip(rows_of(w), distances_of(w), strict=True)):
        assert len(nb) == k and i not in nb
        np.testing.assert_allclose(dist, d[i, nb], rtol=1e-9, atol=tol)
        others = np.setdiff1d(np.arange(n), [*nb, i])
        if len(others):
            assert d[i, others].min() >= d[i, nb].max() - tol
    radius = data.draw(st.one_of(st.floats(0, 21000), st.sampled_from(d.ravel().tolist())), label="radius")
    band = succeeded(attempt(vicino.within_distance, lonlat, radius, metric="great_circle"))
    for i, nb in enumerate(rows_of(band)):
        clear = {j for j in range(n) if j != i and abs(d[i, j] - radius) > tol}
        expected = {j for j in clear if d[i, j] <= radius}
        # reference: haversine formula (NumPy brute force), pairs away from the radius
        assert set(nb) & clear == expected


@given(lonlat=lonlat_points(max_n=10), data=st.data())
def test_great_circle_refuses_coordinates_out_of_range(lonlat, data):
    i = data.draw(st.integers(0, len(lonlat) - 1))
    bad = lonlat.copy()
    if data.draw(st.booleans()):
        bad[i, 1] = data.draw(st.one_of(st.floats(90, 1e6, exclude_min=True), st.floats(-1e6, -90, exclude_max=True)))
    else:
        bad[i, 0] = data.draw(st.one_of(st.floats(360, 1e6, exclude_min=True), st.floats(-1e6, -180, exclude_max=True)))
    for build, arg in ((vicino.k_nearest, 1), (vicino.within_distance, 100.0)):
        refused(attempt(build, bad, arg, metric="great_circle"), vicino.InvalidInputError)


# ---------------------------------------------------------------------------
# duplicates, a single unit
# ---------------------------------------------------------------------------
@given(pts=grid_points(scales=(0,), max_n=30), data=st.data())
def test_duplicate_locations_are_counted_and_announced(pts, data):
    k = data.draw(st.integers(1, pts.n - 1))
    expected = duplicate_units(pts.xy)  # reference: NumPy unique rows
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        w = vicino.k_nearest(pts.xy, k)
    announced = [c for c in caught if issubclass(c.category, vicino.DuplicateLocationWarning)]
    assert w.duplicate_locations == expected
    assert len(announced) == (1 if expected else 0)
    if expected:
        assert str(expected) in str(announced[0].message)
        # copies are each other's nearest, at distance 0
        d2 = exact_squared_distances(pts.ints)
        zero = (d2 == 0).sum(axis=1) - 1
        dist = distances_of(w)
        for i in range(pts.n):
            assert (dist[i] == 0).sum() == min(zero[i], k)


@given(point=st.tuples(st.floats(-1e6, 1e6), st.floats(-1e6, 1e6)), k=st.integers(-3, 3))
def test_one_unit(point, k):
    xy = np.array([point])
    why = (vicino.InvalidParameterError, vicino.InvalidInputError) if refused_for_span(xy) else ()
    refused(attempt(vicino.k_nearest, xy, k), *(why or (vicino.InvalidParameterError,)))
    band = attempt(vicino.within_distance, xy, 1.0)
    if band.ok:  # a single unit is an island
        assert band.value.n == 1 and band.value.nnz == 0 and list(band.value.islands) == [0]


# ---------------------------------------------------------------------------
# invalid points and parameters
# ---------------------------------------------------------------------------
@given(case=bad_points())
def test_builders_refuse_invalid_points(case):
    assume(not (case.bug and open_bug(case.bug)))
    for build, arg in ((vicino.k_nearest, 1), (vicino.within_distance, 1.0)):
        out = attempt(build, case.obj, arg)
        if case.must_fail:
            refused(
                out, vicino.InvalidInputError, vicino.InvalidTypeError, vicino.InvalidParameterError, what=case.reason
            )


@given(pts=grid_points(max_n=12, scales=(0,)), data=st.data())
def test_k_nearest_refuses_bad_k(pts, data):
    k = data.draw(bad_whole_numbers(pts.n), label="k")
    refused(attempt(vicino.k_nearest, pts.xy, k), vicino.InvalidParameterError)


@given(pts=grid_points(max_n=12, scales=(0,)), data=st.data())
def test_k_nearest_takes_integer_types_of_k(pts, data):
    k = data.draw(st.integers(1, pts.n - 1))
    typed = data.draw(st.sampled_from([int, np.int64, np.int32, np.uint16, np.intp]))(k)
    w = succeeded(attempt(vicino.k_nearest, pts.xy, typed))
    # reference: NumPy brute force on exact integers
    assert rows_of(w) == nearest_by_distance_then_position(exact_squared_distances(pts.ints), k)


@given(pts=grid_points(max_n=12, scales=(0,)), data=st.data())
def test_within_distance_refuses_bad_radius(pts, data):
    radius = data.draw(
        st.one_of(bad_floats(), beyond_64_bits().map(lambda v: v * 10**300), not_numbers(), st.booleans())
    )
    refused(attempt(vicino.within_distance, pts.xy, radius), vicino.InvalidParameterError)


@given(pts=grid_points(max_n=12, scales=(0,)), data=st.data())
def test_within_distance_takes_number_types_of_radius(pts, data):
    r2 = data.draw(st.integers(0, 30))
    radius = data.draw(
        st.sampled_from([float(r2), np.float32(r2), np.float64(r2), int(r2), Fraction(r2), np.int64(r2), -0.0 * r2])
    )
    w = succeeded(attempt(vicino.within_distance, pts.xy, radius))
    d2 = exact_squared_distances(pts.ints)
    r = float(radius) ** 2
    # reference: NumPy brute force on exact integers
    assert rows_of(w) == [[j for j in range(pts.n) if j != i and d2[i, j] <= r] for i in range(pts.n)]


@given(pts=grid_points(max_n=12, scales=(0,)), data=st.data())
def test_builders_refuse_unknown_metric(pts, data):
    metric = data.draw(unknown_options(("euclidean", "great_circle")))
    for build, arg in ((vicino.k_nearest, 1), (vicino.within_distance, 1.0)):
        refused(attempt(build, pts.xy, arg, metric=metric), vicino.InvalidParameterError)


@given(pts=grid_points(min_n=3, max_n=12, scales=(0,)), data=st.data())
def test_builders_refuse_bad_ids(pts, data):
    n = pts.n
    ids = data.draw(
        st.sampled_from(
            [
                list(range(n - 1)),  # one short
                list(range(n + 1)),  # one too many
                [0] * n,  # repeated
                [None, *range(1, n)],  # missing
                [float("nan"), *range(1, n)],
                pd.array([pd.NA, *range(1, n)], dtype="Int64"),
                "abc",
                np.arange(n).reshape(-1, 1),
                set(range(n)),
                {i: i for i in range(n)},
                5,
            ]
        ),
        label="ids",
    )
    for build, arg in ((vicino.k_nearest, 1), (vicino.within_distance, 1.0)):
        refused(attempt(build, pts.xy, arg, ids=ids), vicino.IdError)


@given(pts=grid_points(min_n=3, max_n=12, scales=(0,)), data=st.data())
def test_builders_refuse_bad_columns(pts, data):
    df = pd.DataFrame({"p": pts.xy[:, 0], "q": pts.xy[:, 1], "r": 0.0})
    columns = data.draw(
        st.sampled_from([("p",), ("p", "q", "r"), ("p", "zz"), ("zz", "q"), [], 5, None, 2.5]), label="columns"
    )
    assume(not (columns in (5, 2.5) and open_bug("columns-not-iterable")))
    out = attempt(vicino.k_nearest, df, 1, columns=columns)
    # columns=None on three unnamed columns cannot tell which hold the coordinates either
    refused(out, vicino.InvalidInputError, vicino.InvalidTypeError, vicino.InvalidParameterError)
    refused(attempt(vicino.k_nearest, pts.xy, 1, columns=("x", "y")), vicino.InvalidInputError)


@pytest.mark.skipif(open_bug("multiindex-ids"), reason="open bug: test_bug_multiindex_ids")
@given(pts=grid_points(min_n=2, max_n=20, scales=(0,)), data=st.data())
def test_builders_take_multiindex_ids(pts, data):
    n = pts.n
    ids = pd.MultiIndex.from_arrays([[f"r{i // 3}" for i in range(n)], [i % 3 for i in range(n)]])
    k = data.draw(st.integers(1, n - 1))
    as_frame = data.draw(st.booleans())
    obj = pd.DataFrame({"x": pts.xy[:, 0], "y": pts.xy[:, 1]}, index=ids) if as_frame else pts.xy
    w = succeeded(attempt(vicino.k_nearest, obj, k, **({} if as_frame else {"ids": ids})))
    assert w.ids.equals(ids)
    # reference: NumPy brute force on exact integers
    expected = nearest_by_distance_then_position(exact_squared_distances(pts.ints), k)
    assert rows_of(w) == expected
    i = data.draw(st.integers(0, n - 1))
    assert list(w.neighbors_of(ids[i]).index) == list(ids[expected[i]])
    refused(attempt(w.neighbors_of, ids[i][0]), vicino.IdError)  # part of a key names several units


# ---------------------------------------------------------------------------
# regressions: minimal cases of open bugs
# ---------------------------------------------------------------------------
def test_regression_python_int_beyond_float_range_as_coordinate():
    refused(attempt(vicino.k_nearest, [[2**1024, 0.0], [0.0, 0.0], [1.0, 1.0]], 1))


def test_regression_multiindex_ids():
    ids = pd.MultiIndex.from_tuples([("a", 1), ("a", 2), ("b", 1)])
    w = vicino.k_nearest(np.array([[0.0, 0.0], [1.0, 0.0], [3.0, 0.0]]), 1, ids=ids)
    assert w.ids.equals(ids)


def test_regression_columns_that_are_not_a_pair():
    df = pd.DataFrame({"x": [0.0, 1.0, 2.0], "y": [0.0, 1.0, 2.0]})
    refused(attempt(vicino.k_nearest, df, 1, columns=5))
