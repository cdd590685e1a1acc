"""Properties of vicino.moran.

Moran's I, its expectation, the weight sums and the variances under
normality and randomization must equal the dense formulas of Cliff and Ord
(1981) computed in extended precision, for weights from 5e-324 to 1e308 and
values from 1e-300 to 1e300 (and small variations on a large offset);
p-values must follow from the z-scores (scipy.stats.norm) and from the
permutation draws ((M + 1) / (R + 1), Hope 1968), and every draw must lie
within the bounds of I from the eigenvalues of the centred symmetric weights.
Invalid values, weights and parameters must be refused.
"""

from __future__ import annotations

import numpy as np
import pytest
from _oracles import moran_bounds, moran_reference
from _strategies import (
    INT64_MAX,
    MODERATE_STYLES,
    VALUE_STYLES,
    attempt,
    bad_values,
    beyond_64_bits,
    bools,
    matrices,
    not_numbers,
    open_bug,
    refused,
    succeeded,
    unknown_options,
    values_of,
    weights_of,
)
from hypothesis import assume, given
from hypothesis import strategies as st
from scipy.stats import norm

import vicino

ALTERNATIVES = ("two-sided", "greater", "less")


def close(a: float, b: float, scale: float, rtol: float = 1e-9) -> bool:
    return abs(float(a) - float(b)) <= rtol * float(scale) + 1e-300


def normal_p(z: float, alternative: str) -> float:
    """Tail probability of a standard normal z-score (scipy.stats.norm)."""
    if alternative == "greater":
        return float(norm.sf(z))
    if alternative == "less":
        return float(norm.cdf(z))
    return float(min(1.0, 2 * norm.sf(abs(z))))


@given(
    m=matrices(min_n=4, max_n=30),
    style=st.sampled_from(VALUE_STYLES),
    permutations=st.sampled_from([0, 2, 3, 19, 99]),
    seed=st.integers(0, 2**64 - 1),
    alternative=st.sampled_from(ALTERNATIVES),
    data=st.data(),
)
def test_moran_matches_cliff_ord_moments(m, style, permutations, seed, alternative, data):
    w = weights_of(m)
    x = values_of(style, np.random.default_rng(data.draw(st.integers(0, 2**32 - 1))), (m.n,))
    out = attempt(vicino.moran, x, w, permutations=permutations, seed=seed, alternative=alternative)
    if (x == x[0]).all():
        refused(out, vicino.InvalidValuesError)  # constant values: I is undefined
        return
    if m.dense.max() == 0:
        refused(out, vicino.InvalidMatrixError)  # no weight: I is undefined
        return
    r = succeeded(out)
    # reference: Cliff and Ord (1981) moments, NumPy dense in extended precision
    ref = moran_reference(x, m.dense)
    assert r.n == m.n
    assert r.expected == pytest.approx(-1 / (m.n - 1), rel=1e-15, abs=0)
    assert close(r.statistic, ref["statistic"], ref["spread"]), (r.statistic, float(ref["statistic"]))
    for name in ("s0", "s1", "s2"):
        assert getattr(r, name) == pytest.approx(float(ref[name]), rel=1e-12, abs=0), name
    assert close(r.normality.variance, ref["normality"], ref["norm_terms"])
    assert close(r.randomization.variance, ref["randomization"], ref["rand_terms"])
    for inf in (r.normality, r.randomization):
        if inf.variance > 0 and np.isfinite(inf.z):
            assert inf.z == pytest.approx((r.statistic - r.expected) / np.sqrt(inf.variance), rel=1e-12, abs=1e-12)
            # reference: scipy.stats.norm tail probabilities
            assert inf.p_value == pytest.approx(normal_p(inf.z, alternative), rel=1e-9, abs=1e-300)
    assert r.alternative == alternative
    lo, hi = moran_bounds(m.dense)
    width = max(abs(lo), abs(hi))
    # reference: numpy.linalg.eigvalsh bounds of I (de Jong, Sprenger and van Veen 1984)
    assert lo - 1e-9 * width <= r.statistic <= hi + 1e-9 * width
    if permutations == 0:
        assert r.permutation is None
        return
    p = r.permutation
    draws = np.asarray(p.draws)
    assert len(draws) == permutations and p.permutations == permutations and p.seed == seed
    assert (draws >= lo - 1e-9 * width).all() and (draws <= hi + 1e-9 * width).all()
    if alternative == "greater":
        extreme = int((draws >= r.statistic).sum())
    elif alternative == "less":
        extreme = int((draws <= r.statistic).sum())
    else:
        extreme = int((np.abs(draws - r.expected) >= abs(r.statistic - r.expected)).sum())
    assert p.extreme == extreme
    assert p.p_value == (extreme + 1) / (permutations + 1)  # reference: Hope (1968)
    assert p.mean == pytest.approx(draws.mean(), rel=1e-12, abs=1e-15 * width)
    assert p.std == pytest.approx(draws.std(ddof=1), rel=1e-9, abs=1e-12 * width)
    again = succeeded(attempt(vicino.moran, x, w, permutations=permutations, seed=seed, alternative=alternative))
    np.testing.assert_array_equal(again.permutation.draws, draws)  # the seed reproduces the draws exactly


@given(m=matrices(min_n=4, max_n=15, styles=MODERATE_STYLES), data=st.data())
def test_moran_draws_a_seed_when_none_is_given(m, data):
    w = weights_of(m)
    x = values_of("uniform", np.random.default_rng(data.draw(st.integers(0, 2**32 - 1))), (m.n,))
    out = attempt(vicino.moran, x, w, permutations=9)
    if m.dense.max() == 0:
        refused(out, vicino.InvalidMatrixError)
        return
    r = succeeded(out)
    assert 0 <= r.permutation.seed < 2**64
    again = succeeded(attempt(vicino.moran, x, w, permutations=9, seed=r.permutation.seed))
    np.testing.assert_array_equal(again.permutation.draws, r.permutation.draws)


@given(m=matrices(min_n=4, max_n=12, styles=MODERATE_STYLES, shape="symmetric"), data=st.data())
def test_moran_is_invariant_to_exact_rescaling(m, data):
    w = weights_of(m)
    x = values_of("integers", np.random.default_rng(data.draw(st.integers(0, 2**32 - 1))), (m.n,))
    base = attempt(vicino.moran, x, w, permutations=0)
    e = data.draw(st.sampled_from([-990, -500, 400, 990]), label="exponent")
    shift = data.draw(st.sampled_from([0.0, 2.0**40, -(2.0**52)]), label="offset")
    moved = attempt(vicino.moran, np.ldexp(x, e) if shift == 0 else x + shift, w, permutations=0)
    if m.dense.max() == 0 or (x == x[0]).all():
        # no weight, or constant values: refused at any scale
        refused(base, vicino.InvalidMatrixError, vicino.InvalidValuesError)
        refused(moved, type(base.error))
        return
    scaled = succeeded(moved)
    # reference: Cliff and Ord (1981), I depends on z / |z| only (x * 2^e and x + c are exact here)
    ref = moran_reference(x, m.dense)
    assert close(scaled.statistic, ref["statistic"], ref["spread"], rtol=1e-12)
    assert close(succeeded(base).statistic, ref["statistic"], ref["spread"], rtol=1e-12)


# ---------------------------------------------------------------------------
# refusals
# ---------------------------------------------------------------------------
@given(m=matrices(min_n=1, max_n=3, styles=MODERATE_STYLES))
def test_moran_refuses_fewer_than_four_units(m):
    w = weights_of(m)
    x = np.arange(m.n, dtype=float)
    refused(attempt(vicino.moran, x, w), vicino.InvalidParameterError)


@given(m=matrices(min_n=4, max_n=12, styles=MODERATE_STYLES, self_links=True), data=st.data())
def test_moran_refuses_self_links(m, data):
    dense = m.dense.copy()
    i = data.draw(st.integers(0, m.n - 1))
    dense[i, i] = 1.0
    w = weights_of(type(m)(dense, m.style, m.ids))
    x = np.arange(m.n, dtype=float)
    refused(attempt(vicino.moran, x, w, permutations=0), vicino.InvalidMatrixError)


@given(m=matrices(min_n=4, max_n=10, styles=MODERATE_STYLES), data=st.data())
def test_moran_refuses_bad_parameters(m, data):
    w = weights_of(m)
    x = np.arange(m.n, dtype=float)
    which = data.draw(st.sampled_from(["permutations", "seed", "alternative", "weights", "too_many"]))
    if which == "permutations":
        bad = data.draw(
            st.one_of(st.integers(max_value=-1), st.just(1), beyond_64_bits(), st.floats(), bools(), not_numbers())
        )
        refused(attempt(vicino.moran, x, w, permutations=bad), vicino.InvalidParameterError)
    elif which == "seed":
        bad = data.draw(
            st.one_of(
                st.integers(max_value=-1),
                st.integers(2**64, 2**300),
                st.floats(),
                bools(),
                not_numbers().filter(lambda v: v is not None),
            )
        )
        refused(attempt(vicino.moran, x, w, seed=bad, permutations=9), vicino.InvalidParameterError)
    elif which == "alternative":
        bad = data.draw(unknown_options(ALTERNATIVES))
        refused(attempt(vicino.moran, x, w, alternative=bad), vicino.InvalidParameterError)
    elif which == "weights":
        bad = data.draw(st.sampled_from([m.dense, None, "w", w.to_scipy(), [w], w.audit()]))
        refused(attempt(vicino.moran, x, bad), vicino.InvalidTypeError)
    else:
        # far more draws than memory can hold: refused before any work
        many = data.draw(st.integers(10**12, INT64_MAX))
        out = attempt(vicino.moran, x, w, permutations=many, seed=1)
        refused(out, vicino.TooLargeError, vicino.InvalidMatrixError, vicino.InvalidValuesError)


@given(m=matrices(min_n=4, max_n=10, styles=MODERATE_STYLES), data=st.data())
def test_moran_refuses_invalid_values(m, data):
    w = weights_of(m)
    values, reason, bug = data.draw(bad_values(m.n, m.ids), label="values")
    # the same open bug as for lag: see test_bug_python_int_beyond_float_range_as_value
    assume(not (bug and open_bug(bug)))
    refused(
        attempt(vicino.moran, values, w, permutations=0),
        vicino.InvalidValuesError,
        vicino.InvalidTypeError,
        vicino.IdError,
        what=reason,
    )
    refused(attempt(vicino.moran, np.zeros((m.n, 2)) + np.arange(2), w), vicino.InvalidValuesError)  # two columns
