"""Properties of vicino.geary, vicino.getis_ord and vicino.join_counts.

On random weights (asymmetric or not, binary to non-binary, with islands and
units without any link) and random values, each call either succeeds and agrees
with the dense formulas (Geary 1954 and Cliff and Ord 1981; Getis and Ord 1992;
Cliff and Ord 1981, chapter 1) evaluated with NumPy, with permutation p-values
following from the draws (Hope 1968), or raises the VicinoError its input calls
for; extreme weights give what the same pattern gives at moderate scale.
"""

from __future__ import annotations

import numpy as np
import pytest
from _strategies import MODERATE_STYLES, attempt, matrices, refused, succeeded, values_of, weights_of
from hypothesis import given
from hypothesis import strategies as st

import vicino

ALTERNATIVES = ("two-sided", "greater", "less")


def _sums(w):
    return w.sum(), 0.5 * ((w + w.T) ** 2).sum(), ((w.sum(axis=1) + w.sum(axis=0)) ** 2).sum()


def _recount(draws, stat, centre, alternative):
    if alternative == "greater":
        return int((draws >= stat).sum())
    if alternative == "less":
        return int((draws <= stat).sum())
    return int((np.abs(draws - centre) >= abs(stat - centre)).sum())


@given(
    m=matrices(min_n=4, max_n=25, styles=MODERATE_STYLES),
    style=st.sampled_from(("uniform", "integers", "binary", "offset")),
    permutations=st.sampled_from([0, 2, 19]),
    seed=st.integers(0, 2**64 - 1),
    alternative=st.sampled_from(ALTERNATIVES),
    data=st.data(),
)
def test_geary_and_getis_ord_match_the_dense_formulas(m, style, permutations, seed, alternative, data):
    w = weights_of(m)
    rng = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1)))
    x = values_of(style, rng, (m.n,))
    d = m.dense
    n = m.n
    out = attempt(vicino.geary, x, w, permutations=permutations, seed=seed, alternative=alternative)
    if d.max() == 0:
        refused(out, vicino.InvalidMatrixError)
        return
    if (x == x[0]).all():
        refused(out, vicino.InvalidValuesError)
        return
    r = succeeded(out)
    shifted = x - x[0]  # exact for values close together (Sterbenz), so the mean of the offset style is too
    z = shifted - shifted.mean()
    # reference: Geary (1954), the dense double sum
    c = (n - 1) * (d * (x[:, None] - x[None, :]) ** 2).sum() / (2 * d.sum() * (z @ z))
    assert r.statistic == pytest.approx(c, rel=1e-8, abs=1e-12)
    s0, s1, s2 = _sums(d)
    # reference: Cliff and Ord (1981), the normality variance of C
    var_norm = ((2 * s1 + s2) * (n - 1) - 4 * s0**2) / (2 * (n + 1) * s0**2)
    assert r.normality.variance == pytest.approx(var_norm, rel=1e-8, abs=1e-14)
    if permutations:
        p = r.permutation
        assert p.extreme == _recount(p.draws, r.statistic, 1.0, alternative)  # numpy recount
        assert p.p_value == (p.extreme + 1) / (permutations + 1)  # reference: Hope (1968)
    # G on the values shifted to be non-negative
    y = x - x.min()
    out = attempt(vicino.getis_ord, y, w, permutations=permutations, seed=seed, alternative=alternative)
    if (y > 0).sum() < 2:
        refused(out, vicino.InvalidValuesError)
        return
    g = succeeded(out)
    off = ~np.eye(n, dtype=bool)
    outer = np.outer(y, y)
    ref = (d * outer)[off].sum() / outer[off].sum()  # reference: Getis and Ord (1992)
    assert g.statistic == pytest.approx(ref, rel=1e-8)
    assert g.expected == pytest.approx(s0 / (n * (n - 1)), rel=1e-12)  # reference: Getis and Ord (1992)
    assert g.normality is None


@given(
    m=matrices(min_n=4, max_n=25, styles=MODERATE_STYLES),
    permutations=st.sampled_from([0, 3, 19]),
    seed=st.integers(0, 2**64 - 1),
    alternative=st.sampled_from(ALTERNATIVES),
    data=st.data(),
)
def test_join_counts_add_up_and_match_half_sums(m, permutations, seed, alternative, data):
    w = weights_of(m)
    rng = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1)))
    labels = np.array(["east", "west"])[rng.integers(0, 2, m.n)]
    out = attempt(vicino.join_counts, labels, w, permutations=permutations, seed=seed, alternative=alternative)
    if len(set(labels)) < 2:
        refused(out, vicino.InvalidValuesError)
        return
    if m.dense.max() == 0:
        refused(out, vicino.InvalidMatrixError)
        return
    r = succeeded(out)
    x = (labels == "west").astype(float)
    d = m.dense
    # reference: Cliff and Ord (1981), chapter 1: half sums over the weights, BB + WW + BW = S0 / 2
    assert r.like_of("west").count == pytest.approx(0.5 * x @ d @ x, rel=1e-10, abs=1e-12)
    assert r.like_of("east").count == pytest.approx(0.5 * (1 - x) @ d @ (1 - x), rel=1e-10, abs=1e-12)
    assert sum(j.count for j in r.joins) == pytest.approx(d.sum() / 2, rel=1e-10)
    for jc in r.joins:
        assert jc.nonfree.variance >= -1e-9 * d.sum() ** 2  # a variance (up to rounding)
        if permutations:
            p = jc.permutation
            assert p.extreme == _recount(p.draws, jc.count, jc.nonfree.expected, alternative)  # numpy recount
            assert p.p_value == (p.extreme + 1) / (permutations + 1)  # reference: Hope (1968)


@given(m=matrices(min_n=4, max_n=15, styles=("huge", "tiny", "wide")), data=st.data())
def test_extreme_weights_give_the_moderate_pattern_answer(m, data):
    # Geary's C is invariant to the scale of W (its definition divides by S0), so weights near
    # the ends of floating point must give C of the same matrix divided by its largest entry
    w = weights_of(m)
    x = np.random.default_rng(data.draw(st.integers(0, 2**32 - 1))).uniform(0, 10, m.n)
    out = attempt(vicino.geary, x, w, permutations=0)
    if m.dense.max() == 0:
        refused(out, vicino.InvalidMatrixError)
        return
    r = succeeded(out)
    d = m.dense / m.dense.max()
    z = x - x.mean()
    c = (m.n - 1) * (d * (x[:, None] - x[None, :]) ** 2).sum() / (2 * d.sum() * (z @ z))  # Geary (1954)
    if m.style != "wide":  # entries spanning 600 orders of magnitude lose the small ones in numpy's sum
        assert r.statistic == pytest.approx(c, rel=1e-8)
    assert np.isfinite(r.statistic) and np.isfinite(r.normality.variance)  # no overflow at the extremes
