"""Spatial lag W x checked against the SciPy CSR product."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

import vicino


def _points(n, seed):
    return np.random.default_rng(seed).uniform(0, 100, size=(n, 2))


def _random_matrix(n, seed):
    rng = np.random.default_rng(seed)
    a = sp.random(n, n, density=0.1, random_state=rng, format="csr", data_rvs=lambda k: rng.uniform(0.1, 3.0, k))
    a = sp.lil_array(a)
    a.setdiag(0)
    a = sp.csr_array(a)
    a.eliminate_zeros()
    return a


def _weights():
    ids = [f"id{i:03d}" for i in range(40)]
    knn = vicino.k_nearest(_points(40, 1), 4, ids=ids)
    mat = vicino.from_matrix(_random_matrix(40, 2), ids=ids)  # may have empty rows: lag 0 there
    return {
        "knn_binary": knn,
        "knn_row": knn.standardize("row"),
        "matrix_raw": mat,
        "matrix_row": mat.standardize("row", islands="keep"),
    }


WEIGHTS = _weights()


@pytest.fixture(params=sorted(WEIGHTS))
def w(request):
    return WEIGHTS[request.param]


def ref_matrix(w):
    # an independent SciPy CSR matrix with the same entries
    return sp.csr_matrix(w.to_dense())


def test_lag_1d(w):
    x = np.random.default_rng(3).normal(size=w.n)
    got = w.lag(x)
    assert isinstance(got, np.ndarray) and got.shape == (w.n,)
    np.testing.assert_allclose(got, ref_matrix(w) @ x, rtol=1e-12, atol=1e-14)  # reference: scipy.sparse csr @ x


def test_lag_1d_integers(w):
    x = np.arange(w.n, dtype=np.int64) % 7
    np.testing.assert_allclose(w.lag(x), ref_matrix(w) @ x.astype(float), rtol=1e-12, atol=1e-14)  # scipy.sparse


def test_lag_2d(w):
    x = np.random.default_rng(4).normal(size=(w.n, 3))
    got = w.lag(x)
    assert got.shape == (w.n, 3)
    np.testing.assert_allclose(got, ref_matrix(w) @ x, rtol=1e-12, atol=1e-14)  # reference: scipy.sparse csr @ X


def test_lag_2d_non_contiguous(w):
    base = np.random.default_rng(5).normal(size=(w.n, 6))
    x = np.asfortranarray(base)[:, ::2]  # strided, Fortran-ordered view
    np.testing.assert_allclose(w.lag(x), ref_matrix(w) @ base[:, ::2], rtol=1e-12, atol=1e-14)  # scipy.sparse


def test_lag_2d_column_equals_1d(w):
    x = np.random.default_rng(6).normal(size=(w.n, 2))
    # reference: scipy.sparse product column by column
    np.testing.assert_allclose(w.lag(x)[:, 1], ref_matrix(w) @ x[:, 1], rtol=1e-12, atol=1e-14)


def test_lag_series_keeps_index_and_name(w):
    s = pd.Series(np.random.default_rng(7).normal(size=w.n), index=w.ids, name="income")
    got = w.lag(s)
    assert isinstance(got, pd.Series)
    assert got.index.equals(s.index)
    assert got.name == "income"
    np.testing.assert_allclose(got.to_numpy(), ref_matrix(w) @ s.to_numpy(), rtol=1e-12, atol=1e-14)  # scipy.sparse


def test_lag_dataframe_keeps_index_and_columns(w):
    rng = np.random.default_rng(8)
    df = pd.DataFrame(
        {"a": rng.normal(size=w.n), "b": rng.integers(0, 10, w.n), "c": rng.uniform(size=w.n)}, index=w.ids
    )
    got = w.lag(df)
    assert isinstance(got, pd.DataFrame)
    assert got.index.equals(df.index)
    assert list(got.columns) == ["a", "b", "c"]
    expected = ref_matrix(w) @ df.to_numpy(dtype=float)
    np.testing.assert_allclose(got.to_numpy(), expected, rtol=1e-12, atol=1e-14)  # reference: scipy.sparse csr @ X


def test_lag_row_standardized_is_neighbour_mean():
    w = WEIGHTS["knn_row"]
    x = np.random.default_rng(9).normal(size=w.n)
    b = WEIGHTS["knn_binary"].to_dense()
    # common practice: the lag under row standardization is the mean over neighbours
    np.testing.assert_allclose(w.lag(x), (b @ x) / b.sum(axis=1), rtol=1e-12)


def test_lag_of_constant_under_row_standardization_is_constant():
    w = WEIGHTS["knn_row"]
    np.testing.assert_allclose(w.lag(np.full(w.n, 3.5)), 3.5, rtol=1e-14)  # common practice: W 1 = 1 when rows sum to 1


# ---------------------------------------------------------------- large n: parallel path
@pytest.fixture(scope="module")
def big():
    w = vicino.k_nearest(_points(50_000, 10), 8)
    assert w.nnz == 400_000  # well above any serial threshold
    return w


@pytest.mark.parametrize("method", ["none", "row", "variance_stabilizing"])
def test_lag_large_1d(big, method):
    w = big.standardize(method)
    x = np.random.default_rng(11).normal(size=w.n)
    ref = sp.csr_matrix(w.to_scipy(), copy=True) @ x
    np.testing.assert_allclose(w.lag(x), ref, rtol=1e-12, atol=1e-12)  # reference: scipy.sparse csr @ x


def test_lag_large_2d_and_frame(big):
    w = big.standardize("row")
    rng = np.random.default_rng(12)
    x = rng.normal(size=(w.n, 4))
    a = sp.csr_matrix(
        (np.array(w.to_scipy().data), np.array(w.to_scipy().indices), np.array(w.to_scipy().indptr)), shape=(w.n, w.n)
    )
    np.testing.assert_allclose(w.lag(x), a @ x, rtol=1e-12, atol=1e-12)  # reference: scipy.sparse csr @ X
    df = pd.DataFrame(x, columns=list("pqrs"), index=w.ids)
    got = w.lag(df)
    assert list(got.columns) == list("pqrs") and got.index.equals(w.ids)
    np.testing.assert_allclose(got.to_numpy(), a @ x, rtol=1e-12, atol=1e-12)  # reference: scipy.sparse csr @ X


def test_lag_large_raw_weights(big):
    # asymmetric, non-uniform weights on the big pattern
    rng = np.random.default_rng(13)
    s = big.to_scipy()
    a = sp.csr_array((rng.uniform(0.1, 2.0, s.nnz), s.indices.copy(), s.indptr.copy()), shape=s.shape)
    w = vicino.from_matrix(a)
    x = rng.normal(size=w.n)
    np.testing.assert_allclose(w.lag(x), a @ x, rtol=1e-12, atol=1e-12)  # reference: scipy.sparse csr @ x


def test_lag_wrong_length_and_misaligned_series():
    w = WEIGHTS["knn_binary"]
    with pytest.raises(vicino.InvalidValuesError, match="rows"):
        w.lag(np.ones(w.n + 1))
    s = pd.Series(np.ones(w.n), index=w.ids[::-1])
    with pytest.raises(vicino.IdError, match="order"):
        w.lag(s)


@pytest.mark.parametrize("standardize", ["row", "binary", None])
def test_repeated_lags_use_the_packed_copy_and_match_scipy_bit_for_bit(standardize):
    # from the second lag on the Weights keep a packed copy (32-bit positions, one
    # weight per row where rows allow, rows in a locality order); the product must stay
    # scipy's csr_array @ x to the last bit (reference: scipy.sparse product, same sum order)
    knn = vicino.k_nearest(_points(3000, 5), 8)
    # None: one weight per link, and empty rows
    w = vicino.from_matrix(_random_matrix(300, 6)) if standardize is None else knn.standardize(standardize)
    m = w.to_scipy()
    rng = np.random.default_rng(7)
    x1, x8 = rng.normal(size=w.n), rng.normal(size=(w.n, 8))
    for _ in range(3):
        np.testing.assert_array_equal(w.lag(x1), m @ x1)
        np.testing.assert_array_equal(w.lag(x8), m @ x8)
    assert w._packed is not None
    with pytest.raises(vicino.InvalidValuesError):
        w.lag(np.full(w.n, np.nan))
