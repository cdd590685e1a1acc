"""Properties of Weights.standardize and Weights.lag.

Every standardization of random matrices (weights from 5e-324 to 1e308)
must equal the NumPy dense formula computed in extended precision, or be
refused when its result leaves the range of float64; every lag must equal
the scipy.sparse product, or be refused when it overflows; invalid
values and arguments must be refused.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from _oracles import DBL_MAX, DBL_TINY, is_acyclic, islands, lag_reference, spectral_radius, standardized
from _strategies import (
    MODERATE_STYLES,
    VALUE_STYLES,
    attempt,
    bad_values,
    matrices,
    open_bug,
    refused,
    succeeded,
    unknown_options,
    values_of,
    weights_of,
)
from hypothesis import assume, given
from hypothesis import strategies as st

import vicino

METHODS = ("row", "binary", "max_entry", "max_eigenvalue", "global", "variance_stabilizing", "none")
EPS = np.finfo(np.float64).eps
SUBNORMAL = 2.0**-1074


# ---------------------------------------------------------------------------
# standardize
# ---------------------------------------------------------------------------
@given(m=matrices(self_links=None), method=st.sampled_from(METHODS), keep=st.booleans())
def test_standardize_matches_dense_formulas(m, method, keep):
    w = weights_of(m)
    out = attempt(w.standardize, method, islands="keep" if keep else "raise")
    if len(islands(m.dense)) and not keep and method in ("row", "variance_stabilizing"):
        refused(out, vicino.IslandError)  # only the methods that divide by a row's own sum refuse islands
        return
    empty = m.dense.max() == 0
    if empty and method not in ("row", "binary", "none"):
        refused(out, vicino.InvalidMatrixError)  # a scale of no weight is undefined
        return
    rho = None
    if method == "max_eigenvalue":
        if is_acyclic(m.dense):
            # reference: networkx (no cycle: the spectral radius is 0, nothing to divide by)
            refused(out, vicino.InvalidMatrixError)
            return
        rho = spectral_radius(m.dense)  # reference: numpy.linalg.eigvals
        if rho < 1e-9 * m.dense.max() and open_bug("spectral-radius-small-blocks"):
            return  # held back: see test_bug_spectral_radius_of_a_faint_cycle
    # reference: NumPy dense formulas in extended precision
    ref = standardized(m.dense, method, rho)
    stored = m.dense > 0
    vals = ref[stored]
    if (vals > DBL_MAX).any() or (vals < SUBNORMAL / 2).any():
        refused(out, vicino.InvalidMatrixError)  # beyond float64: refused, never stored as 0 or inf
        return
    if (vals < DBL_TINY).any() and not out.ok:
        refused(out, vicino.InvalidMatrixError)  # subnormal results: refusing is allowed
        return
    s = succeeded(out, method)
    got = s.to_dense()
    assert ((got > 0) == stored).all()  # the links never change
    rtol = 1e-6 if method == "max_eigenvalue" else 1e-12
    np.testing.assert_allclose(got[stored], vals.astype(np.float64), rtol=rtol, atol=4 * SUBNORMAL)
    if method == "row":
        sums = got.sum(axis=1)
        # common practice: row-standardized rows sum to 1 (islands kept as empty rows sum to 0)
        np.testing.assert_allclose(sums[stored.any(axis=1)], 1.0, rtol=1e-12)
    assert s.recipe[-1].params["method"] == method


@given(m=matrices(min_n=1, max_n=8, styles=MODERATE_STYLES), data=st.data())
def test_standardize_refuses_unknown_methods(m, data):
    w = weights_of(m)
    refused(attempt(w.standardize, data.draw(unknown_options(METHODS))), vicino.InvalidParameterError)
    policy = data.draw(unknown_options(("raise", "keep")))
    refused(attempt(w.standardize, "row", islands=policy), vicino.InvalidParameterError)


# ---------------------------------------------------------------------------
# lag
# ---------------------------------------------------------------------------
VALUE_FORMS = (
    "array",
    "list",
    "pandas",
    "fortran",
    "big_endian",
    "readonly",
    "float32",
    "int",
    "masked_clear",
    "object",
)


def value_input(x: np.ndarray, form: str, ids: pd.Index):
    """(the values as given, the values as vicino must read them)."""
    if form == "list":
        return x.tolist(), x
    if form == "pandas":
        if x.ndim == 1:
            return pd.Series(x, index=ids, name="v"), x
        return pd.DataFrame(x, index=ids, columns=[f"c{k}" for k in range(x.shape[1])]), x
    if form == "fortran":
        return np.asfortranarray(x), x
    if form == "big_endian":
        return x.astype(">f8"), x
    if form == "readonly":
        ro = x.copy()
        ro.flags.writeable = False
        return ro, x
    if form == "float32" and np.abs(x).max(initial=0) < 1e30:
        x32 = x.astype(np.float32)
        return x32, x32.astype(np.float64)
    if form == "int" and np.array_equal(x, np.round(x)) and np.abs(x).max(initial=0) < 2**53:
        return x.astype(np.int64), x
    if form == "masked_clear":
        return np.ma.masked_array(x, mask=np.zeros_like(x, dtype=bool)), x
    if form == "object":
        return x.astype(object), x
    return x.copy(), x


@given(m=matrices(self_links=None), data=st.data())
def test_lag_matches_scipy_product(m, data):
    w = weights_of(m)
    style = data.draw(st.sampled_from(VALUE_STYLES), label="values")
    cols = data.draw(st.one_of(st.none(), st.integers(1, 4)), label="columns")
    rng = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1)))
    x = values_of(style, rng, (m.n,) if cols is None else (m.n, cols))
    form = data.draw(st.sampled_from(VALUE_FORMS), label="form")
    given_values, x = value_input(x, form, m.ids)
    out = attempt(w.lag, given_values)
    # reference: scipy.sparse product W x (and the same in extended precision, to tell overflow)
    ref, exact, bound = lag_reference(m.dense, x)
    if (np.abs(exact) > DBL_MAX).any():
        refused(out, vicino.InvalidValuesError)  # the lag overflows float64
        return
    if bound.max(initial=0) >= 1e307 and not out.ok:
        refused(out, vicino.InvalidValuesError)  # partial sums may overflow: refusing is allowed
        return
    got = succeeded(out, form)
    tol = 128 * EPS * bound.astype(np.float64) + 64 * SUBNORMAL
    assert (np.abs(np.asarray(got, dtype=np.float64) - ref) <= tol).all()
    if form == "pandas":
        assert isinstance(got, type(given_values)) and got.index.equals(given_values.index)
        if cols is not None:
            assert list(got.columns) == list(given_values.columns)
    else:
        assert isinstance(got, np.ndarray) and got.shape == x.shape


@given(m=matrices(min_n=2, max_n=12, styles=MODERATE_STYLES), data=st.data())
def test_lag_of_columns_equals_lag_of_each_column(m, data):
    w = weights_of(m)
    x = values_of("uniform", np.random.default_rng(data.draw(st.integers(0, 2**32 - 1))), (m.n, 3))
    together = succeeded(attempt(w.lag, x))
    for k in range(3):
        # documented: the same numbers bit for bit, whether lagged alone or among others
        np.testing.assert_array_equal(together[:, k], succeeded(attempt(w.lag, x[:, k])))


@given(m=matrices(min_n=1, max_n=12, styles=MODERATE_STYLES), data=st.data())
def test_lag_refuses_invalid_values(m, data):
    w = weights_of(m)
    values, reason, bug = data.draw(bad_values(m.n, m.ids), label="values")
    assume(not (bug and open_bug(bug)))
    refused(attempt(w.lag, values), vicino.InvalidValuesError, vicino.InvalidTypeError, vicino.IdError, what=reason)


# ---------------------------------------------------------------------------
# regressions: minimal cases of open bugs
# ---------------------------------------------------------------------------
def test_regression_python_int_beyond_float_range_as_value():
    w = vicino.from_matrix(np.array([[0.0, 1.0], [1.0, 0.0]]))
    refused(attempt(w.lag, [2**1024, 0]))
