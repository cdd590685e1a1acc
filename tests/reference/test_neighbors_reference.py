"""Neighbour searches of vicino checked against references outside the project.

References used here:
* ``scipy.spatial.cKDTree`` (exact k-nearest and fixed-radius searches);
* NumPy brute force over all pairs (for tie-breaking and duplicates);
* the haversine formula (R. W. Sinnott, "Virtues of the Haversine",
  Sky and Telescope 68(2):159, 1984) on a sphere of radius
  R1 = 6371.0088 km, the IUGG mean Earth radius of the Geodetic Reference
  System 1980 (H. Moritz, "Geodetic Reference System 1980",
  Journal of Geodesy 74:128-133, 2000);
* the US airports table shipped with the ``vega_datasets`` package (open data).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.spatial import cKDTree

import vicino
from oracles import brute_euclidean, brute_haversine

# IUGG mean Earth radius R1 in km (Moritz 2000, GRS80).
R1_KM = 6371.0088


# ---------------------------------------------------------------------------
# helpers: independent references
# ---------------------------------------------------------------------------
def edges_by_row(w: vicino.Weights) -> list[dict]:
    """For every row position, {neighbour position: distance} as reported by vicino."""
    m = w.to_scipy()
    e = w.to_edges()
    out = []
    dist = e["distance"].to_numpy() if "distance" in e else None
    for i in range(w.n):
        a, b = m.indptr[i], m.indptr[i + 1]
        cols = m.indices[a:b].tolist()
        out.append(dict(zip(cols, dist[a:b].tolist())))
    return out


def brute_knn(d: np.ndarray, k: int) -> list[list[int]]:
    """k smallest by (distance, position), excluding self, from a full matrix."""
    n = d.shape[0]
    pos = np.arange(n)
    out = []
    for i in range(n):
        others = pos[pos != i]
        order = np.lexsort((others, d[i, others]))  # primary: distance, secondary: position
        out.append(sorted(others[order[:k]].tolist()))
    return out


def unit_vectors(lonlat: np.ndarray) -> np.ndarray:
    lam = np.radians(lonlat[:, 0])
    phi = np.radians(lonlat[:, 1])
    return np.column_stack([np.cos(phi) * np.cos(lam), np.cos(phi) * np.sin(lam), np.sin(phi)])


# ---------------------------------------------------------------------------
# k_nearest, euclidean, continuous data (no ties)
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "n,k",
    [(2, 1), (10, 1), (10, 9), (57, 4), (200, 7), (200, 199), (1500, 12)],
)
def test_k_nearest_matches_ckdtree(n, k):
    rng = np.random.default_rng(1000 + n + k)
    xy = rng.uniform(-50.0, 50.0, size=(n, 2))
    with warnings.catch_warnings():
        warnings.simplefilter("error", vicino.DuplicateLocationWarning)
        w = vicino.k_nearest(xy, k)

    dist, idx = cKDTree(xy).query(xy, k=k + 1)  # reference: scipy.spatial.cKDTree
    dist = np.asarray(dist).reshape(n, k + 1)
    idx = np.asarray(idx).reshape(n, k + 1)
    # on continuous data the first hit is the point itself
    assert (idx[:, 0] == np.arange(n)).all()  # reference: scipy.spatial.cKDTree
    got = edges_by_row(w)
    assert w.n == n
    assert w.nnz == n * k  # reference: definition of k-nearest (k links per unit)
    for i in range(n):
        expected = dict(zip(idx[i, 1:].tolist(), dist[i, 1:].tolist()))
        assert set(got[i]) == set(expected)  # reference: scipy.spatial.cKDTree
        for j, dij in expected.items():
            assert got[i][j] == pytest.approx(dij, rel=1e-12, abs=1e-12)  # reference: scipy.spatial.cKDTree
    # binary weights
    np.testing.assert_array_equal(w.to_edges()["weight"].to_numpy(), np.ones(n * k))  # common practice


def test_k_nearest_weights_are_asymmetric_like_reference():
    rng = np.random.default_rng(7)
    xy = rng.random((300, 2))
    w = vicino.k_nearest(xy, 3)
    _, idx = cKDTree(xy).query(xy, k=4)  # reference: scipy.spatial.cKDTree
    ref = sp.csr_array((np.ones(300 * 3), idx[:, 1:].ravel(), np.arange(0, 300 * 3 + 1, 3)), shape=(300, 300))
    m = w.to_scipy()
    assert (m != ref).nnz == 0  # reference: scipy.spatial.cKDTree
    # the asymmetry of vicino equals the asymmetry of the reference
    assert (m != m.T).nnz == (ref != ref.T).nnz  # reference: scipy.spatial.cKDTree
    assert (ref != ref.T).nnz > 0  # reference: scipy.spatial.cKDTree (kNN graphs are asymmetric)


# ---------------------------------------------------------------------------
# k_nearest with ties and duplicates: documented rule, lower position wins
# ---------------------------------------------------------------------------
def assert_integer_knn(w, xy, k):
    """Check w against brute force on integer coordinates; return the squared distances."""
    ixy = xy.astype(np.int64)
    d2 = ((ixy[:, None, :] - ixy[None, :, :]) ** 2).sum(-1)  # exact: integer arithmetic
    expected = brute_knn(d2, k)  # reference: numpy brute force, (distance, position) order
    got = edges_by_row(w)
    for i in range(len(xy)):
        assert sorted(got[i]) == expected[i]  # reference: numpy brute force, (distance, position) order
        for j, dij in got[i].items():
            assert dij == pytest.approx(np.sqrt(d2[i, j]), rel=1e-12, abs=1e-12)  # reference: numpy brute force
    return d2


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("k", [1, 3, 8])
def test_k_nearest_ties_break_by_position(seed, k):
    rng = np.random.default_rng(seed)
    cells = rng.choice(144, size=60, replace=False)  # distinct cells of a 12 x 12 grid
    xy = np.column_stack([cells % 12, cells // 12]).astype(float)
    with warnings.catch_warnings():
        warnings.simplefilter("error", vicino.DuplicateLocationWarning)
        w = vicino.k_nearest(xy, k)
    # integer squared distances are exact, so ties are exact too
    d2 = assert_integer_knn(w, xy, k)
    # the grid really has ties at the k-th distance somewhere (the test is meaningful)
    kth = np.sort(np.where(np.eye(len(xy), dtype=bool), np.iinfo(np.int64).max, d2), axis=1)
    assert (kth[:, k - 1] == kth[:, k]).any()  # reference: numpy brute force


@pytest.mark.parametrize("seed", [3, 4])
@pytest.mark.parametrize("k", [1, 2, 5])
def test_k_nearest_duplicates_warn_and_follow_tie_rule(seed, k):
    rng = np.random.default_rng(seed)
    xy = rng.integers(0, 5, size=(45, 2)).astype(float)  # 45 points on 25 cells: many duplicates
    _, inverse, cnt = np.unique(xy, axis=0, return_inverse=True, return_counts=True)
    n_shared = int((cnt[inverse.ravel()] > 1).sum())  # reference: numpy.unique
    assert n_shared > 0

    with pytest.warns(vicino.DuplicateLocationWarning, match=str(n_shared)):
        w = vicino.k_nearest(xy, k)
    assert w.duplicate_locations == n_shared  # reference: numpy.unique

    assert_integer_knn(w, xy, k)
    got = edges_by_row(w)
    # a unit with a twin has it at distance 0
    twins = np.flatnonzero(cnt[inverse.ravel()] > 1)
    for i in twins:
        assert min(got[i].values()) == 0.0  # reference: numpy.unique (twins are at distance 0)


def test_k_nearest_no_warning_without_duplicates():
    rng = np.random.default_rng(11)
    xy = rng.random((100, 2))
    assert len(np.unique(xy, axis=0)) == 100  # reference: numpy.unique
    with warnings.catch_warnings():
        warnings.simplefilter("error", vicino.DuplicateLocationWarning)
        w = vicino.k_nearest(xy, 2)
    assert w.duplicate_locations == 0  # reference: numpy.unique


# ---------------------------------------------------------------------------
# within_distance, euclidean
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("n,radius", [(5, 0.3), (80, 0.05), (400, 0.08), (1200, 0.02)])
def test_within_distance_matches_ckdtree(n, radius):
    rng = np.random.default_rng(n)
    xy = rng.random((n, 2))
    w = vicino.within_distance(xy, radius)
    tree = cKDTree(xy)
    pairs = tree.query_pairs(radius, output_type="ndarray")  # reference: scipy.spatial.cKDTree
    ref = sp.coo_array(
        (np.ones(2 * len(pairs)), (np.r_[pairs[:, 0], pairs[:, 1]], np.r_[pairs[:, 1], pairs[:, 0]])),
        shape=(n, n),
    ).tocsr()
    m = w.to_scipy()
    assert (m != ref).nnz == 0  # reference: scipy.spatial.cKDTree.query_pairs
    assert (m != m.T).nnz == 0  # reference: symmetry of the distance relation (common practice)

    balls = tree.query_ball_point(xy, radius)  # reference: scipy.spatial.cKDTree.query_ball_point
    got = edges_by_row(w)
    d = brute_euclidean(xy)
    expected_islands = []
    for i in range(n):
        others = set(balls[i]) - {i}
        assert set(got[i]) == others  # reference: scipy.spatial.cKDTree.query_ball_point
        if not others:
            expected_islands.append(i)
        for j, dij in got[i].items():
            assert dij == pytest.approx(d[i, j], rel=1e-12)  # reference: numpy brute force
            assert dij <= radius  # reference: numpy brute force
    assert list(w.islands) == expected_islands  # reference: scipy.spatial.cKDTree.query_ball_point
    assert (w.counts.to_numpy() == [len(b) - 1 for b in balls]).all()  # reference: cKDTree.query_ball_point


def test_within_distance_has_islands_when_radius_small():
    rng = np.random.default_rng(5)
    xy = rng.random((200, 2))
    radius = 0.03
    w = vicino.within_distance(xy, radius)
    d = brute_euclidean(xy)
    np.fill_diagonal(d, np.inf)
    expected = np.flatnonzero(d.min(axis=1) > radius)  # reference: numpy brute force
    assert len(expected) > 0
    assert list(w.islands) == expected.tolist()  # reference: numpy brute force
    assert (w.counts.loc[expected] == 0).all()  # reference: numpy brute force


@pytest.mark.parametrize("radius", [0.0, 1.0, 2.0, 5.0])
def test_within_distance_radius_is_inclusive_on_grid(radius):
    # an integer grid has many pairs at exactly 1, 2 and 5 (3-4-5); duplicates at exactly 0
    rng = np.random.default_rng(21)
    xy = rng.integers(0, 9, size=(70, 2)).astype(float)
    with pytest.warns(vicino.DuplicateLocationWarning):
        w = vicino.within_distance(xy, radius)
    ixy = xy.astype(np.int64)
    d2 = ((ixy[:, None, :] - ixy[None, :, :]) ** 2).sum(-1)
    expected = (d2 <= radius**2) & ~np.eye(len(xy), dtype=bool)  # reference: numpy brute force, inclusive
    assert (d2[~np.eye(len(xy), dtype=bool)] == radius**2).any()  # the boundary is really hit
    np.testing.assert_array_equal(w.to_dense() != 0, expected)  # reference: numpy brute force, inclusive
    ref = cKDTree(xy).query_pairs(radius)  # reference: scipy.spatial.cKDTree (inclusive bound)
    got = {(i, j) for i, j in zip(*np.nonzero(np.triu(w.to_dense())))}
    assert got == ref  # reference: scipy.spatial.cKDTree.query_pairs


# ---------------------------------------------------------------------------
# great circle on open data: US airports (vega_datasets)
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def airports() -> pd.DataFrame:
    vega = pytest.importorskip("vega_datasets")
    df = vega.data.airports()  # local copy shipped inside the package wheel
    assert {"longitude", "latitude", "iata"} <= set(df.columns)
    rng = np.random.default_rng(2024)
    take = np.sort(rng.choice(len(df), size=400, replace=False))
    sub = df.iloc[take].set_index("iata")
    assert sub.index.is_unique
    assert not sub[["longitude", "latitude"]].duplicated().any()
    return sub


def test_earth_radius_is_iugg_mean_radius():
    assert pytest.approx(R1_KM, abs=1e-9) == vicino.EARTH_RADIUS_KM  # reference: IUGG R1 (Moritz 2000)


def test_haversine_helper_sanity():
    # one degree of arc along the equator is 2 pi R / 360
    d = brute_haversine(np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 90.0]]))
    assert d[0, 1] == pytest.approx(2 * np.pi * R1_KM / 360, rel=1e-12)  # reference: circumference formula
    assert d[0, 2] == pytest.approx(np.pi * R1_KM / 2, rel=1e-12)  # reference: quarter meridian on a sphere


@pytest.mark.parametrize("k", [1, 5, 12])
def test_great_circle_k_nearest_airports(airports, k):
    lonlat = airports[["longitude", "latitude"]].to_numpy()
    w = vicino.k_nearest(lonlat, k, metric="great_circle")
    d = brute_haversine(lonlat)  # reference: haversine formula, R1 = 6371.0088 km
    expected = brute_knn(d, k)
    got = edges_by_row(w)
    for i in range(len(lonlat)):
        assert sorted(got[i]) == expected[i]  # reference: haversine brute force (numpy)
        for j, dij in got[i].items():
            assert dij == pytest.approx(d[i, j], rel=1e-9)  # reference: haversine brute force (numpy)

    # second, independent reference: nearest by chord length in 3-D (monotone in arc length)
    _, idx = cKDTree(unit_vectors(lonlat)).query(unit_vectors(lonlat), k=k + 1)
    for i in range(len(lonlat)):
        assert set(got[i]) == set(np.atleast_1d(idx[i])[1:].tolist())  # reference: scipy cKDTree on unit vectors


@pytest.mark.parametrize("radius_km", [50.0, 150.0, 400.0])
def test_great_circle_within_distance_airports(airports, radius_km):
    lonlat = airports[["longitude", "latitude"]].to_numpy()
    n = len(lonlat)
    w = vicino.within_distance(lonlat, radius_km, metric="great_circle")
    d = brute_haversine(lonlat)  # reference: haversine formula, R1 = 6371.0088 km
    expected = (d <= radius_km) & ~np.eye(n, dtype=bool)
    # guard: no pair is so close to the radius that rounding could decide it
    assert np.abs(d[~np.eye(n, dtype=bool)] - radius_km).min() > 1e-6 * radius_km
    np.testing.assert_array_equal(w.to_dense() != 0, expected)  # reference: haversine brute force (numpy)
    got = edges_by_row(w)
    for i in range(n):
        for j, dij in got[i].items():
            assert dij == pytest.approx(d[i, j], rel=1e-9)  # reference: haversine brute force (numpy)
    expected_islands = np.flatnonzero(~expected.any(axis=1))
    assert list(w.islands) == expected_islands.tolist()  # reference: haversine brute force

    # chord length reference via cKDTree: arc r <-> chord 2 sin(r / 2R)
    chord = 2 * np.sin(radius_km / (2 * R1_KM))
    pairs = cKDTree(unit_vectors(lonlat)).query_pairs(chord)  # reference: scipy cKDTree on unit vectors
    got_pairs = {(i, j) for i in range(n) for j in got[i] if i < j}
    assert got_pairs == pairs  # reference: scipy cKDTree on unit vectors


def test_great_circle_accepts_dataframe_and_uses_its_index(airports):
    lonlat = airports[["longitude", "latitude"]].to_numpy()
    w_arr = vicino.k_nearest(lonlat, 4, metric="great_circle")
    # the frame has other columns too; longitude/latitude are found by name,
    # whatever their order
    frame = airports[["name", "latitude", "city", "longitude"]]
    w_df = vicino.k_nearest(frame, 4, metric="great_circle")
    assert w_df.ids.equals(airports.index)  # reference: the DataFrame index (iata codes)
    d = brute_haversine(lonlat)  # reference: haversine formula, R1 = 6371.0088 km
    expected = brute_knn(d, 4)
    edges = w_df.to_edges()
    for i, code in enumerate(airports.index):
        neigh = edges.loc[edges["source"] == code, "target"].tolist()
        assert sorted(neigh) == sorted(airports.index[expected[i]].tolist())  # reference: haversine brute force
        assert set(w_df.neighbors_of(code).index) == set(airports.index[expected[i]])  # reference: haversine
    np.testing.assert_array_equal(w_df.to_scipy().indices, w_arr.to_scipy().indices)  # reference: haversine (above)

    r = vicino.within_distance(frame, 200.0, metric="great_circle")
    assert r.ids.equals(airports.index)  # reference: the DataFrame index (iata codes)
    expected_w = (d <= 200.0) & ~np.eye(len(d), dtype=bool)
    np.testing.assert_array_equal(r.to_dense() != 0, expected_w)  # reference: haversine brute force


# ---------------------------------------------------------------------------
# shapely point input
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("builder", ["k_nearest", "within_distance"])
@pytest.mark.parametrize("kind", ["list", "shapely_array", "series"])
def test_shapely_points_same_as_array(builder, kind):
    shapely = pytest.importorskip("shapely")
    rng = np.random.default_rng(99)
    xy = rng.random((150, 2))
    ids = [f"u{i:03d}" for i in range(150)]
    if kind == "list":
        points = [shapely.Point(x, y) for x, y in xy]
    elif kind == "shapely_array":
        points = shapely.points(xy)
    else:
        points = pd.Series(shapely.points(xy), index=ids)
    if builder == "k_nearest":
        w_pts = vicino.k_nearest(points, 4)
        w_arr = vicino.k_nearest(xy, 4)
        _, idx = cKDTree(xy).query(xy, k=5)  # reference: scipy.spatial.cKDTree
        ref = [set(r[1:].tolist()) for r in idx]
    else:
        w_pts = vicino.within_distance(points, 0.1)
        w_arr = vicino.within_distance(xy, 0.1)
        balls = cKDTree(xy).query_ball_point(xy, 0.1)  # reference: scipy.spatial.cKDTree
        ref = [set(b) - {i} for i, b in enumerate(balls)]
    got = edges_by_row(w_pts)
    assert [set(g) for g in got] == ref  # reference: scipy.spatial.cKDTree
    m_pts, m_arr = w_pts.to_scipy(), w_arr.to_scipy()
    np.testing.assert_array_equal(m_pts.indptr, m_arr.indptr)
    np.testing.assert_array_equal(m_pts.indices, m_arr.indices)
    np.testing.assert_allclose(w_pts.to_edges()["distance"], w_arr.to_edges()["distance"], rtol=0, atol=0)
    if kind == "series":
        assert list(w_pts.ids) == ids  # reference: the Series index
    else:
        assert w_pts.ids.equals(pd.RangeIndex(150))  # common practice (positions as default ids)


# ---------------------------------------------------------------------------
# great circle: antimeridian, 0..360 longitudes, poles
# ---------------------------------------------------------------------------
def test_great_circle_across_antimeridian_and_near_poles():
    rng = np.random.default_rng(314)
    n = 300
    lon = rng.uniform(170.0, 190.0, n)
    lon = np.where(lon > 180.0, lon - 360.0, lon)  # straddles +-180
    lat = np.concatenate(
        [rng.uniform(-10, 10, n // 3), rng.uniform(80, 89.99, n // 3), rng.uniform(-89.99, -80, n - 2 * (n // 3))]
    )
    lonlat = np.column_stack([lon, lat])
    d = brute_haversine(lonlat)  # reference: haversine formula, R1 = 6371.0088 km
    w = vicino.k_nearest(lonlat, 6, metric="great_circle")
    expected = brute_knn(d, 6)
    got = edges_by_row(w)
    for i in range(n):
        assert sorted(got[i]) == expected[i]  # reference: haversine brute force (numpy)
        for j, dij in got[i].items():
            assert dij == pytest.approx(d[i, j], rel=1e-9)  # reference: haversine brute force (numpy)
    # some neighbours really are across the antimeridian
    assert any(np.sign(lon[i]) != np.sign(lon[j]) for i in range(n) for j in got[i])
    r = vicino.within_distance(lonlat, 300.0, metric="great_circle")
    np.testing.assert_array_equal(
        r.to_dense() != 0, (d <= 300.0) & ~np.eye(n, dtype=bool)
    )  # reference: haversine brute force (numpy)


def test_great_circle_longitudes_0_to_360_equal_minus_180_to_180():
    rng = np.random.default_rng(2718)
    lonlat = np.column_stack([rng.uniform(-180, 180, 250), rng.uniform(-80, 80, 250)])
    shifted = lonlat.copy()
    shifted[:, 0] = np.mod(shifted[:, 0], 360.0)  # same meridians, 0..360 convention
    assert (shifted[:, 0] > 180).any()
    d = brute_haversine(lonlat)  # reference: haversine formula, R1 = 6371.0088 km
    for pts in (lonlat, shifted):
        w = vicino.k_nearest(pts, 5, metric="great_circle")
        got = edges_by_row(w)
        expected = brute_knn(d, 5)
        for i in range(len(pts)):
            assert sorted(got[i]) == expected[i]  # reference: haversine brute force (numpy)
            for j, dij in got[i].items():
                assert dij == pytest.approx(d[i, j], rel=1e-9)  # reference: haversine brute force (numpy)


def test_great_circle_antipodes_are_half_circumference():
    lonlat = np.array([[0.0, 0.0], [180.0, 0.0], [-45.0, 30.0], [135.0, -30.0]])
    w = vicino.k_nearest(lonlat, 3, metric="great_circle")
    e = w.to_edges().set_index(["source", "target"])["distance"]
    half = np.pi * R1_KM  # reference: half the circumference of a sphere of radius R1
    assert e.loc[(0, 1)] == pytest.approx(half, rel=1e-12)
    assert e.loc[(2, 3)] == pytest.approx(half, rel=1e-12)


def test_great_circle_same_place_written_differently_is_a_duplicate():
    # all four first units are at the North Pole; the last two are one point written two ways
    lonlat = np.array(
        [[0.0, 90.0], [120.0, 90.0], [-60.0, 90.0], [45.0, 90.0], [190.0, 10.0], [-170.0, 10.0], [0.0, 0.0]]
    )
    # common practice: every longitude at latitude 90 is the pole; lon and lon - 360 are one meridian
    with pytest.warns(vicino.DuplicateLocationWarning, match="6 units"):
        w = vicino.k_nearest(lonlat, 1, metric="great_circle")
    assert w.duplicate_locations == 6  # common practice (see above)
    got = edges_by_row(w)
    assert got[0] == {1: 0.0}  # documented tie rule: distance 0, lower position first
    assert got[4] == {5: 0.0}  # common practice (see above)
    with pytest.warns(vicino.DuplicateLocationWarning, match="6 units"):
        r = vicino.within_distance(lonlat, 0.0, metric="great_circle")
    assert r.nnz == 4 * 3 + 2  # common practice: radius 0 links the units at one place


# ---------------------------------------------------------------------------
# input order: the core searches in a space-filling order of its own
# ---------------------------------------------------------------------------
def test_shuffled_and_sorted_points_give_the_same_weights():
    rng = np.random.default_rng(7)
    n, k = 3000, 8
    xy = rng.random((n, 2))
    radius = float(np.sqrt(k / (np.pi * n)))
    # the same points sorted in strips (each strip by x) and shuffled
    sorted_order = np.lexsort((xy[:, 0], np.floor(xy[:, 1] * 12)))
    shuffled_order = rng.permutation(n)
    tree = cKDTree(xy)
    dist, idx = tree.query(xy, k=k + 1)  # reference: scipy.spatial.cKDTree
    knn_ref = sp.csr_array((dist[:, 1:].ravel(), idx[:, 1:].ravel(), np.arange(0, n * k + 1, k)), shape=(n, n))
    pairs = tree.query_pairs(radius, output_type="ndarray")  # reference: scipy.spatial.cKDTree
    i, j = np.r_[pairs[:, 0], pairs[:, 1]], np.r_[pairs[:, 1], pairs[:, 0]]
    band_ref = sp.csr_array((np.hypot(*(xy[i] - xy[j]).T), (i, j)), shape=(n, n))
    for order in (sorted_order, shuffled_order):
        back = np.argsort(order)  # position in the reordered input of each original point
        built = (vicino.k_nearest(xy[order], k), vicino.within_distance(xy[order], radius))
        for w, ref in zip(built, (knn_ref, band_ref)):
            m = w.to_scipy()
            assert all(np.all(np.diff(m.indices[a:b]) > 0) for a, b in zip(m.indptr[:-1], m.indptr[1:]))  # sorted rows
            d = sp.csr_array((w.to_edges()["distance"].to_numpy(), m.indices, m.indptr), shape=(n, n))
            relabeled = d[back][:, back]  # back in the original labels
            assert (relabeled != 0).astype(int).sum() == ref.nnz  # reference: scipy.spatial.cKDTree
            assert ((relabeled != 0) != (ref != 0)).nnz == 0  # reference: scipy.spatial.cKDTree
            assert np.allclose(relabeled[ref != 0], ref[ref != 0], rtol=1e-12, atol=0)  # reference: cKDTree distances
    # the two orders agree with each other exactly, distances bit for bit
    a, b = (vicino.within_distance(xy[o], radius) for o in (sorted_order, shuffled_order))
    da = sp.csr_array((a.to_edges()["distance"].to_numpy(), a.to_scipy().indices, a.to_scipy().indptr), shape=(n, n))
    db = sp.csr_array((b.to_edges()["distance"].to_numpy(), b.to_scipy().indices, b.to_scipy().indptr), shape=(n, n))
    ia, ib = np.argsort(sorted_order), np.argsort(shuffled_order)
    assert (da[ia][:, ia] != db[ib][:, ib]).nnz == 0  # reference: the same points (common practice)
