"""The Weights type: immutability, conversions, ids, display and recipe.

References: scipy.sparse (the matrix format and its canonical-form checks),
scipy.spatial.cKDTree (neighbour searches), NumPy brute force.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.spatial import cKDTree

import vicino


@pytest.fixture
def rng():
    return np.random.default_rng(12345)


@pytest.fixture
def knn(rng):
    xy = rng.random((40, 2))
    return xy, vicino.k_nearest(xy, 3)


def knn_reference(xy, k):
    """Binary kNN matrix from cKDTree, as scipy CSR."""
    n = len(xy)
    _, idx = cKDTree(xy).query(xy, k=k + 1)
    rows = np.repeat(np.arange(n), k)
    return sp.csr_array((np.ones(n * k), (rows, idx[:, 1:].ravel())), shape=(n, n))


# ---------------------------------------------------------------------------
# immutability
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("name", ["n", "nnz", "ids", "recipe", "counts", "islands", "something_new"])
def test_setting_attributes_raises(knn, name):
    _, w = knn
    before = w.to_dense().copy()
    with pytest.raises(AttributeError, match="immutable"):
        setattr(w, name, 1)
    np.testing.assert_array_equal(w.to_dense(), before)  # reference: the matrix before the attempt


def test_private_buffers_cannot_be_rebound(knn):
    _, w = knn
    with pytest.raises(AttributeError):
        w._data = np.zeros(w.nnz)


def test_arrays_are_read_only(knn):
    _, w = knn
    m = w.to_scipy()
    for arr in (m.data, m.indices, m.indptr):
        assert not arr.flags.writeable  # common practice (read-only numpy buffers)
        with pytest.raises(ValueError, match="read-only"):
            arr[0] = arr[0] + 1
    # the edge table and counts are copies: changing them does not change the weights
    e = w.to_edges()
    e.loc[0, "weight"] = 99.0
    c = w.counts
    c.iloc[0] = 99
    assert w.to_edges().loc[0, "weight"] == 1.0  # reference: binary weights of k_nearest
    assert w.counts.iloc[0] == 3  # reference: k = 3


def test_ids_cannot_be_changed_in_place(knn):
    _, w = knn
    with pytest.raises(TypeError):
        w.ids[0] = "x"  # pandas Index is immutable (common practice)


def test_transformations_return_new_objects(knn):
    _, w = knn
    before = w.to_dense().copy()
    r = w.standardize("row")
    assert r is not w
    np.testing.assert_array_equal(w.to_dense(), before)  # reference: the matrix before standardize
    np.testing.assert_allclose(r.to_dense(), before / before.sum(axis=1, keepdims=True))  # reference: numpy row sums


def test_recipe_cannot_be_rewritten(knn):
    _, w = knn
    with pytest.raises(TypeError):
        w.recipe[0].params["k"] = 99
    assert w.recipe[0].params["k"] == 3  # reference: the k passed in the fixture


# ---------------------------------------------------------------------------
# to_scipy: shared memory, dtypes, canonical form
# ---------------------------------------------------------------------------
def test_to_scipy_shares_memory(knn):
    _, w = knn
    m1, m2 = w.to_scipy(), w.to_scipy()
    assert np.shares_memory(m1.data, w._data)  # reference: numpy.shares_memory
    assert np.shares_memory(m1.indices, w._indices)  # reference: numpy.shares_memory
    assert np.shares_memory(m1.indptr, w._indptr)  # reference: numpy.shares_memory
    assert np.shares_memory(m1.data, m2.data)  # reference: numpy.shares_memory
    assert m1.indices.dtype == np.int64  # common practice (64-bit indices for large n)
    assert m1.indptr.dtype == np.int64  # common practice
    assert m1.data.dtype == np.float64  # common practice
    assert isinstance(m1, sp.csr_array)
    assert m1.shape == (w.n, w.n)


def test_to_scipy_shares_memory_after_standardize(knn):
    _, w = knn
    r = w.standardize("row")
    m = r.to_scipy()
    assert np.shares_memory(m.data, r._data)  # reference: numpy.shares_memory
    assert np.shares_memory(m.indices, r._indices)  # reference: numpy.shares_memory
    assert m.indices.dtype == np.int64 and m.indptr.dtype == np.int64  # common practice


@pytest.mark.parametrize("maker", ["k_nearest", "within_distance", "from_matrix"])
def test_canonical_csr(rng, maker):
    xy = rng.random((120, 2))
    if maker == "k_nearest":
        w = vicino.k_nearest(xy, 6)
    elif maker == "within_distance":
        w = vicino.within_distance(xy, 0.12)
    else:
        # unsorted indices and duplicate entries in the input
        r = rng.integers(0, 120, 800)
        c = rng.integers(0, 120, 800)
        w = vicino.from_matrix(sp.coo_array((rng.random(800), (r, c)), shape=(120, 120)))
    m = w.to_scipy()
    # independent check: rebuild the canonical form with scipy from a copy
    copy = sp.csr_array((m.data.copy(), m.indices.copy(), m.indptr.copy()), shape=m.shape)
    copy.has_sorted_indices = False
    copy.has_canonical_format = False
    copy.sum_duplicates()
    copy.sort_indices()
    np.testing.assert_array_equal(copy.indptr, m.indptr)  # reference: scipy.sparse sum_duplicates/sort_indices
    np.testing.assert_array_equal(copy.indices, m.indices)  # reference: scipy.sparse canonical form
    np.testing.assert_array_equal(copy.data, m.data)  # reference: scipy.sparse canonical form
    for i in range(m.shape[0]):
        row = m.indices[m.indptr[i] : m.indptr[i + 1]]
        assert (np.diff(row) > 0).all()  # reference: numpy (strictly increasing = sorted, no duplicates)
    fresh = sp.csr_array((m.data, m.indices, m.indptr), shape=m.shape)
    assert fresh.has_canonical_format  # reference: scipy.sparse has_canonical_format
    assert (m.data != 0).all()  # common practice (no explicit zeros)


# ---------------------------------------------------------------------------
# counts, islands, to_dense, to_edges, neighbors_of
# ---------------------------------------------------------------------------
def test_counts_indexed_by_ids(rng):
    xy = rng.random((60, 2))
    ids = [f"s{i}" for i in range(60)]
    w = vicino.within_distance(xy, 0.15, ids=ids)
    balls = cKDTree(xy).query_ball_point(xy, 0.15)  # reference: scipy.spatial.cKDTree
    expected = pd.Series([len(b) - 1 for b in balls], index=pd.Index(ids))
    assert isinstance(w.counts, pd.Series)
    assert w.counts.index.equals(pd.Index(ids))  # reference: ids passed in
    np.testing.assert_array_equal(w.counts.to_numpy(), expected.to_numpy())  # reference: cKDTree.query_ball_point
    m = w.to_scipy()
    np.testing.assert_array_equal(w.counts.to_numpy(), m.count_nonzero(axis=1))  # reference: scipy count_nonzero
    assert list(w.islands) == list(expected.index[expected == 0])  # reference: cKDTree.query_ball_point


def test_to_dense_small_equals_scipy(knn):
    xy, w = knn
    ref = knn_reference(xy, 3)
    np.testing.assert_array_equal(w.to_dense(), ref.toarray())  # reference: scipy.spatial.cKDTree
    np.testing.assert_array_equal(w.to_dense(force=True), ref.toarray())  # reference: scipy.spatial.cKDTree
    assert w.to_dense().dtype == np.float64


def test_to_dense_refuses_large_n(rng):
    xy = rng.random((5001, 2))
    w = vicino.k_nearest(xy, 1)
    with pytest.raises(vicino.InvalidParameterError, match="force=True") as err:
        w.to_dense()
    assert isinstance(err.value, vicino.VicinoError)
    assert isinstance(err.value, ValueError)
    assert "5001" in str(err.value)
    # the sparse matrix is still available
    assert w.to_scipy().nnz == 5001  # reference: k = 1 link per unit


def test_to_edges_columns_and_values(rng):
    xy = rng.random((50, 2))
    ids = pd.Index([f"z{i}" for i in range(50)], name="zone")
    w = vicino.k_nearest(xy, 4, ids=ids)
    e = w.to_edges()
    assert list(e.columns) == ["source", "target", "weight", "distance"]
    assert len(e) == w.nnz == 200  # reference: 50 units x k = 4
    dist, idx = cKDTree(xy).query(xy, k=5)  # reference: scipy.spatial.cKDTree
    expected = {(ids[i], ids[j]): dist[i, c + 1] for i in range(50) for c, j in enumerate(idx[i, 1:])}
    got = {(f, nb): d for f, nb, d in zip(e["source"], e["target"], e["distance"])}
    assert set(got) == set(expected)  # reference: scipy.spatial.cKDTree
    for key, d in expected.items():
        assert got[key] == pytest.approx(d, rel=1e-12)  # reference: scipy.spatial.cKDTree
    assert (e["weight"] == 1.0).all()  # common practice (binary kNN weights)

    # from_matrix knows no distances
    m = sp.random_array((10, 10), density=0.3, rng=rng, format="csr")
    e2 = vicino.from_matrix(m).to_edges()
    assert list(e2.columns) == ["source", "target", "weight"]
    coo = m.tocoo()
    ref = sorted(zip(coo.row.tolist(), coo.col.tolist(), coo.data.tolist()))
    assert sorted(zip(e2["source"], e2["target"], e2["weight"])) == ref  # reference: scipy COO of the input


def test_neighbors_of(rng):
    xy = rng.random((30, 2))
    ids = [f"p{i}" for i in range(30)]
    w = vicino.k_nearest(xy, 5, ids=ids)
    _, idx = cKDTree(xy).query(xy, k=6)  # reference: scipy.spatial.cKDTree
    for i in (0, 7, 29):
        s = w.neighbors_of(ids[i])
        assert isinstance(s, pd.Series)
        assert set(s.index) == {ids[j] for j in idx[i, 1:]}  # reference: scipy.spatial.cKDTree
        assert (s == 1.0).all()  # common practice (binary weights)
    r = w.standardize("row")
    np.testing.assert_allclose(r.neighbors_of("p3").to_numpy(), np.full(5, 0.2))  # reference: 1 / k
    with pytest.raises(vicino.IdError, match="unknown id"):
        w.neighbors_of("nope")


# ---------------------------------------------------------------------------
# display and recipe
# ---------------------------------------------------------------------------
def test_repr_and_html(rng):
    xy = rng.random((300, 2))
    radius = 0.02
    w = vicino.within_distance(xy, radius)
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    n_islands = int((d.min(axis=1) > radius).sum())  # reference: numpy brute force
    n_links = int((d <= radius).sum())  # reference: numpy brute force
    assert n_islands > 0
    text = repr(w)
    html = w._repr_html_()
    for out in (text, html):
        assert "300" in out  # the size
        assert f"{n_links:,}" in out  # reference: numpy brute force
        assert "islands" in out
        assert "within_distance" in out and "0.02" in out  # the recipe
    assert f"islands: {n_islands}" in text  # reference: numpy brute force
    assert f"<td style='text-align:left'>{n_islands}</td>" in html  # reference: numpy brute force
    assert "<table>" in html


def test_recipe_records_steps(knn):
    _, w = knn
    assert len(w.recipe) == 1
    assert w.recipe[0] == vicino.Step("k_nearest", {"k": 3, "metric": "euclidean"})  # reference: arguments given
    r = w.standardize("row").standardize("binary")
    assert [s.action for s in r.recipe] == ["k_nearest", "standardize", "standardize"]
    assert r.recipe[1].params == {"method": "row"}  # reference: arguments given
    assert r.recipe[2].params == {"method": "binary"}  # reference: arguments given
    assert len(w.recipe) == 1  # the original is unchanged
    assert "k_nearest(k=3, metric='euclidean') -> standardize(method='row')" in repr(r)
    kept = vicino.within_distance(np.random.default_rng(0).random((20, 2)), 0.01).standardize("row", islands="keep")
    assert kept.recipe[-1].params == {"method": "row", "islands": "keep"}  # reference: arguments given
    m = vicino.from_matrix(np.eye(3)[::-1])
    assert m.recipe == (vicino.Step("from_matrix", {"n": 3}),)  # reference: input shape


# ---------------------------------------------------------------------------
# from_matrix
# ---------------------------------------------------------------------------
def test_from_matrix_sparse_equals_input(rng):
    m = sp.random_array((80, 80), density=0.05, rng=rng, format="csr")
    w = vicino.from_matrix(m)
    assert w.n == 80
    assert w.nnz == m.nnz  # reference: scipy.sparse input
    assert (w.to_scipy() != m).nnz == 0  # reference: the scipy matrix itself
    np.testing.assert_array_equal(w.to_dense(), m.toarray())  # reference: the scipy matrix itself
    assert w.ids.equals(pd.RangeIndex(80))  # common practice (positions as default ids)


@pytest.mark.parametrize("fmt", ["csc", "coo", "lil", "dok"])
def test_from_matrix_other_sparse_formats(rng, fmt):
    m = sp.random_array((30, 30), density=0.1, rng=rng, format=fmt)
    w = vicino.from_matrix(m)
    np.testing.assert_array_equal(w.to_dense(), m.toarray())  # reference: the scipy matrix itself


def test_from_matrix_dense_equals_input(rng):
    a = rng.random((25, 25))
    a[a < 0.7] = 0.0
    w = vicino.from_matrix(a)
    np.testing.assert_array_equal(w.to_dense(), a)  # reference: the input array
    assert w.nnz == np.count_nonzero(a)  # reference: numpy.count_nonzero
    ints = (a > 0).astype(np.int32)
    np.testing.assert_array_equal(vicino.from_matrix(ints).to_dense(), ints)  # reference: the input array


def test_from_matrix_copies_drops_zeros_sums_duplicates(rng):
    rows = np.array([0, 0, 1, 2, 2, 2])
    cols = np.array([1, 1, 0, 0, 1, 1])
    vals = np.array([0.5, 0.25, 1.0, 0.0, 2.0, 3.0])
    coo = sp.coo_array((vals, (rows, cols)), shape=(3, 3))
    w = vicino.from_matrix(coo)
    ref = coo.tocsr()  # scipy sums duplicates on conversion
    ref.eliminate_zeros()
    np.testing.assert_array_equal(w.to_dense(), ref.toarray())  # reference: scipy.sparse sum_duplicates
    assert w.nnz == ref.nnz == 3  # reference: scipy.sparse eliminate_zeros
    # the input is copied
    dense = ref.toarray()
    m = sp.csr_array(dense)
    w2 = vicino.from_matrix(m)
    m.data[:] = 7.0
    np.testing.assert_array_equal(w2.to_dense(), dense)  # reference: the matrix before mutation
    a = dense.copy()
    w3 = vicino.from_matrix(a)
    a[:] = 9.0
    np.testing.assert_array_equal(w3.to_dense(), dense)  # reference: the matrix before mutation


def test_from_matrix_dataframe_index_and_ids(rng):
    a = (rng.random((6, 6)) > 0.5).astype(float)
    np.fill_diagonal(a, 0)
    labels = list("uvwxyz")
    df = pd.DataFrame(a, index=labels, columns=labels)
    w = vicino.from_matrix(df)
    assert list(w.ids) == labels  # reference: the DataFrame index
    np.testing.assert_array_equal(w.to_dense(), a)  # reference: the input array
    w2 = vicino.from_matrix(a, ids=[10, 20, 30, 40, 50, 60])
    assert list(w2.ids) == [10, 20, 30, 40, 50, 60]  # reference: ids given


# ---------------------------------------------------------------------------
# ids
# ---------------------------------------------------------------------------
def test_ids_default_range_index(rng):
    w = vicino.k_nearest(rng.random((12, 2)), 2)
    assert isinstance(w.ids, pd.RangeIndex)
    assert w.ids.equals(pd.RangeIndex(12))  # common practice (positions as default ids)


def test_ids_from_dataframe_index(rng):
    xy = rng.random((15, 2))
    idx = pd.Index([f"t{i}" for i in range(15)], name="tract")
    df = pd.DataFrame({"x": xy[:, 0], "y": xy[:, 1], "pop": rng.integers(0, 100, 15)}, index=idx)
    w = vicino.k_nearest(df, 3)
    assert w.ids.equals(idx)  # reference: the DataFrame index
    assert w.counts.index.equals(idx)  # reference: the DataFrame index
    ref = knn_reference(xy, 3)
    np.testing.assert_array_equal(w.to_dense(), ref.toarray())  # reference: scipy.spatial.cKDTree
    # ids= overrides the index
    w2 = vicino.k_nearest(df, 3, ids=range(100, 115))
    assert list(w2.ids) == list(range(100, 115))  # reference: ids given
    # explicit columns
    df2 = df.rename(columns={"x": "east", "y": "north"})
    w3 = vicino.k_nearest(df2, 3, columns=("east", "north"))
    np.testing.assert_array_equal(w3.to_dense(), ref.toarray())  # reference: scipy.spatial.cKDTree


def test_ids_given_as_list(rng):
    xy = rng.random((8, 2))
    ids = ["a", "b", "c", "d", "e", "f", "g", "h"]
    w = vicino.within_distance(xy, 0.4, ids=ids)
    assert list(w.ids) == ids  # reference: ids given
    balls = cKDTree(xy).query_ball_point(xy, 0.4)  # reference: scipy.spatial.cKDTree
    for i, b in enumerate(balls):
        assert set(w.neighbors_of(ids[i]).index) == {ids[j] for j in b if j != i}  # reference: cKDTree


# ---------------------------------------------------------------------------
# lag and standardize against scipy / numpy
# ---------------------------------------------------------------------------
def test_lag_matches_scipy_product(knn, rng):
    xy, w = knn
    r = w.standardize("row")
    x = rng.normal(size=w.n)
    ref = knn_reference(xy, 3)
    ref = ref / ref.sum(axis=1)[:, None]
    np.testing.assert_allclose(r.lag(x), ref @ x, rtol=1e-12)  # reference: scipy.sparse matrix product
    X = rng.normal(size=(w.n, 3))
    np.testing.assert_allclose(r.lag(X), ref @ X, rtol=1e-12)  # reference: scipy.sparse matrix product
    s = pd.Series(x, index=w.ids, name="v")
    out = r.lag(s)
    assert isinstance(out, pd.Series) and out.index.equals(w.ids) and out.name == "v"
    np.testing.assert_allclose(out.to_numpy(), ref @ x, rtol=1e-12)  # reference: scipy.sparse matrix product
