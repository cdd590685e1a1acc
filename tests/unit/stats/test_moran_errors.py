"""Bad inputs to vicino.moran raise vicino errors with useful messages;
MoranResult is frozen and displays itself."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

import vicino

IDS = [f"tract-{c}" for c in "abcdefghijklmnopqrst"]  # 20 units


@pytest.fixture(scope="module")
def w():
    pts = np.random.default_rng(0).uniform(0, 1, size=(20, 2))
    return vicino.k_nearest(pts, 3, ids=IDS).standardize("row")


@pytest.fixture(scope="module")
def x():
    return np.random.default_rng(1).normal(size=20)


def _both(err, builtin):
    assert isinstance(err, vicino.VicinoError)
    assert isinstance(err, builtin)


# ---------------------------------------------------------------- values
@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_values_name_ids(w, x, bad):
    y = x.copy()
    y[[2, 11]] = bad
    with pytest.raises(vicino.InvalidValuesError) as info:
        vicino.moran(y, w)
    _both(info.value, ValueError)
    msg = str(info.value)
    assert "'tract-c'" in msg and "'tract-l'" in msg  # ids, not positions
    assert "2 unit(s)" in msg
    assert info.value.ids == ["tract-c", "tract-l"]
    assert info.value.positions == [2, 11]
    assert info.value.count == 2


def test_nan_in_series_names_ids(w, x):
    s = pd.Series(x, index=w.ids)
    s.iloc[5] = np.nan
    with pytest.raises(vicino.InvalidValuesError, match="tract-f"):
        vicino.moran(s, w)


@pytest.mark.parametrize("value", [0.0, 7.25, -1e12])
def test_constant_values(w, value):
    with pytest.raises(vicino.InvalidValuesError, match="constant") as info:
        vicino.moran(np.full(20, value), w)
    _both(info.value, ValueError)


@pytest.mark.parametrize("n", [0, 19, 21])
def test_wrong_length(w, n):
    with pytest.raises(vicino.InvalidValuesError) as info:
        vicino.moran(np.arange(n, dtype=float), w)
    _both(info.value, ValueError)
    assert str(n) in str(info.value) and "20" in str(info.value)


def test_two_dimensional_values(w):
    with pytest.raises(vicino.InvalidValuesError, match="shape"):
        vicino.moran(np.ones((20, 2)), w)


def test_non_numeric_values(w):
    with pytest.raises(vicino.InvalidTypeError) as info:
        vicino.moran(np.array(list("abcdefghijklmnopqrst")), w)
    _both(info.value, TypeError)
    with pytest.raises(vicino.InvalidTypeError, match="bool"):
        vicino.moran(pd.Series([True, False] * 10, index=w.ids), w)


# ---------------------------------------------------------------- parameters
@pytest.mark.parametrize("perms", [-1, -999])
def test_negative_permutations(w, x, perms):
    with pytest.raises(vicino.InvalidParameterError) as info:
        vicino.moran(x, w, permutations=perms)
    _both(info.value, ValueError)
    assert "permutations" in str(info.value) and str(perms) in str(info.value)


@pytest.mark.parametrize("perms", [99.0, 9.5, "99", True, None])
def test_non_integer_permutations(w, x, perms):
    with pytest.raises(vicino.InvalidParameterError) as info:
        vicino.moran(x, w, permutations=perms)
    _both(info.value, ValueError)
    assert "permutations" in str(info.value) and "whole number" in str(info.value)


def test_numpy_integer_permutations_accepted(w, x):
    r = vicino.moran(x, w, permutations=np.int64(19), seed=1)
    assert r.permutation.permutations == 19 and len(r.permutation.draws) == 19


@pytest.mark.parametrize("alt", ["two_sided", "Greater", "", None, 1])
def test_unknown_alternative(w, x, alt):
    with pytest.raises(vicino.InvalidParameterError) as info:
        vicino.moran(x, w, alternative=alt)
    _both(info.value, ValueError)
    msg = str(info.value)
    assert "alternative" in msg and "'two-sided'" in msg and "'greater'" in msg and "'less'" in msg


@pytest.mark.parametrize("seed", [-1, 1.5, "7"])
def test_bad_seed(w, x, seed):
    with pytest.raises(vicino.InvalidParameterError, match="seed"):
        vicino.moran(x, w, seed=seed)


@pytest.mark.parametrize(
    "bad",
    [
        np.eye(20),
        sp.csr_array(np.eye(20)),
        pd.DataFrame(np.eye(20)),
        None,
    ],
)
def test_weights_not_a_weights_object(x, bad):
    with pytest.raises(vicino.InvalidTypeError) as info:
        vicino.moran(x, bad)
    _both(info.value, TypeError)
    msg = str(info.value)
    assert type(bad).__name__ in msg and "from_matrix" in msg


# ---------------------------------------------------------------- ids
def test_series_index_other_ids(w, x):
    s = pd.Series(x, index=[f"other-{i}" for i in range(20)])
    with pytest.raises(vicino.IdError) as info:
        vicino.moran(s, w)
    _both(info.value, ValueError)
    msg = str(info.value)
    assert "tract-a" in msg and "other-0" in msg


def test_series_index_reordered(w, x):
    s = pd.Series(x, index=w.ids[::-1])
    with pytest.raises(vicino.IdError, match="reindex"):
        vicino.moran(s, w)


def test_series_index_wrong_length(w, x):
    s = pd.Series(x[:19], index=w.ids[:19])
    with pytest.raises(vicino.IdError, match="19"):
        vicino.moran(s, w)


def test_series_default_index_with_string_ids(w, x):
    with pytest.raises(vicino.IdError):
        vicino.moran(pd.Series(x), w)


# ---------------------------------------------------------------- degenerate weights
def test_too_few_units():
    w = vicino.from_matrix(np.array([[0, 1, 0], [1, 0, 1], [0, 1, 0]]))
    with pytest.raises(vicino.VicinoError, match="4"):
        vicino.moran([1.0, 2.0, 4.0], w)


def test_no_links():
    w = vicino.from_matrix(sp.csr_array((6, 6)))
    with pytest.raises(vicino.VicinoError) as info:
        vicino.moran(np.arange(6.0), w)
    assert isinstance(info.value, ValueError)
    assert "no links" in str(info.value)


# ---------------------------------------------------------------- the result object
@pytest.fixture(scope="module")
def result(w, x):
    return vicino.moran(x, w, permutations=99, seed=5)


@pytest.mark.parametrize("attr", ["statistic", "expected", "n", "alternative", "normality", "permutation", "s0"])
def test_result_is_frozen(result, attr):
    with pytest.raises(dataclasses.FrozenInstanceError):
        setattr(result, attr, 0)


def test_nested_results_are_frozen(result):
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.normality.z = 0.0
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.permutation.p_value = 0.5
    with pytest.raises(ValueError):
        result.permutation.draws[0] = 1.0  # read-only array
    with pytest.raises(dataclasses.FrozenInstanceError):
        result.new_field = 1


def test_table_one_row_per_assumption(result, w, x):
    t = result.table()
    assert isinstance(t, pd.DataFrame)
    assert list(t.index) == ["normality", "randomization", "permutation (R=99)"]
    assert list(t.columns) == ["I", "expected", "variance", "z", "p_value"]
    assert (t["I"] == result.statistic).all()
    assert t.loc["normality", "variance"] == result.normality.variance
    assert t.loc["randomization", "p_value"] == result.randomization.p_value
    # the permutation row describes the draws (numpy recomputation)
    d = result.permutation.draws
    assert t.loc["permutation (R=99)", "expected"] == pytest.approx(d.mean(), rel=1e-12)
    assert t.loc["permutation (R=99)", "variance"] == pytest.approx(d.var(ddof=1), rel=1e-12)
    no_perm = vicino.moran(x, w, permutations=0).table()
    assert list(no_perm.index) == ["normality", "randomization"]


def test_repr_html_contains_statistic(result):
    h = result._repr_html_()
    assert isinstance(h, str)
    assert f"{result.statistic:.6f}" in h
    assert "<table" in h and "randomization" in h
    assert "k_nearest" in h  # the weights' recipe


def test_str_contains_statistic(result):
    s = str(result)
    assert f"{result.statistic:.6f}" in s and "two-sided" in s
