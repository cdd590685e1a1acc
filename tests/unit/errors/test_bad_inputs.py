"""Bad inputs raise the right vicino error, with a message that helps.

Every error is checked for its vicino class, for the built-in class it must
also derive from (ValueError or TypeError), and for a useful message.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.spatial import cKDTree

import vicino
from oracles import check_error


@pytest.fixture
def xy():
    return np.random.default_rng(77).random((12, 2))


@pytest.fixture
def w(xy):
    return vicino.k_nearest(xy, 3, ids=[f"id{i}" for i in range(12)])


BUILDERS = [
    pytest.param(lambda p, **kw: vicino.k_nearest(p, 2, **kw), id="k_nearest"),
    pytest.param(lambda p, **kw: vicino.within_distance(p, 0.3, **kw), id="within_distance"),
]


# ---------------------------------------------------------------------------
# coordinates
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
@pytest.mark.parametrize("col", [0, 1])
def test_non_finite_coordinates(xy, build, bad, col):
    p = xy.copy()
    p[4, col] = bad
    with pytest.raises(vicino.InvalidInputError, match=r"(?i)finite") as err:
        build(p, ids=[f"id{i}" for i in range(12)])
    check_error(err, vicino.InvalidInputError, ValueError)
    assert "id4" in str(err.value)  # names the unit
    assert "NaN" in str(err.value) or "inf" in str(err.value)


@pytest.mark.parametrize("build", BUILDERS)
def test_nan_in_dataframe_names_index_label(xy, build):
    df = pd.DataFrame(xy, columns=["x", "y"], index=[f"row{i}" for i in range(12)])
    df.iloc[7, 1] = np.nan
    with pytest.raises(vicino.InvalidInputError, match="row7"):
        build(df)


@pytest.mark.parametrize("shape", [(10, 3), (10, 1), (10,), (2, 5, 2)])
@pytest.mark.parametrize("build", BUILDERS)
def test_wrong_shape(build, shape):
    p = np.random.default_rng(0).random(shape)
    with pytest.raises(vicino.InvalidInputError, match=r"shape \(n, 2\)") as err:
        build(p)
    check_error(err, vicino.InvalidInputError, ValueError)
    assert str(shape).replace(" ", "") in str(err.value).replace(" ", "")  # names the shape given


def test_dataframe_with_unrecognised_columns(xy):
    df = pd.DataFrame({"a": xy[:, 0], "b": xy[:, 1], "c": 1.0})
    with pytest.raises(vicino.InvalidInputError, match="columns=") as err:
        vicino.k_nearest(df, 2)
    check_error(err, vicino.InvalidInputError, ValueError)
    with pytest.raises(vicino.InvalidInputError, match="not in the DataFrame"):
        vicino.k_nearest(df, 2, columns=("a", "zz"))


@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize("empty", [np.empty((0, 2)), [], pd.DataFrame({"x": [], "y": []})])
def test_empty_input(build, empty):
    with pytest.raises(vicino.InvalidInputError) as err:
        build(empty)
    check_error(err, vicino.InvalidInputError, ValueError)
    assert "no points" in str(err.value) or "shape" in str(err.value)


@pytest.mark.parametrize("build", BUILDERS)
@pytest.mark.parametrize(
    "bad",
    [
        np.array([["a", "b"], ["c", "d"], ["e", "f"]]),
        [[0.1, 0.2], [0.3, "x"], [0.5, 0.6]],
        np.array([[object(), 1.0], [2.0, 3.0], [4.0, 5.0]], dtype=object),
        np.array([[True, False], [False, True], [True, True]]),
    ],
    ids=["strings", "mixed", "objects", "booleans"],
)
def test_non_numeric_coordinates(build, bad):
    with pytest.raises(vicino.InvalidTypeError, match=r"(?i)num") as err:
        build(bad)
    check_error(err, vicino.InvalidTypeError, TypeError)


def test_non_numeric_dataframe_column(xy):
    df = pd.DataFrame({"x": xy[:, 0].astype(str), "y": xy[:, 1]})
    df.loc[3, "x"] = "n/a"
    with pytest.raises(vicino.InvalidTypeError, match="numeric") as err:
        vicino.k_nearest(df, 2)
    check_error(err, vicino.InvalidTypeError, TypeError)


def test_series_of_numbers_is_refused(xy):
    with pytest.raises(vicino.InvalidTypeError, match="geometries") as err:
        vicino.k_nearest(pd.Series(xy[:, 0]), 2)
    check_error(err, vicino.InvalidTypeError, TypeError)


def test_non_point_geometries_are_refused(xy):
    shapely = pytest.importorskip("shapely")
    geoms = list(shapely.points(xy))
    geoms[5] = shapely.box(0, 0, 1, 1)
    with pytest.raises(vicino.InvalidInputError, match="not points") as err:
        vicino.k_nearest(geoms, 2)
    check_error(err, vicino.InvalidInputError, ValueError)
    geoms[5] = None
    s = pd.Series(geoms, index=[f"g{i}" for i in range(12)])
    with pytest.raises(vicino.InvalidInputError, match="g5"):
        vicino.k_nearest(s, 2)


# ---------------------------------------------------------------------------
# k
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("k", [0, -1, -100])
def test_k_not_positive(xy, k):
    with pytest.raises(vicino.InvalidParameterError, match=r"k must be at least 1") as err:
        vicino.k_nearest(xy, k)
    check_error(err, vicino.InvalidParameterError, ValueError)


@pytest.mark.parametrize("k", [12, 13, 1000])
def test_k_not_below_n(xy, k):
    with pytest.raises(vicino.InvalidParameterError, match=r"n - 1") as err:
        vicino.k_nearest(xy, k)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert str(k) in str(err.value) and "12" in str(err.value)


def test_k_largest_allowed_is_n_minus_1(xy):
    w = vicino.k_nearest(xy, 11)
    full = np.ones((12, 12)) - np.eye(12)
    np.testing.assert_array_equal(w.to_dense(), full)  # reference: definition (everyone but oneself)


@pytest.mark.parametrize("k", [2.5, 2.0, "3", True, False, np.bool_(True), None, [2]])
def test_k_not_an_integer(xy, k):
    with pytest.raises(vicino.InvalidParameterError, match=r"whole number") as err:
        vicino.k_nearest(xy, k)
    check_error(err, vicino.InvalidParameterError, ValueError)


def test_k_numpy_integer_is_accepted(xy):
    w = vicino.k_nearest(xy, np.int64(2))
    _, idx = cKDTree(xy).query(xy, k=3)  # reference: scipy.spatial.cKDTree
    assert [set(w.neighbors_of(i).index) for i in range(12)] == [set(r[1:]) for r in idx]  # reference: cKDTree


# ---------------------------------------------------------------------------
# radius
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("radius", [-1.0, -1e-12, float("nan"), float("inf"), -np.inf])
def test_bad_radius(xy, radius):
    with pytest.raises(vicino.InvalidParameterError, match=r"radius") as err:
        vicino.within_distance(xy, radius)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert ">= 0" in str(err.value) or "finite" in str(err.value)


@pytest.mark.parametrize("radius", ["1", True, None])
def test_radius_not_a_number(xy, radius):
    with pytest.raises(vicino.InvalidParameterError, match=r"radius must be a number") as err:
        vicino.within_distance(xy, radius)
    check_error(err, vicino.InvalidParameterError, ValueError)


# ---------------------------------------------------------------------------
# metric and geographic range
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("metric", ["manhattan", "Euclidean", "haversine", "", None])
@pytest.mark.parametrize("build", BUILDERS)
def test_unknown_metric(xy, build, metric):
    with pytest.raises(vicino.InvalidParameterError, match=r"unknown metric") as err:
        build(xy, metric=metric)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert "great_circle" in str(err.value)  # lists the options


@pytest.mark.parametrize("lat", [90.5, -91.0, 180.0, 1e6])
@pytest.mark.parametrize("build", BUILDERS)
def test_latitude_out_of_range(build, lat):
    p = np.array([[10.0, 10.0], [11.0, 10.0], [12.0, lat], [13.0, 10.0]])
    with pytest.raises(vicino.InvalidInputError, match=r"latitude.*outside \[-90, 90\]") as err:
        build(p, metric="great_circle", ids=list("abcd"))
    check_error(err, vicino.InvalidInputError, ValueError)
    assert "'c'" in str(err.value)  # names the unit


@pytest.mark.parametrize("lon", [-180.5, -360.0, 360.5, 720.0])
@pytest.mark.parametrize("build", BUILDERS)
def test_longitude_out_of_range(build, lon):
    p = np.array([[10.0, 10.0], [lon, 10.0], [12.0, 10.0], [13.0, 10.0]])
    with pytest.raises(vicino.InvalidInputError, match=r"longitude.*outside") as err:
        build(p, metric="great_circle", ids=list("abcd"))
    check_error(err, vicino.InvalidInputError, ValueError)
    assert "'b'" in str(err.value)  # names the unit


def test_euclidean_has_no_range_limit():
    p = np.array([[500.0, 1e6], [501.0, 1e6], [-800.0, -95.0]])
    w = vicino.k_nearest(p, 1)
    _, idx = cKDTree(p).query(p, k=2)  # reference: scipy.spatial.cKDTree
    assert [list(w.neighbors_of(i).index) for i in range(3)] == [[j] for j in idx[:, 1]]  # reference: cKDTree


# ---------------------------------------------------------------------------
# ids
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("build", BUILDERS)
def test_duplicate_ids(xy, build):
    ids = [f"id{i}" for i in range(12)]
    ids[9] = "id2"
    with pytest.raises(vicino.IdError, match=r"unique.*'id2'") as err:
        build(xy, ids=ids)
    check_error(err, vicino.IdError, ValueError)


def test_duplicate_dataframe_index(xy):
    df = pd.DataFrame(xy, columns=["x", "y"], index=[0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 3])
    with pytest.raises(vicino.IdError, match=r"unique") as err:
        vicino.k_nearest(df, 2)
    check_error(err, vicino.IdError, ValueError)
    assert "reset the index" in str(err.value)


@pytest.mark.parametrize("n_ids", [0, 11, 13])
@pytest.mark.parametrize("build", BUILDERS)
def test_ids_wrong_length(xy, build, n_ids):
    with pytest.raises(vicino.IdError, match=rf"{n_ids} entries but there are 12 units") as err:
        build(xy, ids=list(range(n_ids)))
    check_error(err, vicino.IdError, ValueError)


@pytest.mark.parametrize("ids", ["abcdefghijkl", 5, np.zeros((12, 1))])
def test_ids_not_a_sequence(xy, ids):
    with pytest.raises(vicino.IdError, match="one-dimensional") as err:
        vicino.k_nearest(xy, 2, ids=ids)
    check_error(err, vicino.IdError, ValueError)


def test_from_matrix_ids_wrong_length_or_duplicated():
    a = np.ones((3, 3)) - np.eye(3)
    with pytest.raises(vicino.IdError, match="2 entries but there are 3 units"):
        vicino.from_matrix(a, ids=["a", "b"])
    with pytest.raises(vicino.IdError, match="unique"):
        vicino.from_matrix(a, ids=["a", "b", "a"])


# ---------------------------------------------------------------------------
# from_matrix
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "matrix",
    [np.zeros((3, 4)), np.zeros((4, 3)), sp.csr_array((3, 5)), np.ones(4), np.ones((2, 2, 2))],
    ids=["dense 3x4", "dense 4x3", "sparse 3x5", "1-D", "3-D"],
)
def test_from_matrix_not_square(matrix):
    with pytest.raises(vicino.InvalidMatrixError, match="square") as err:
        vicino.from_matrix(matrix)
    check_error(err, vicino.InvalidMatrixError, ValueError)


def test_from_matrix_empty():
    with pytest.raises(vicino.InvalidMatrixError, match="empty") as err:
        vicino.from_matrix(np.zeros((0, 0)))
    check_error(err, vicino.InvalidMatrixError, ValueError)


@pytest.mark.parametrize("sparse", [False, True])
@pytest.mark.parametrize(
    "bad,pattern",
    [(-0.5, r">= 0"), (np.nan, "finite"), (np.inf, "finite"), (-np.inf, "finite")],
)
def test_from_matrix_bad_entries(sparse, bad, pattern):
    a = np.ones((4, 4)) - np.eye(4)
    a[2, 1] = bad
    m = sp.csr_array(a) if sparse else a
    with pytest.raises(vicino.InvalidMatrixError, match=pattern) as err:
        vicino.from_matrix(m)
    check_error(err, vicino.InvalidMatrixError, ValueError)
    assert "from 2 to 1" in str(err.value)  # says where: the link from row 2 to column 1
    assert err.value.positions == [2, 1]


@pytest.mark.parametrize(
    "matrix",
    [np.array([["a", "b"], ["c", "d"]]), np.array([[1j, 0], [0, 1j]]), np.array([[None, 1], [1, None]])],
    ids=["strings", "complex", "objects"],
)
def test_from_matrix_non_numeric(matrix):
    with pytest.raises(vicino.InvalidTypeError, match="dtype") as err:
        vicino.from_matrix(matrix)
    check_error(err, vicino.InvalidTypeError, TypeError)


# ---------------------------------------------------------------------------
# standardize
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("method", ["rows", "R", "", None, "l2"])
def test_unknown_standardization(w, method):
    with pytest.raises(vicino.InvalidParameterError, match="unknown standardization") as err:
        w.standardize(method)
    check_error(err, vicino.InvalidParameterError, ValueError)
    assert "'row'" in str(err.value)  # lists the options


def test_unknown_islands_policy(w):
    with pytest.raises(vicino.InvalidParameterError, match="islands policy") as err:
        w.standardize("row", islands="drop")
    check_error(err, vicino.InvalidParameterError, ValueError)


# ---------------------------------------------------------------------------
# islands
# ---------------------------------------------------------------------------
@pytest.fixture
def sparse_points():
    rng = np.random.default_rng(31)
    xy = rng.random((40, 2))
    radius = 0.06
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    islands = np.flatnonzero(d.min(axis=1) > radius)  # reference: numpy brute force
    assert 0 < len(islands) < 40
    return xy, radius, islands


@pytest.mark.parametrize("method", ["row", "variance_stabilizing"])
def test_islands_raise_on_row_standardize(sparse_points, method):
    xy, radius, islands = sparse_points
    ids = [f"u{i}" for i in range(40)]
    w = vicino.within_distance(xy, radius, ids=ids)
    with pytest.raises(vicino.IslandError, match=rf"^{len(islands)} unit\(s\) have no neighbours") as err:
        w.standardize(method)
    check_error(err, vicino.IslandError, ValueError)
    msg = str(err.value)
    assert 'islands="keep"' in msg  # says how to proceed
    expected_ids = [ids[i] for i in islands]  # reference: numpy brute force
    assert err.value.count == len(islands)  # reference: numpy brute force
    # the error carries (and names) the first islands; the full list is w.islands
    named = err.value.ids
    assert 0 < len(named) <= len(expected_ids)
    assert named == expected_ids[: len(named)]  # reference: numpy brute force
    assert err.value.positions == islands[: len(named)].tolist()  # reference: numpy brute force
    for name in named:
        assert repr(name) in msg  # reference: numpy brute force (which ids)
    if len(named) < len(expected_ids):
        assert f"and {len(expected_ids) - len(named)} more" in msg  # says the list is partial
    assert list(w.islands) == expected_ids  # reference: numpy brute force


def test_islands_error_tiny_radius_all_islands():
    xy = np.random.default_rng(3).random((9, 2))
    w = vicino.within_distance(xy, 1e-9)
    with pytest.raises(vicino.IslandError, match=r"9 unit\(s\)") as err:
        w.standardize("row")
    assert err.value.ids == list(range(9))  # reference: numpy brute force (no pair within 1e-9)


def test_islands_keep_leaves_zero_rows(sparse_points):
    xy, radius, islands = sparse_points
    w = vicino.within_distance(xy, radius)
    r = w.standardize("row", islands="keep")
    dense = r.to_dense()
    np.testing.assert_array_equal(dense[islands], 0.0)  # reference: numpy brute force (island rows)
    others = np.setdiff1d(np.arange(40), islands)
    np.testing.assert_allclose(dense[others].sum(axis=1), 1.0, rtol=1e-12)  # reference: row standardization definition
    ref = w.to_dense()
    ref[others] /= ref[others].sum(axis=1, keepdims=True)
    np.testing.assert_allclose(dense, ref, rtol=1e-12)  # reference: numpy row division
    x = np.random.default_rng(8).normal(size=40)
    lag = r.lag(x)
    np.testing.assert_array_equal(lag[islands], 0.0)  # reference: documented (island lag is 0)
    np.testing.assert_allclose(lag, ref @ x, rtol=1e-12)  # reference: numpy matrix product
    assert list(r.islands) == islands.tolist()  # reference: numpy brute force


# ---------------------------------------------------------------------------
# lag
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("length", [0, 11, 13])
def test_lag_wrong_length(w, length):
    with pytest.raises(vicino.InvalidValuesError, match=rf"{length} rows but the weights have 12 units") as err:
        w.lag(np.ones(length))
    check_error(err, vicino.InvalidValuesError, ValueError)


def test_lag_wrong_length_2d(w):
    with pytest.raises(vicino.InvalidValuesError, match="11 rows"):
        w.lag(np.ones((11, 2)))


def test_lag_wrong_ndim(w):
    with pytest.raises(vicino.InvalidValuesError, match="shape"):
        w.lag(np.ones((12, 2, 2)))
    with pytest.raises(vicino.InvalidValuesError, match="shape"):
        w.lag(np.float64(1.0))


@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_lag_nan_values_name_ids(w, bad):
    x = np.arange(12.0)
    x[[3, 8]] = bad
    with pytest.raises(vicino.InvalidValuesError, match=r"2 unit\(s\) have NaN or infinite values") as err:
        w.lag(x)
    check_error(err, vicino.InvalidValuesError, ValueError)
    assert "'id3'" in str(err.value) and "'id8'" in str(err.value)
    assert err.value.ids == ["id3", "id8"]
    assert err.value.positions == [3, 8]


def test_lag_nan_in_series_and_frame(w):
    s = pd.Series(np.arange(12.0), index=w.ids)
    s.iloc[5] = np.nan
    with pytest.raises(vicino.InvalidValuesError, match="'id5'"):
        w.lag(s)
    df = pd.DataFrame({"a": np.arange(12.0), "b": np.arange(12.0)}, index=w.ids)
    df.iloc[10, 1] = np.nan
    with pytest.raises(vicino.InvalidValuesError, match="'id10'"):
        w.lag(df)


def test_lag_series_in_another_order_raises(w):
    x = np.random.default_rng(4).normal(size=12)
    s = pd.Series(x, index=w.ids)
    shuffled = s.iloc[np.random.default_rng(5).permutation(12)]
    assert set(shuffled.index) == set(w.ids) and not shuffled.index.equals(w.ids)
    with pytest.raises(vicino.IdError, match="another order") as err:
        w.lag(shuffled)
    check_error(err, vicino.IdError, ValueError)
    assert "reindex" in str(err.value)
    # the aligned Series works and equals the scipy product
    np.testing.assert_allclose(w.lag(s).to_numpy(), w.to_scipy() @ x, rtol=1e-12)  # reference: scipy product
    np.testing.assert_allclose(
        w.lag(shuffled.reindex(w.ids)).to_numpy(), w.to_scipy() @ x, rtol=1e-12
    )  # reference: scipy product


def test_lag_dataframe_in_another_order_raises(w):
    df = pd.DataFrame({"a": np.arange(12.0)}, index=w.ids[::-1])
    with pytest.raises(vicino.IdError, match="another order"):
        w.lag(df)


def test_lag_series_with_other_ids_raises(w):
    s = pd.Series(np.ones(12), index=[f"id{i}" for i in range(11)] + ["zzz"])
    with pytest.raises(vicino.IdError, match=r"'zzz'") as err:
        w.lag(s)
    check_error(err, vicino.IdError, ValueError)
    assert "'id11'" in str(err.value)  # names the id without a value
    s2 = pd.Series(np.ones(11), index=w.ids[:11])
    with pytest.raises(vicino.IdError, match="11 rows"):
        w.lag(s2)


@pytest.mark.parametrize(
    "values",
    [np.array(["a"] * 12), np.ones(12, dtype=bool), pd.Series(["x"] * 12), pd.Series([True] * 12)],
    ids=["str array", "bool array", "str Series", "bool Series"],
)
def test_lag_non_numeric(w, values):
    if isinstance(values, pd.Series):
        values.index = w.ids
    with pytest.raises(vicino.InvalidTypeError) as err:
        w.lag(values)
    check_error(err, vicino.InvalidTypeError, TypeError)
    assert "numeric" in str(err.value)
