"""Regression tests of the hardening: no abort, panic, hang or silent wrong answer.

Each test names the case it guards and checks vicino against an outside
reference (scipy, numpy, a published identity) or checks the error it must
raise.
"""

from __future__ import annotations

import ast
import copy
import pickle
import threading
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.spatial import cKDTree

import vicino
from oracles import brute_euclidean, check_error


@pytest.fixture
def limit():
    """Restore the memory limit after a test changes it."""
    before = vicino.get_memory_limit()
    yield
    vicino.set_memory_limit(None)
    assert vicino.get_memory_limit() == before


def knn_links(xy: np.ndarray, k: int) -> set[tuple[int, int]]:
    """Links of the k nearest by scipy's cKDTree (ties are absent from random data)."""
    _, idx = cKDTree(xy).query(xy, k=k + 1)
    return {(i, int(j)) for i in range(len(xy)) for j in idx[i, 1:]}


def links(w: vicino.Weights) -> set[tuple[int, int]]:
    m = w.to_scipy().tocoo()
    return set(zip(m.row.tolist(), m.col.tolist()))


# ---- outputs beyond the memory budget are refused, with the estimate -------------
def test_all_pairs_within_a_huge_radius_are_refused_not_allocated():
    xy = np.random.default_rng(1).random((50_000, 2))
    with pytest.raises(vicino.TooLargeError, match=r"GB.*smaller radius") as err:
        vicino.within_distance(xy, 10.0)
    check_error(err, vicino.TooLargeError, MemoryError)
    # every pair is within 10 of every other: n (n - 1) links of 24 bytes (common practice: CSR sizes)
    assert "60.0 GB" in str(err.value)


def test_k_of_almost_n_is_refused_with_the_estimate():
    xy = np.random.default_rng(2).random((50_000, 2))
    with pytest.raises(vicino.TooLargeError, match="smaller k"):
        vicino.k_nearest(xy, k=49_999)


def test_the_limit_applies_to_k_step_orders_and_permutations(limit):
    xy = np.random.default_rng(3).random((300, 2))
    w = vicino.k_nearest(xy, 4)
    vicino.set_memory_limit(10_000)
    assert vicino.get_memory_limit() == 10_000
    with pytest.raises(vicino.TooLargeError, match="k-step"):
        w.order(6, cumulative=True)
    with pytest.raises(vicino.TooLargeError, match="fewer permutations"):
        vicino.moran(xy[:, 0], w, permutations=10**6, seed=1)
    with pytest.raises(vicino.TooLargeError):
        vicino.k_nearest(xy, 100)
    vicino.set_memory_limit(None)
    assert links(vicino.k_nearest(xy, 4)) == knn_links(xy, 4)  # reference: scipy cKDTree


def test_a_huge_permutation_count_is_refused_before_any_draw():
    xy = np.random.default_rng(4).random((50, 2))
    w = vicino.k_nearest(xy, 3)
    with pytest.raises(vicino.TooLargeError):
        vicino.moran(xy[:, 0], w, permutations=10**15, seed=1)


# ---- inputs are private snapshots: another thread writing them changes nothing ------
def test_a_thread_writing_the_coordinates_cannot_break_a_search():
    rng = np.random.default_rng(5)
    xy = rng.random((4_000, 2))
    good = xy[7].copy()
    expected = knn_links(xy, 5)  # reference: scipy cKDTree
    stop = threading.Event()

    def scribble():
        while not stop.is_set():
            xy[7] = np.nan
            xy[7] = good

    writer = threading.Thread(target=scribble)
    writer.start()
    outcomes = set()
    try:
        for _ in range(30):
            try:
                w = vicino.k_nearest(xy, 5)
            except vicino.InvalidInputError:
                outcomes.add("refused")  # the snapshot held the NaN: a clear error
            else:
                assert links(w) == expected  # the snapshot held the good value: the right answer
                outcomes.add("built")
    finally:
        stop.set()
        writer.join()
    assert outcomes <= {"refused", "built"}


def test_a_thread_writing_the_values_cannot_change_a_lag():
    # Python-level writes hold the GIL, so the snapshot holds one whole state;
    # (a bulk NumPy copy that releases the GIL could tear any reader, NumPy's own included)
    rng = np.random.default_rng(6)
    xy = rng.random((2_000, 2))
    w = vicino.k_nearest(xy, 6).standardize("row")
    x = rng.random(2_000)
    states = [x.copy(), x.copy()]
    states[1][5] = 1e6
    stop = threading.Event()

    def scribble():
        while not stop.is_set():
            x[5] = 1e6
            x[5] = states[0][5]

    writer = threading.Thread(target=scribble)
    writer.start()
    try:
        m = w.to_scipy()
        expected = [m @ s for s in states]  # reference: scipy sparse product of each whole state
        for _ in range(50):
            lag = w.lag(x)
            assert any(np.array_equal(lag, e) or np.allclose(lag, e, rtol=1e-15, atol=0) for e in expected)
    finally:
        stop.set()
        writer.join()


def test_weights_buffers_cannot_be_written():
    w = vicino.k_nearest(np.random.default_rng(7).random((20, 2)), 3)
    m = w.to_scipy()
    for a in (m.indptr, m.indices, m.data):
        with pytest.raises(ValueError):
            a[0] = 5
        base = a.base
        while isinstance(base, np.ndarray):
            assert not base.flags.writeable
            base = base.base


# ---- the public constructor checks its buffers ---------------------------------------
@pytest.mark.parametrize(
    "indptr,indices,data,match",
    [
        ([0, 1, 2], [5, 0], [1.0, 1.0], "out of range|larger"),  # an index beyond n
        ([0, 2, 2], [1, 0], [1.0, 1.0], "sorted|Structure"),  # unsorted row
        ([0, 1, 2], [1, 0], [0.0, 1.0], "0; a zero weight is no link"),
        ([0, 1, 2], [1, 0], [np.nan, 1.0], "finite"),
        ([0, 1, 2], [1, 0], [-1.0, 1.0], ">= 0"),
        ([0, 1, 3], [1, 0], [1.0, 1.0], "indptr"),
    ],
)
def test_public_constructor_refuses_inconsistent_buffers(indptr, indices, data, match):
    with pytest.raises(vicino.InvalidMatrixError, match=match) as err:
        vicino.Weights(indptr, indices, data, ["a", "b"])
    check_error(err, vicino.InvalidMatrixError, ValueError)


def test_public_constructor_copies_and_checks_ids():
    indptr, indices, data = np.array([0, 1, 2]), np.array([1, 0]), np.array([1.0, 2.0])
    w = vicino.Weights(indptr, indices, data, ["a", "b"])
    data[0] = 99.0
    assert w.to_dense().tolist() == [[0.0, 1.0], [2.0, 0.0]]  # by hand: the copy made at construction
    with pytest.raises(vicino.IdError):
        vicino.Weights(indptr, indices, data, ["a", "a"])
    with pytest.raises(vicino.IdError):
        vicino.Weights(indptr, indices, data, ["a"])


# ---- tiny and huge magnitudes ----------------------------------------------------------
def test_tiny_coordinates_give_the_same_neighbours_and_scaled_distances():
    xy = np.random.default_rng(8).random((300, 2))
    scale = 1e-170
    w = vicino.k_nearest(xy * scale, 6)
    assert links(w) == knn_links(xy, 6)  # reference: scipy cKDTree on the unscaled points
    d = brute_euclidean(xy)
    e = w.to_edges()
    pos = pd.Series(np.arange(300), index=w.ids)
    ref = d[pos[e["source"]].to_numpy(), pos[e["target"]].to_numpy()] * scale
    np.testing.assert_allclose(e["distance"], ref, rtol=1e-12)  # reference: numpy distances times the scale
    band = vicino.within_distance(xy * scale, 0.1 * scale)
    ref_band = {(i, j) for i in range(300) for j in range(300) if i != j and d[i, j] <= 0.1}
    assert links(band) == ref_band  # reference: numpy brute force on the unscaled points


def test_tiny_coordinates_beside_large_ones_are_refused():
    xy = np.random.default_rng(9).random((30, 2))
    xy[4] = [3e-170, 0.5]
    with pytest.raises(vicino.InvalidInputError, match=r"unit 4 .*round such tiny values to 0") as err:
        vicino.k_nearest(xy, 3)
    assert err.value.positions == [4] and err.value.ids == [4]


def test_tiny_great_circle_coordinates_are_refused():
    lonlat = np.array([[0.0, 0.0], [1e-150, 0.0], [10.0, 10.0]])
    with pytest.raises(vicino.InvalidInputError, match="tiny"):
        vicino.k_nearest(lonlat, 1, metric="great_circle")


def dense_weights(scale: float) -> tuple[np.ndarray, vicino.Weights]:
    a = np.array([[0, 2, 1, 0], [1, 0, 0, 3], [1, 1, 0, 1], [0, 4, 1, 0]], dtype=float) * scale
    return a, vicino.from_matrix(a)


@pytest.mark.parametrize("scale", [1e300, 1e-300, 1e-320])
@pytest.mark.parametrize("method", ["row", "global", "max_entry", "variance_stabilizing", "max_eigenvalue"])
def test_standardization_is_right_at_extreme_magnitudes(scale, method):
    # every standardization is invariant to the scale of W (common practice), so the
    # result must equal numpy's on the stored matrix brought near 1 by an exact power of two
    _, w = dense_weights(scale)
    stored = w.to_dense()
    a1 = np.ldexp(stored, -int(np.frexp(stored.max())[1]))  # exact: only the exponents change
    got = w.standardize(method).to_dense()
    n = 4
    if method == "row":
        ref = a1 / a1.sum(axis=1, keepdims=True)
    elif method == "global":
        ref = n * a1 / a1.sum()
    elif method == "max_entry":
        ref = a1 / a1.max()
    elif method == "variance_stabilizing":
        q = a1 / np.sqrt((a1**2).sum(axis=1, keepdims=True))
        ref = n * q / q.sum()
    else:
        ref = a1 / np.abs(np.linalg.eigvals(a1)).max()
    np.testing.assert_allclose(got, ref, rtol=1e-11, atol=0)  # reference: numpy formulas / eigvals


def test_spectral_radius_scales_with_huge_weights():
    a1, _ = dense_weights(1.0)
    _, w = dense_weights(1e300)
    rho = np.abs(np.linalg.eigvals(a1)).max()  # reference: numpy eigvals
    assert w.spectral_radius() == pytest.approx(rho * 1e300, rel=1e-10)


@pytest.mark.parametrize("wscale,xscale", [(1e200, 1.0), (1e-200, 1.0), (1.0, 1e200), (1.0, 1e-200), (1e250, 1e-250)])
def test_moran_is_invariant_to_the_scale_of_weights_and_values(wscale, xscale):
    # I and its moments are unchanged when W or x is multiplied by a constant (Cliff and Ord 1981)
    rng = np.random.default_rng(10)
    xy = rng.random((80, 2))
    base = vicino.k_nearest(xy, 5).symmetrize()
    x = rng.normal(size=80)
    ref = vicino.moran(x, base, permutations=0)
    scaled = vicino.from_matrix(base.to_scipy() * wscale)
    got = vicino.moran(x * xscale, scaled, permutations=0)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-12)
    assert got.normality.variance == pytest.approx(ref.normality.variance, rel=1e-10)
    assert got.randomization.z == pytest.approx(ref.randomization.z, rel=1e-10)


def test_moran_with_a_huge_offset_is_not_constant():
    rng = np.random.default_rng(11)
    xy = rng.random((60, 2))
    w = vicino.k_nearest(xy, 4).standardize("row")
    k = rng.integers(0, 50, 60).astype(float)
    # 1e15 + k is exact in binary64 for whole k < 2^53 - 1e15, so the variation is the same
    got = vicino.moran(k + 1e15, w, permutations=0)
    ref = vicino.moran(k, w, permutations=0)
    assert got.statistic == pytest.approx(ref.statistic, rel=1e-12)  # reference: I is shift invariant


def test_a_lag_that_overflows_is_refused():
    w = vicino.from_matrix(np.array([[0, 2.0], [1.0, 0]]), ids=["p", "q"])
    with pytest.raises(vicino.InvalidValuesError, match="overflows") as err:
        w.lag(np.array([1.0, 1e308]))  # 2 * 1e308 is beyond binary64 (common practice)
    assert err.value.ids == ["p"]


# ---- readers refuse what they would misread ----------------------------------------------
def test_masked_coordinates_are_refused_naming_the_units():
    xy = np.ma.masked_array(np.random.default_rng(12).random((10, 2)))
    xy[3, 1] = np.ma.masked
    with pytest.raises(vicino.InvalidInputError, match="masked") as err:
        vicino.k_nearest(xy, 2)
    assert err.value.positions == [3]
    unmasked = np.ma.masked_array(xy.data, mask=False)
    assert links(vicino.k_nearest(unmasked, 2)) == knn_links(xy.data, 2)  # reference: scipy cKDTree


def test_masked_values_are_refused_naming_the_units():
    w = vicino.k_nearest(np.random.default_rng(13).random((10, 2)), 2)
    x = np.ma.masked_array(np.arange(10.0), mask=[False] * 9 + [True])
    with pytest.raises(vicino.InvalidValuesError, match="masked") as err:
        w.lag(x)
    assert err.value.ids == [9]


@pytest.mark.parametrize(
    "coords,kind",
    [
        (np.ones((5, 2)) + 1j, "complex"),
        (np.array(["2020-01-01"] * 10, dtype="datetime64[D]").reshape(5, 2), "dates"),
        (np.array([[True, False]] * 5), "booleans"),
    ],
)
def test_coordinates_of_other_kinds_are_refused(coords, kind):
    with pytest.raises(vicino.InvalidTypeError, match=kind) as err:
        vicino.k_nearest(coords, 1)
    check_error(err, vicino.InvalidTypeError, TypeError)


def test_complex_matrices_and_values_are_refused():
    with pytest.raises(vicino.InvalidTypeError):
        vicino.from_matrix(np.eye(3) * (1 + 1j))
    w = vicino.k_nearest(np.random.default_rng(14).random((5, 2)), 1)
    with pytest.raises(vicino.InvalidTypeError, match="complex"):
        w.lag(np.ones(5) * 1j)


def test_ragged_lists_are_refused():
    with pytest.raises(vicino.InvalidInputError, match="same number of values"):
        vicino.k_nearest([[0.0, 1.0], [2.0], [3.0, 4.0]], 1)
    w = vicino.k_nearest(np.random.default_rng(15).random((3, 2)), 1)
    with pytest.raises(vicino.InvalidValuesError):
        w.lag([[1.0, 2.0], [3.0], [4.0, 5.0]])


def test_from_matrix_dataframe_matches_columns_by_label():
    ids = ["a", "b", "c"]
    dense = np.array([[0, 1, 0], [1, 0, 2], [0, 3, 0]], dtype=float)
    frame = pd.DataFrame(dense, index=ids, columns=ids)[["c", "a", "b"]]  # columns shuffled
    w = vicino.from_matrix(frame)
    np.testing.assert_array_equal(w.to_dense(), dense)  # reference: the frame reindexed by label
    assert w.neighbors_of("a").to_dict() == {"b": 1.0}
    with pytest.raises(vicino.IdError, match="column labels"):
        vicino.from_matrix(pd.DataFrame(dense, index=ids, columns=["a", "b", "z"]))


def test_nullable_values_with_na_name_the_units():
    w = vicino.k_nearest(np.random.default_rng(16).random((6, 2)), 2)
    x = pd.Series([1, 2, pd.NA, 4, 5, 6], dtype="Int64")
    with pytest.raises(vicino.InvalidValuesError, match="missing") as err:
        w.lag(x)
    assert err.value.ids == [2]
    frame = pd.DataFrame({"x": pd.array([0.1, None, 0.3], dtype="Float64"), "y": [0.0, 1.0, 2.0]})
    with pytest.raises(vicino.InvalidInputError, match="missing") as err2:
        vicino.k_nearest(frame, 1)
    assert err2.value.ids == [1]


def test_duplicate_column_names_in_a_lag_are_refused():
    w = vicino.k_nearest(np.random.default_rng(17).random((5, 2)), 1)
    frame = pd.DataFrame(np.ones((5, 2)), columns=["v", "v"])
    with pytest.raises(vicino.InvalidValuesError, match="repeat"):
        w.lag(frame)


def test_geometry_collections_are_refused_with_advice():
    pytest.importorskip("shapely")
    from shapely.geometry import GeometryCollection, box

    units = pd.Series([box(0, 0, 1, 1), GeometryCollection([box(1, 0, 2, 1)]), box(2, 0, 3, 1)], index=list("abc"))
    with pytest.raises(vicino.InvalidInputError, match=r"GeometryCollection.*polygon parts") as err:
        vicino.contiguity(units)
    assert "'b'" in str(err.value)  # names the unit that holds the collection


# ---- the right error, clearly worded ------------------------------------------------------
@pytest.mark.parametrize("huge", [2**64, 2**70, 10**30])
def test_integers_beyond_64_bits_are_parameter_errors(huge):
    xy = np.random.default_rng(18).random((10, 2))
    w = vicino.k_nearest(xy, 2)
    for call in (
        lambda: vicino.k_nearest(xy, huge),
        lambda: w.order(huge),
        lambda: vicino.moran(xy[:, 0], w, permutations=huge),
        lambda: w.connect_islands(xy, k=huge),
    ):
        with pytest.raises(vicino.InvalidParameterError, match="too large"):
            call()


def test_one_permutation_is_refused():
    xy = np.random.default_rng(19).random((10, 2))
    w = vicino.k_nearest(xy, 2)
    with pytest.raises(vicino.InvalidParameterError, match="permutations = 1"):
        vicino.moran(xy[:, 0], w, permutations=1)
    r = vicino.moran(xy[:, 0], w, permutations=2, seed=3)
    assert np.isfinite(r.permutation.std)


@pytest.mark.parametrize("key", [["a", "b"], slice("a", "b"), np.array(["a"])])
def test_neighbors_of_takes_one_id(key):
    w = vicino.k_nearest(np.random.default_rng(20).random((4, 2)), 1, ids=list("abcd"))
    with pytest.raises(vicino.IdError, match="one id"):
        w.neighbors_of(key)


def test_neighbors_of_refuses_part_of_a_multiindex_key():
    ids = pd.MultiIndex.from_product([["north", "south"], [1, 2]])
    w = vicino.k_nearest(np.random.default_rng(21).random((4, 2)), 1, ids=ids)
    with pytest.raises(vicino.IdError, match="part of an id"):
        w.neighbors_of("north")
    assert len(w.neighbors_of(("north", 1))) == 1  # by hand: k = 1


def test_an_audit_of_self_links_only_finds_islands():
    w = vicino.from_matrix(sp.eye(4, format="csr"))
    report = w.audit()
    assert list(report.islands) == [0, 1, 2, 3]  # by hand: nobody links another unit
    islands = next(f for f in report.findings if f.check == "islands")
    assert islands.level == "problem" and "linked only to themselves" in islands.message
    assert w.counts.tolist() == [0, 0, 0, 0] and w.self_links == 4
    with pytest.raises(vicino.IslandError):
        w.standardize("row")


def test_every_route_names_both_units_of_a_pair():
    shapely = pytest.importorskip("shapely")
    a = shapely.box(0, 0, 2, 2)
    units = pd.Series([a, shapely.box(0, 0, 2, 2), shapely.box(2, 0, 3, 2)], index=["Orlen", "Quay", "Rusk"])
    # Orlen and Quay are copies: rook neighbours whose centroids coincide
    with pytest.raises(vicino.InvalidParameterError, match="'Orlen' and 'Quay'") as err:
        vicino.cliff_ord(units)
    assert err.value.ids == ["Orlen", "Quay"]


def test_repairs_with_polygon_locations_name_the_unlocated_units():
    shapely = pytest.importorskip("shapely")
    units = pd.Series(
        [shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1), shapely.Polygon()], index=["Ashby", "Brent", "Cove"]
    )
    with pytest.warns(UserWarning, match="empty geometry"):
        w = vicino.contiguity(units)
    with pytest.raises(vicino.InvalidInputError, match="'Cove'") as err:
        w.connect_islands(units)
    assert err.value.ids == ["Cove"]


# ---- copies ------------------------------------------------------------------------------------
def test_weights_and_results_survive_pickle_and_copies():
    rng = np.random.default_rng(22)
    xy = rng.random((30, 2))
    w = vicino.k_nearest(xy, 3, ids=[f"u{i}" for i in range(30)]).standardize("row")
    r = vicino.moran(xy[:, 0], w, permutations=9, seed=1)
    report = w.audit()
    for obj in (w, r, report, report.findings[0], report.components, w.recipe[-1]):
        for twin in (pickle.loads(pickle.dumps(obj)), copy.copy(obj), copy.deepcopy(obj)):
            assert type(twin) is type(obj)
    twin = pickle.loads(pickle.dumps(w))
    assert (twin.to_scipy() != w.to_scipy()).nnz == 0 and twin.ids.equals(w.ids) and twin.recipe == w.recipe
    np.testing.assert_array_equal(twin.to_edges()["distance"], w.to_edges()["distance"])
    rt = pickle.loads(pickle.dumps(r))
    assert rt.statistic == r.statistic and rt.permutation.p_value == r.permutation.p_value
    np.testing.assert_array_equal(rt.permutation.draws, r.permutation.draws)
    err = vicino.IdError("x", count=1, positions=[2], ids=["b"])
    back = pickle.loads(pickle.dumps(err))
    assert (str(back), back.positions, back.ids) == ("x", [2], ["b"])


# ---- one gateway into the core ----------------------------------------------------------------
def test_only_the_gateway_imports_the_compiled_module():
    package = Path(vicino.__file__).parent
    for path in package.glob("*.py"):
        tree = ast.parse(path.read_text())
        for node in ast.walk(tree):
            names = []
            if isinstance(node, ast.ImportFrom):
                names = [a.name for a in node.names] + [node.module or ""]
            elif isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            if any(n.endswith("_core") for n in names):
                assert path.name == "_gateway.py", f"{path.name} imports the compiled module directly"
