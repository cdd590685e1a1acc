"""Properties of Weights.audit and of the repairs connect_islands and connect_components,
and of the memory budget.

The facts of an audit (counts, islands, zero columns, components, symmetry,
one-way links, largest asymmetry, self-links, density, duplicate locations)
must equal NumPy and networkx on the dense matrix, and its findings must
follow from them; repairs must add exactly the links a brute-force nearest
search prescribes (ties to the lower position) and leave no island, or one
component; invalid repairs and memory budgets must be refused.
"""

from __future__ import annotations

from contextlib import contextmanager

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import shapely
from _oracles import (
    component_labels,
    csr_of,
    digraph,
    duplicate_units,
    exact_squared_distances,
    haversine_km,
    islands,
    link_set,
    off_diagonal,
)
from _strategies import (
    attempt,
    bad_floats,
    bad_whole_numbers,
    grid_points,
    lonlat_points,
    matrices,
    not_numbers,
    open_bug,
    refused,
    succeeded,
    tilings,
    unknown_options,
    weights_of,
)
from hypothesis import assume, given
from hypothesis import strategies as st

import vicino


# ---------------------------------------------------------------------------
# audit
# ---------------------------------------------------------------------------
@given(m=matrices(self_links=None, max_n=30), network=st.booleans())
def test_audit_facts_match_numpy_and_networkx(m, network):
    w = succeeded(attempt(vicino.from_matrix, m.dense, ids=m.ids, network=network))
    a = succeeded(attempt(w.audit))
    d = m.dense
    links = off_diagonal(d) > 0
    counts = links.sum(axis=1)
    # reference: NumPy on the dense matrix
    assert a.n == m.n and a.links == np.count_nonzero(d)
    np.testing.assert_array_equal(a.counts.to_numpy(), counts)
    assert a.summary["min"] == counts.min() and a.summary["max"] == counts.max()
    assert a.summary["median"] == np.median(counts) and a.summary["mean"] == pytest.approx(
        counts.mean(), rel=1e-12, abs=0
    )
    assert a.histogram["units"].sum() == m.n and a.histogram["share"].sum() == pytest.approx(1.0, rel=1e-12, abs=0)
    assert list(a.islands) == list(m.ids[islands(d)])
    assert list(a.zero_columns) == list(m.ids[links.sum(axis=0) == 0])
    assert a.self_links == np.count_nonzero(np.diag(d))
    assert a.symmetric == bool((d == d.T).all())
    assert a.one_way_links == int((links & ~links.T).sum())
    asym = np.triu(np.abs(off_diagonal(d) - off_diagonal(d).T), 1)
    if asym.max() == 0:
        assert a.max_asymmetry is None
    else:
        i, j = np.unravel_index(np.argmax(asym), asym.shape)  # the first (lowest) pair among equals
        assert a.max_asymmetry == (asym[i, j], m.ids[i], m.ids[j])
    expected_density = links.sum() / (m.n * (m.n - 1)) if m.n > 1 else 0.0
    assert a.density == pytest.approx(expected_density, rel=1e-15, abs=0)
    # reference: networkx weakly connected components (0 the largest, ties to the lowest position)
    labels, sizes = component_labels(d)
    assert a.components.count == len(sizes)
    assert list(a.components.sizes) == sizes
    np.testing.assert_array_equal(a.components.labels.to_numpy(), labels)
    # the findings follow from the facts
    level = {f.check: f.level for f in a.findings}
    assert all(f.message.strip() for f in a.findings)
    assert level["islands"] == ("problem" if len(a.islands) else "ok")
    assert level["components"] == ("warning" if len(sizes) > 1 else "ok")
    assert level["symmetry"] == ("ok" if a.symmetric else "note")
    assert level["self-links"] == ("warning" if a.self_links else "ok")
    hidden = (links.sum(axis=0) == 0) & (counts > 0)
    assert level["zero columns"] == ("note" if hidden.any() else "ok")
    assert level["density"] == ("warning" if m.n > 2 and expected_density > 0.5 else "ok")
    assert level["network"] == ("warning" if network else "note")
    assert [f.level == "problem" for f in a.findings].count(True) == len(a.problems)
    assert len(a.to_frame()) == len(a.findings)
    assert repr(a).startswith("Weights audit") and "<table>" in a._repr_html_()


@given(pts=grid_points(max_n=30, scales=(0, -1000, 470)), data=st.data())
def test_audit_counts_duplicate_locations(pts, data):
    w = succeeded(attempt(vicino.k_nearest, pts.xy, data.draw(st.integers(1, pts.n - 1))))
    a = w.audit()
    expected = duplicate_units(pts.xy)  # reference: NumPy unique rows
    assert a.duplicate_locations == expected
    level = {f.check: f.level for f in a.findings}
    assert level.get("duplicate locations", "absent") == ("warning" if expected else "absent")
    assert "network" not in level
    assert len(a.islands) == 0  # k nearest always reaches someone


# ---------------------------------------------------------------------------
# connect_islands
# ---------------------------------------------------------------------------
def location_input(pts, form: str, ids: pd.Index):
    if form == "frame":
        return pd.DataFrame({"x": pts.xy[:, 0], "y": pts.xy[:, 1]}, index=ids)
    if form == "shapely":
        return list(shapely.points(pts.xy))
    return pts.xy


def brute_island_links(dense: np.ndarray, d2: np.ndarray, k: int) -> set[tuple[int, int]]:
    """Links from each island to its k nearest units by (distance, position), and back when
    the links are symmetric: NumPy brute force."""
    n = len(dense)
    both_ways = ((dense > 0) == (dense.T > 0)).all()
    out = set()
    for i in islands(dense):
        others = np.array([j for j in range(n) if j != i])
        near = others[np.lexsort((others, d2[i, others]))[:k]]
        for j in near.tolist():
            out.add((int(i), j))
            if both_ways:
                out.add((j, int(i)))
    return out


@given(
    pts=grid_points(min_n=2, max_n=30, scales=(0, 0, -1000, 470)),
    shape=st.sampled_from(["any", "pattern", "symmetric"]),
    data=st.data(),
)
def test_connect_islands_links_each_island_to_its_nearest(pts, shape, data):
    m = data.draw(matrices(min_n=pts.n, max_n=pts.n, shape=shape, self_links=None), label="weights")
    w = weights_of(m)
    k = data.draw(st.integers(1, pts.n), label="k")
    weight = data.draw(st.sampled_from([1.0, 0.5, 3, 1e-300, 1e300]), label="weight")
    form = data.draw(st.sampled_from(["array", "frame", "shapely"]), label="form")
    out = attempt(w.connect_islands, location_input(pts, form, m.ids), k, weight=weight)
    if k >= pts.n:
        refused(out, vicino.InvalidParameterError)  # fewer than k other units
        return
    fixed = succeeded(out)
    d2 = exact_squared_distances(pts.ints)
    new = brute_island_links(m.dense, d2, k)  # reference: NumPy brute force on exact integers
    assert link_set(fixed.to_dense()) == link_set(m.dense) | new
    assert not (new & link_set(m.dense))
    got = fixed.to_dense()
    for i, j in new:
        assert got[i, j] == float(weight)
    old = m.dense > 0
    np.testing.assert_array_equal(got[old], m.dense[old])
    assert len(fixed.islands) == 0
    assert fixed.recipe[-1].params["links_added"] == len(new)
    edges = fixed.to_edges()
    pos = {u: p for p, u in enumerate(m.ids)}
    for f, t, dist in zip(edges["source"], edges["target"], edges["distance"], strict=True):
        pair = (pos[f], pos[t])
        if pair in new:
            assert dist == pytest.approx(np.ldexp(np.sqrt(float(d2[pair])), pts.exp), rel=1e-15, abs=0)
        else:
            assert np.isnan(dist)  # weights from a matrix know no distance for their own links


@given(lonlat=lonlat_points(min_n=3, max_n=20), data=st.data())
def test_connect_islands_on_the_sphere_matches_haversine(lonlat, data):
    n = len(lonlat)
    m = data.draw(matrices(min_n=n, max_n=n, shape="symmetric"), label="weights")
    w = weights_of(m)
    out = attempt(w.connect_islands, lonlat, 1, metric="great_circle")
    if not out.ok:
        refused(out, vicino.InvalidInputError)  # a longitude or latitude too tiny to tell from 0
        assert np.abs(lonlat[lonlat != 0]).min() < 1e-130
        return
    fixed = out.value
    d = haversine_km(lonlat)  # reference: haversine formula, R1 = 6371.0088 km
    edges = fixed.to_edges()
    pos = {u: p for p, u in enumerate(m.ids)}
    old = link_set(m.dense)
    for f, t, dist in zip(edges["source"], edges["target"], edges["distance"], strict=True):
        if (pos[f], pos[t]) in old:
            assert np.isnan(dist)
        else:
            assert dist == pytest.approx(d[pos[f], pos[t]], rel=1e-9, abs=1e-3)  # each new link's length
    for i in islands(m.dense):
        mine = [pos[t] for t in edges.loc[edges["source"] == m.ids[i], "target"]]
        others = [q for q in range(n) if q != i]
        # linked to its nearest (and, when the links are symmetric, from other islands whose nearest it is)
        assert mine and min(d[i, mine]) <= d[i, others].min() + 1e-3
    assert len(fixed.islands) == 0


# ---------------------------------------------------------------------------
# connect_components
# ---------------------------------------------------------------------------
@given(
    pts=grid_points(min_n=2, max_n=30, scales=(0, 0, -1070, 300)),
    shape=st.sampled_from(["any", "pattern", "symmetric"]),
    data=st.data(),
)
def test_connect_components_joins_through_the_closest_pairs(pts, shape, data):
    m = data.draw(matrices(min_n=pts.n, max_n=pts.n, shape=shape, self_links=None), label="weights")
    w = weights_of(m)
    fixed = succeeded(attempt(w.connect_components, pts.xy))
    labels, sizes = component_labels(m.dense)  # reference: networkx weakly connected components
    d2 = exact_squared_distances(pts.ints)
    both_ways = ((m.dense > 0) == (m.dense.T > 0)).all()
    new = set()
    largest = np.flatnonzero(labels == 0)
    for c in range(1, len(sizes)):
        members = np.flatnonzero(labels == c)
        # reference: NumPy brute force, the closest pair by (distance, i, j)
        _, i, j = min((d2[i, j], int(i), int(j)) for i in members for j in largest)
        new.add((i, j))
        if both_ways:
            new.add((j, i))
    assert link_set(fixed.to_dense()) == link_set(m.dense) | new
    assert nx.number_weakly_connected_components(digraph(fixed.to_dense())) == 1
    assert fixed.audit().components.count == 1


# ---------------------------------------------------------------------------
# refusals
# ---------------------------------------------------------------------------
@given(pts=grid_points(min_n=3, max_n=12, scales=(0,)), data=st.data())
def test_repairs_refuse_bad_arguments(pts, data):
    m = data.draw(matrices(min_n=pts.n, max_n=pts.n, shape="symmetric", styles=("binary",)), label="weights")
    w = weights_of(m)
    which = data.draw(
        st.sampled_from(
            ["weight", "metric", "k", "nan_location", "count", "index", "standardized", "lonlat", "not_locations"]
        )
    )
    calls = (w.connect_islands, w.connect_components)
    if which == "weight":
        bad = data.draw(st.one_of(bad_floats(), st.just(0.0), not_numbers(), st.booleans()))
        outs = [attempt(c, pts.xy, weight=bad) for c in calls]
    elif which == "metric":
        bad = data.draw(unknown_options(("euclidean", "great_circle")))
        outs = [attempt(c, pts.xy, metric=bad) for c in calls]
    elif which == "k":
        outs = [attempt(w.connect_islands, pts.xy, data.draw(bad_whole_numbers(pts.n)))]
    elif which == "nan_location":
        xy = pts.xy.copy()
        xy[data.draw(st.integers(0, pts.n - 1)), data.draw(st.integers(0, 1))] = data.draw(
            st.sampled_from([np.nan, np.inf, -np.inf])
        )
        outs = [attempt(c, xy) for c in calls]
    elif which == "count":
        outs = [attempt(c, pts.xy[: data.draw(st.integers(0, pts.n - 1))]) for c in calls]
    elif which == "index":
        shuffled = pd.DataFrame({"x": pts.xy[:, 0], "y": pts.xy[:, 1]}, index=[f"z{i}" for i in range(pts.n)])
        outs = [attempt(c, shuffled) for c in calls]
    elif which == "standardized":
        s = attempt(w.standardize, "row")
        assume(s.ok)
        outs = [attempt(c, pts.xy) for c in (s.value.connect_islands, s.value.connect_components)]
    elif which == "lonlat":
        outs = [attempt(c, pts.xy * 1000.0 + 500.0, metric="great_circle") for c in calls]
    else:
        bad = data.draw(st.sampled_from([None, "points", 3.0, np.zeros((pts.n, 3)), [[1.0]] * pts.n]))
        outs = [attempt(c, bad) for c in calls]
    for out in outs:
        refused(
            out,
            vicino.InvalidParameterError,
            vicino.InvalidInputError,
            vicino.InvalidTypeError,
            vicino.IdError,
            what=which,
        )


@given(t=tilings(max_units=10, scales=(0,)))
def test_repairs_locate_polygons_at_their_centroids(t):
    assume(t.n >= 2)
    geoms = t.shapes()
    w = succeeded(attempt(vicino.contiguity, geoms, "rook"))
    if t.empty:
        # an empty unit is an island without a location: both repairs must refuse to guess one
        refused(attempt(w.connect_islands, geoms, 1), vicino.InvalidInputError)
        refused(attempt(w.connect_components, geoms), vicino.InvalidInputError)
        return
    fixed = succeeded(attempt(w.connect_islands, geoms, 1))
    centre = shapely.get_coordinates(shapely.centroid(t.shapes(scaled=False)))  # reference: shapely centroids
    d = np.hypot(*(centre[:, None, :] - centre[None, :, :]).transpose(2, 0, 1))
    edges = fixed.to_edges()
    added = edges[edges["border_length"].isna()]
    for f, g, dist in zip(added["source"], added["target"], added["distance"], strict=True):
        assert dist == pytest.approx(d[f, g] * 2.0**t.exp, rel=1e-12, abs=0)
    for i in np.flatnonzero(w.counts.to_numpy() == 0):
        mine = added[added["source"] == i]
        others = np.array([q for q in range(t.n) if q != i])
        assert len(mine) >= 1
        assert mine["distance"].min() == pytest.approx(d[i, others].min(), rel=1e-12, abs=0)
    assert len(fixed.islands) == 0


# ---------------------------------------------------------------------------
# the memory budget
# ---------------------------------------------------------------------------
@contextmanager
def memory_limit(nbytes: int | None = None):
    """Run with a memory budget, and restore the default afterwards (it is process-wide)."""
    default = vicino.get_memory_limit()
    try:
        if nbytes is not None:
            vicino.set_memory_limit(nbytes)
        yield default
    finally:
        vicino.set_memory_limit(None)
        assert vicino.get_memory_limit() == default


@given(pts=grid_points(min_n=2, max_n=30, scales=(0,)), limit=st.integers(1, 20_000), data=st.data())
def test_a_small_memory_budget_refuses_or_computes_correctly(pts, limit, data):
    k = data.draw(st.integers(1, pts.n - 1))
    with memory_limit(limit):
        assert vicino.get_memory_limit() == limit
        out = attempt(vicino.k_nearest, pts.xy, k)
        band = attempt(vicino.within_distance, pts.xy, 2.0)
    d2 = exact_squared_distances(pts.ints)
    if out.ok:
        m = csr_of(out.value)
        # reference: NumPy brute force on exact integers
        for i in range(pts.n):
            others = np.array([j for j in range(pts.n) if j != i])
            near = sorted(others[np.lexsort((others, d2[i, others]))[:k]].tolist())
            assert m.indices[m.indptr[i] : m.indptr[i + 1]].tolist() == near
    else:
        refused(out, vicino.TooLargeError)
    if band.ok:
        assert link_set(band.value.to_dense()) == {
            (i, j) for i in range(pts.n) for j in range(pts.n) if i != j and d2[i, j] <= 4
        }
    else:
        refused(band, vicino.TooLargeError)


@pytest.mark.skipif(open_bug("set-memory-limit-unchecked"), reason="open bug: test_bug_set_memory_limit_*")
@given(bad=st.one_of(st.integers(max_value=0), st.integers(min_value=2**64), st.floats(), not_numbers(), st.booleans()))
def test_set_memory_limit_refuses_unusable_budgets(bad):
    assume(bad is not None)
    with memory_limit() as default:
        refused(attempt(vicino.set_memory_limit, bad), vicino.InvalidParameterError)
        assert vicino.get_memory_limit() == default


# ---------------------------------------------------------------------------
# regressions: minimal cases of open bugs
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("bad", [-1, 0, 2**64, "1GB", 1.5e9], ids=["negative", "zero", "2**64", "text", "float"])
def test_regression_set_memory_limit_refuses_with_a_bare_error(bad):
    with memory_limit():
        refused(attempt(vicino.set_memory_limit, bad), vicino.InvalidParameterError)


def test_regression_set_memory_limit_takes_a_bool():
    with memory_limit():
        refused(attempt(vicino.set_memory_limit, True), vicino.InvalidParameterError)
