"""Local Moran's I and local G_i / G_i* checked against outside sources.

* the published formulas written out here with NumPy on dense matrices:
  Anselin (1995), Local indicators of spatial association - LISA,
  Geographical Analysis 27(2) (I_i, E[I_i], Var[I_i] under randomization,
  and sum_i I_i = S0 I); Getis and Ord (1992), Geographical Analysis 24(3)
  and Ord and Getis (1995), Geographical Analysis 27(4) (G_i, G_i* and
  their z-scores);
* exhaustive enumeration of permutations with itertools (the exact
  randomization moments and the exact conditional permutation p-values);
* scipy.stats.false_discovery_control (Benjamini and Hochberg 1995, JRSS B
  57(1)), scipy.stats.norm, scipy.stats.kstest and scipy.stats.chisquare;
* vicino.moran, itself checked against Cliff and Ord (1981).
"""

from __future__ import annotations

import itertools
import math
import os
import subprocess
import sys
import textwrap

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy import stats

import vicino

R_TOL = 1e-9


# ---------------------------------------------------------------- the references
def anselin_numpy(x, w):
    """I_i, E[I_i] and Var[I_i] under randomization, written out literally.

    reference: Anselin (1995), Geographical Analysis 27(2), the local Moran
    I_i = (z_i / m2) sum_j w_ij z_j with m2 = sum z^2 / n, E[I_i] = -w_i / (n - 1),
    Var[I_i] = w_i(2) (n - b2) / (n - 1) + 2 w_i(kh) (2 b2 - n) / ((n - 1)(n - 2))
               - w_i^2 / (n - 1)^2, with b2 = m4 / m2^2.
    """
    x = np.asarray(x, dtype=float)
    w = np.asarray(w, dtype=float)
    n = len(x)
    z = x - x.mean()
    m2 = (z**2).sum() / n
    m4 = (z**4).sum() / n
    b2 = m4 / m2**2
    stat = z / m2 * (w @ z)
    wi = w.sum(axis=1)
    wi2 = (w**2).sum(axis=1)
    two_wkh = np.array(
        [sum(w[i, k] * w[i, h] for k in range(n) for h in range(n) if k != i and h != i and h != k) for i in range(n)]
    )
    expected = -wi / (n - 1)
    var = wi2 * (n - b2) / (n - 1) + two_wkh * (2 * b2 - n) / ((n - 1) * (n - 2)) - wi**2 / (n - 1) ** 2
    return stat, expected, var


def getis_ord_numpy(x, w, star):
    """G_i or G_i*, their expectations and z-scores, written out literally.

    reference: Getis and Ord (1992), Geographical Analysis 24(3), G_i and
    E[G_i] = W_i / (n - 1); Ord and Getis (1995), Geographical Analysis 27(4),
    the z-scores of G_i (sums over j != i, mean and variance of the other
    n - 1 values) and of G_i* (sums over all j, mean and variance of all n).
    """
    x = np.asarray(x, dtype=float)
    w = np.asarray(w, dtype=float).copy()
    n = len(x)
    g, e, z = np.empty(n), np.empty(n), np.empty(n)
    if star:
        d = np.diag(w).copy()
        d[d == 0] = 1.0  # w_ii = 1 where no self-weight is given (vicino's documented choice)
        np.fill_diagonal(w, d)
        xbar = x.mean()
        s = math.sqrt((x**2).mean() - xbar**2)
        for i in range(n):
            wi, s1 = w[i].sum(), (w[i] ** 2).sum()
            g[i] = w[i] @ x / x.sum()
            e[i] = wi / n
            z[i] = (w[i] @ x - wi * xbar) / (s * math.sqrt((n * s1 - wi**2) / (n - 1)))
        return g, e, z
    for i in range(n):
        o = np.arange(n) != i
        xo, wo = x[o], w[i, o]
        xbar_i = xo.mean()
        s_i = math.sqrt((xo**2).mean() - xbar_i**2)
        wi, s1 = wo.sum(), (wo**2).sum()
        g[i] = wo @ xo / xo.sum()
        e[i] = wi / (n - 1)
        z[i] = (wo @ xo - wi * xbar_i) / (s_i * math.sqrt(((n - 1) * s1 - wi**2) / (n - 2)))
    return g, e, z


def normal_p(z, alternative):
    # reference: standard normal tails from scipy.stats.norm
    if alternative == "greater":
        return stats.norm.sf(z)
    if alternative == "less":
        return stats.norm.cdf(z)
    return np.minimum(1.0, 2 * stats.norm.sf(np.abs(z)))


def rook_lattice(rows, cols):
    def path(m):
        return sp.diags([np.ones(m - 1), np.ones(m - 1)], [-1, 1], shape=(m, m))

    return sp.csr_array(sp.kron(sp.eye(rows), path(cols)) + sp.kron(path(rows), sp.eye(cols)))


def _points(n, seed):
    return np.random.default_rng(seed).uniform(0, 1, size=(n, 2))


def _asym_matrix(n, seed):
    rng = np.random.default_rng(seed)
    a = rng.uniform(0.1, 4.0, (n, n)) * (rng.random((n, n)) < 0.15)
    a[np.arange(n), (np.arange(n) + 1) % n] = rng.uniform(0.1, 4.0, n)  # a ring: no islands
    np.fill_diagonal(a, 0)
    return sp.csr_array(a)


CASES = {
    "rook_binary": lambda: vicino.from_matrix(rook_lattice(5, 7)),
    "distance_binary": lambda: vicino.within_distance(_points(40, 1), 0.3),
    "knn_row": lambda: vicino.k_nearest(_points(40, 2), 5).standardize("row"),
    "matrix_asymmetric": lambda: vicino.from_matrix(_asym_matrix(30, 3)),
}


@pytest.fixture(params=sorted(CASES))
def w(request):
    return CASES[request.param]()


def _values(n, kind, seed=0):
    rng = np.random.default_rng(seed)
    if kind == "normal":
        return rng.normal(size=n)
    return rng.exponential(size=n) ** 2  # skewed: b2 far from 3


# ---------------------------------------------------------------- local Moran, analytic
@pytest.mark.parametrize("kind", ["normal", "skewed"])
@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_local_moran_matches_anselin(w, kind, alternative):
    x = _values(w.n, kind)
    stat, expected, var = anselin_numpy(x, w.to_dense())
    r = vicino.local_moran(x, w, permutations=0, alternative=alternative)
    # reference: Anselin (1995), formulas in anselin_numpy()
    np.testing.assert_allclose(r.statistic, stat, rtol=R_TOL, atol=1e-13)
    np.testing.assert_allclose(r.expected, expected, rtol=1e-12)
    np.testing.assert_allclose(r.variance, var, rtol=R_TOL)
    zref = (stat - expected) / np.sqrt(var)
    np.testing.assert_allclose(r.z, zref, rtol=R_TOL, atol=1e-12)
    np.testing.assert_allclose(r.p_value, normal_p(zref, alternative), rtol=1e-8, atol=1e-15)  # scipy.stats.norm
    assert r.p_permutation is None and r.seed is None
    # quadrants: signs of the value and of its lag (Anselin 1996; common practice)
    z = x - x.mean()
    lag = w.to_dense() @ z
    want = np.where(z > 0, np.where(lag > 0, "high-high", "high-low"), np.where(lag > 0, "low-high", "low-low"))
    assert list(r.quadrant) == list(want)
    np.testing.assert_allclose(r.standardized, z / z.std(), rtol=1e-12)  # numpy, population sd
    np.testing.assert_allclose(r.lag, lag / z.std(), rtol=1e-10, atol=1e-13)


def test_sum_of_local_i_is_s0_times_global_i(w):
    x = _values(w.n, "skewed", seed=4)
    r = vicino.local_moran(x, w, permutations=0)
    g = vicino.moran(x, w, permutations=0)
    dense = w.to_dense()
    z = x - x.mean()
    global_numpy = len(x) / dense.sum() * (z @ dense @ z) / (z @ z)  # reference: Moran (1950)
    # reference: Anselin (1995): sum_i I_i = S0 I with m2 = sum z^2 / n
    assert r.statistic.sum() == pytest.approx(dense.sum() * global_numpy, rel=1e-10)
    assert r.statistic.sum() == pytest.approx(g.s0 * g.statistic, rel=1e-10)  # vicino.moran (Cliff-Ord checked)


def test_sum_identity_row_standardized_is_n_times_i():
    w = vicino.k_nearest(_points(80, 5), 4).standardize("row")
    x = _values(80, "normal", seed=5)
    r = vicino.local_moran(x, w, permutations=0)
    # reference: Anselin (1995): S0 = n for row-standardized weights without islands
    assert r.statistic.sum() == pytest.approx(80 * vicino.moran(x, w, permutations=0).statistic, rel=1e-10)


def test_randomization_moments_equal_exhaustive_enumeration():
    # reference: the definition of the randomization distribution: every one of the
    # n! assignments of the observed values to the units equally likely (itertools)
    a = np.array(
        [
            [0, 1.0, 0, 2.0, 0, 0],
            [1.0, 0, 0.5, 0, 0, 0],
            [0, 3.0, 0, 1.0, 1.0, 0],
            [1.0, 0, 1.0, 0, 0, 2.0],
            [0, 0, 1.0, 0, 0, 1.0],
            [0.5, 0, 0, 1.0, 1.0, 0],
        ]
    )
    x = np.array([3.1, -0.4, 7.9, 1.2, 0.3, 4.4])
    n = len(x)
    r = vicino.local_moran(x, vicino.from_matrix(a), permutations=0)
    draws = np.array([anselin_numpy(x[list(p)], a)[0] for p in itertools.permutations(range(n))])
    np.testing.assert_allclose(r.expected, draws.mean(axis=0), rtol=1e-10)
    np.testing.assert_allclose(r.variance, draws.var(axis=0), rtol=1e-10)


# ---------------------------------------------------------------- local G, analytic
@pytest.mark.parametrize("star", [False, True])
def test_local_getis_ord_matches_ord_getis(w, star):
    x = _values(w.n, "skewed", seed=7)
    g, e, z = getis_ord_numpy(x, w.to_dense(), star)
    r = vicino.local_getis_ord(x, w, star=star, permutations=0, alternative="greater")
    # reference: Getis and Ord (1992) and Ord and Getis (1995), formulas in getis_ord_numpy()
    np.testing.assert_allclose(r.statistic, g, rtol=1e-11)
    np.testing.assert_allclose(r.expected, e, rtol=1e-12)
    np.testing.assert_allclose(r.z, z, rtol=1e-8, atol=1e-11)
    np.testing.assert_allclose(r.p_value, normal_p(z, "greater"), rtol=1e-7, atol=1e-15)  # scipy.stats.norm
    assert list(r.spot) == ["hot spot" if v > 0 else "cold spot" for v in z]


def test_local_g_star_uses_given_self_weights():
    a = _asym_matrix(25, 8).toarray()
    a[np.arange(0, 25, 3), np.arange(0, 25, 3)] = 2.5  # self-weights for some units only
    x = _values(25, "skewed", seed=8)
    g, e, z = getis_ord_numpy(x, a, star=True)  # w_ii = 1 elsewhere
    r = vicino.local_getis_ord(x, vicino.from_matrix(sp.csr_array(a)), star=True, permutations=0)
    np.testing.assert_allclose(r.statistic, g, rtol=1e-11)  # Ord and Getis (1995)
    np.testing.assert_allclose(r.z, z, rtol=1e-8)


@pytest.mark.parametrize("star", [False, True])
def test_local_g_moments_equal_exhaustive_enumeration(star):
    # reference: Getis and Ord (1992): G_i's moments are those of sum_j w_ij x_j when the
    # other n - 1 values are randomly assigned to the other units; for G_i* all n values
    # are. Enumerated here with itertools, and the z-score rebuilt from them.
    a = np.array(
        [
            [0, 1.0, 0, 2.0, 0, 0],
            [1.0, 0, 0.5, 0, 0, 0],
            [0, 3.0, 0, 1.0, 1.0, 0],
            [1.0, 0, 1.0, 0, 0, 2.0],
            [0, 0, 1.0, 0, 0, 1.0],
            [0.5, 0, 0, 1.0, 1.0, 0],
        ]
    )
    x = np.array([3.1, 0.4, 7.9, 1.2, 0.3, 4.4])
    n = len(x)
    ws = a.copy()
    if star:
        np.fill_diagonal(ws, 1.0)
    r = vicino.local_getis_ord(x, vicino.from_matrix(a), star=star, permutations=0)
    for i in range(n):
        if star:
            sums = [ws[i] @ x[list(p)] for p in itertools.permutations(range(n))]
        else:
            o = [j for j in range(n) if j != i]
            sums = [ws[i, o] @ x[list(p)] for p in itertools.permutations(o)]
        sums = np.array(sums)
        observed = ws[i] @ x if star else a[i] @ x
        assert r.z[i] == pytest.approx((observed - sums.mean()) / sums.std(), rel=1e-10)


# ---------------------------------------------------------------- adjustments
def test_fdr_equals_scipy_false_discovery_control():
    rng = np.random.default_rng(0)
    p = np.concatenate([rng.uniform(size=200), rng.uniform(0, 0.01, size=30), [0.02, 0.02, 0.5]])
    from vicino import _gateway as core

    # reference: scipy.stats.false_discovery_control (scipy >= 1.11), Benjamini and Hochberg (1995)
    np.testing.assert_allclose(core.adjust_p_values(p, "fdr"), stats.false_discovery_control(p), rtol=1e-14)
    # Bonferroni: p m capped at 1 (common practice)
    np.testing.assert_allclose(core.adjust_p_values(p, "bonferroni"), np.minimum(1, p * len(p)), rtol=1e-15)
    np.testing.assert_array_equal(core.adjust_p_values(p, "none"), p)
    with_nan = np.r_[p, np.nan]
    out = core.adjust_p_values(with_nan, "fdr")
    assert np.isnan(out[-1])  # missing p-values are neither counted nor adjusted
    np.testing.assert_allclose(out[:-1], stats.false_discovery_control(p), rtol=1e-14)


def test_local_moran_significance_after_adjustment():
    w = vicino.k_nearest(_points(300, 9), 6).standardize("row")
    pts = _points(300, 9)
    x = pts[:, 0] * 2 + np.random.default_rng(1).normal(size=300)
    for adjust in ("none", "fdr", "bonferroni"):
        r = vicino.local_moran(x, w, permutations=199, seed=5, adjust=adjust, alpha=0.1)
        p = r.p_permutation
        want = {
            "none": p,
            "fdr": stats.false_discovery_control(p),  # scipy.stats
            "bonferroni": np.minimum(1, p * len(p)),  # common practice
        }[adjust]
        np.testing.assert_allclose(r.p_adjusted, want, rtol=1e-14)
        np.testing.assert_array_equal(r.significant, want <= 0.1)
    # without permutations, significance uses the analytic p-values
    r0 = vicino.local_moran(x, w, permutations=0, adjust="fdr")
    np.testing.assert_allclose(r0.p_adjusted, stats.false_discovery_control(r0.p_value), rtol=1e-14)


# ---------------------------------------------------------------- permutations
@pytest.fixture(scope="module")
def knn200():
    pts = _points(200, 11)
    return vicino.k_nearest(pts, 6).standardize("row"), pts[:, 1] + np.random.default_rng(2).normal(size=200)


def test_permutation_p_values_reproducible_and_in_range(knn200):
    w, x = knn200
    for fn in (vicino.local_moran, vicino.local_getis_ord):
        xv = x - x.min() if fn is vicino.local_getis_ord else x
        a = fn(xv, w, permutations=99, seed=2024)
        b = fn(xv, w, permutations=99, seed=2024)
        c = fn(xv, w, permutations=99, seed=2025)
        np.testing.assert_array_equal(a.p_permutation, b.p_permutation)
        assert not np.array_equal(a.p_permutation, c.p_permutation)
        # reference: Hope (1968): (M + 1) / (R + 1) lies in [1 / (R + 1), 1] on a grid of 1 / (R + 1)
        assert a.p_permutation.min() >= 1 / 100 and a.p_permutation.max() <= 1
        np.testing.assert_allclose(a.p_permutation * 100, np.round(a.p_permutation * 100), atol=1e-9)
        assert a.seed == 2024


def test_permutation_results_do_not_depend_on_thread_count():
    script = textwrap.dedent(
        """
        import hashlib, numpy as np, vicino
        pts = np.random.default_rng(3).uniform(size=(3000, 2))
        w = vicino.k_nearest(pts, 8).standardize("row")
        x = pts[:, 0] + np.random.default_rng(4).normal(size=3000)
        a = vicino.local_moran(x, w, permutations=99, seed=7)
        b = vicino.local_getis_ord(x - x.min(), w, star=True, permutations=99, seed=7)
        d = vicino.local_moran(x, vicino.within_distance(pts, 0.1), permutations=49, seed=7)  # > 48 neighbours
        h = hashlib.sha256()
        for arr in (a.p_permutation, a.z_permutation, b.p_permutation, d.p_permutation):
            h.update(np.ascontiguousarray(arr).tobytes())
        print(h.hexdigest(), int(vicino.within_distance(pts, 0.1).counts.max()))
        """
    )
    out = []
    for threads in ("1", "2"):
        env = {**os.environ, "RAYON_NUM_THREADS": threads}
        res = subprocess.run([sys.executable, "-c", script], env=env, capture_output=True, text=True, timeout=120)
        assert res.returncode == 0, res.stderr
        out.append(res.stdout.split())
    assert out[0][0] == out[1][0]  # the same bits with 1 and 2 threads
    assert int(out[0][1]) > 48  # the many-neighbour draws were exercised


def _exact_conditional_p(x, a, i, alternative, moran):
    """The exact conditional permutation p-value of unit i: all (n - 1)! assignments of
    the other values to the other units (itertools), unit i fixed (Anselin 1995)."""
    n = len(x)
    z = x - x.mean() if moran else x
    o = [j for j in range(n) if j != i]
    sums = np.array([a[i, o] @ z[list(p)] for p in itertools.permutations(o)])
    observed = a[i, o] @ z[o]
    sign = np.sign(z[i]) if moran else 1.0
    centre = sums.mean()
    tol = 1e-12
    if alternative == "greater":
        hit = sign * (sums - observed) >= -tol
    elif alternative == "less":
        hit = sign * (sums - observed) <= tol
    else:
        hit = np.abs(sums - centre) >= np.abs(observed - centre) - tol
    return hit.mean()


@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
@pytest.mark.parametrize("moran", [True, False])
def test_pseudo_p_values_match_exhaustive_enumeration(alternative, moran):
    a = np.array(
        [
            [0, 1.0, 1.0, 0, 0],
            [1.0, 0, 1.0, 1.0, 0],
            [0.5, 0.5, 0, 0.5, 0.5],
            [0, 1.0, 2.0, 0, 1.0],
            [0, 0, 1.0, 1.0, 0],
        ]
    )
    x = np.array([2.0, 5.5, 1.0, 7.25, 3.0])
    w = vicino.from_matrix(sp.csr_array(a))
    big_r = 9999
    fn = vicino.local_moran if moran else vicino.local_getis_ord
    r = fn(x, w, permutations=big_r, seed=99, alternative=alternative)
    for i in range(5):
        q = _exact_conditional_p(x, a, i, alternative, moran)
        # M ~ Binomial(R, q), so p = (M + 1) / (R + 1) has mean (R q + 1) / (R + 1) (Hope 1968)
        mean = (big_r * q + 1) / (big_r + 1)
        sd = math.sqrt(q * (1 - q) / big_r)
        assert abs(r.p_permutation[i] - mean) <= 5 * sd + 1e-9, (i, q, r.p_permutation[i])


def test_extreme_counts_are_binomial_across_seeds():
    # the count of extreme draws over R = 19 draws, across 400 seeds, should follow
    # Binomial(19, q) with q from exhaustive enumeration (scipy.stats.binom, chisquare)
    a = np.array(
        [[0, 1.0, 1.0, 0, 0], [1.0, 0, 1.0, 1.0, 0], [0.5, 0.5, 0, 0.5, 0.5], [0, 1, 2, 0, 1], [0, 0, 1, 1, 0]]
    )
    x = np.array([2.0, 5.5, 1.0, 7.25, 3.0])
    w = vicino.from_matrix(sp.csr_array(a.astype(float)))
    q = _exact_conditional_p(x, a, 3, "greater", True)
    m = np.array(
        [
            round(vicino.local_moran(x, w, permutations=19, seed=s, alternative="greater").p_permutation[3] * 20 - 1)
            for s in range(400)
        ]
    )
    expected = stats.binom.pmf(np.arange(20), 19, q) * len(m)
    observed = np.bincount(m, minlength=20)
    # pool the sparse tails so that every expected count is at least 5 (common practice)
    keep = expected >= 5
    obs = np.r_[observed[keep], observed[~keep].sum()]
    exp = np.r_[expected[keep], expected[~keep].sum()]
    assert stats.chisquare(obs, exp).pvalue > 1e-3


def test_null_p_values_roughly_uniform():
    # values independent of location: the permutation p-values should be about uniform
    # (a loose Kolmogorov-Smirnov check with fixed seeds, scipy.stats.kstest)
    w = vicino.from_matrix(rook_lattice(20, 20)).standardize("row")
    x = np.random.default_rng(17).normal(size=400)
    r = vicino.local_moran(x, w, permutations=199, seed=3, alternative="greater")
    assert stats.kstest(r.p_permutation, "uniform").pvalue > 1e-3
    g = vicino.local_getis_ord(np.exp(x), w, permutations=199, seed=4, alternative="greater")
    assert stats.kstest(g.p_permutation, "uniform").pvalue > 1e-3


def test_permutation_moments_match_sampling_without_replacement():
    # k values drawn without replacement from the N = n - 1 others (population mean mu_i,
    # variance sigma_i^2, divisor N) give sum_m w_m v_m the mean W_i mu_i and the variance
    # sigma_i^2 (N S1_i - W_i^2) / (N - 1) (reference: Cochran (1977), Sampling Techniques,
    # the variance of a sample total). For G_i this is the Ord and Getis (1995) z-score.
    w = vicino.k_nearest(_points(50, 4), 4)
    x = _values(50, "skewed", seed=9)
    dense = w.to_dense()
    n, big_n = 50, 49
    z = x - x.mean()
    r = vicino.local_moran(x, w, permutations=4999, seed=1)
    g = vicino.local_getis_ord(x, w, permutations=4999, seed=1)
    for i in range(n):
        o = np.arange(n) != i
        zo = z[o]
        mu, var = zo.mean(), zo.var()
        wi, s1 = dense[i].sum(), (dense[i] ** 2).sum()
        sd_sum = math.sqrt(var * (big_n * s1 - wi**2) / (big_n - 1))
        lag = dense[i] @ z
        z_cond = (lag - wi * mu) / sd_sum * np.sign(z[i])  # I_i = (z_i / m2) lag
        # R = 4999 draws: the estimated mean and sd err by about 1 / sqrt(R) in z units
        assert r.z_permutation[i] == pytest.approx(z_cond, abs=0.08 + 0.03 * abs(z_cond))
        assert g.z_permutation[i] == pytest.approx(g.z[i], abs=0.08 + 0.03 * abs(g.z[i]))
        assert g.z[i] == pytest.approx((lag - wi * mu) / sd_sum, rel=1e-9)  # the identity itself


# ---------------------------------------------------------------- odd inputs
def test_islands_are_missing_with_a_note():
    xy = np.array([[0, 0], [1, 0], [0, 1], [1, 1], [9, 9], [2, 0], [2, 1]], dtype=float)
    w = vicino.within_distance(xy, 1.1)  # unit 4 is an island
    x = np.array([1.0, 4.0, 2.0, 8.0, 5.0, 3.0, 6.0])
    r = vicino.local_moran(x, w, permutations=99, seed=1)
    assert list(r.islands) == [4] and r.note and "island" in r.note
    for arr in (r.statistic, r.expected, r.variance, r.z, r.p_value, r.p_permutation, r.p_adjusted):
        assert np.isnan(arr[4])
    assert r.quadrant[4] is None and not r.significant[4]
    t = r.table()
    assert pd.isna(t.loc[4, "quadrant"]) and pd.isna(t.loc[4, "significant"])
    # the other units as if the island's value were among the others (Anselin 1995, n = 7)
    stat, _, _ = anselin_numpy(x, w.to_dense())
    np.testing.assert_allclose(np.delete(r.statistic, 4), np.delete(stat, 4), rtol=1e-12)
    g = vicino.local_getis_ord(x, w, star=True, permutations=0)
    assert np.isnan(g.z[4]) and g.spot[4] is None and g.note


def test_all_islands():
    w = vicino.from_matrix(sp.csr_array((4, 4)))
    r = vicino.local_moran([1.0, 2.0, 3.0, 5.0], w, permutations=9, seed=0, adjust="fdr")
    assert np.isnan(r.statistic).all() and np.isnan(r.p_adjusted).all() and not r.significant.any()
    assert "4 island(s)" in r.note


def test_bad_inputs_are_clear_errors():
    w = vicino.k_nearest(_points(20, 1), 3)
    x = _values(20, "normal")
    with pytest.raises(vicino.InvalidValuesError, match="constant"):
        vicino.local_moran(np.ones(20), w)
    with pytest.raises(vicino.InvalidValuesError, match="constant"):
        vicino.local_getis_ord(np.full(20, 3.0), w)
    bad = x.copy()
    bad[3] = np.nan
    with pytest.raises(vicino.InvalidValuesError, match="NaN"):
        vicino.local_moran(bad, w)
    with pytest.raises(vicino.InvalidValuesError, match="negative"):
        vicino.local_getis_ord(x, w)
    with pytest.raises(vicino.InvalidValuesError, match="rows"):
        vicino.local_moran(x[:5], w)
    with pytest.raises(vicino.IdError):
        vicino.local_moran(pd.Series(x, index=range(1, 21)), w)
    with pytest.raises(vicino.InvalidParameterError, match="adjust"):
        vicino.local_moran(x, w, adjust="holm")
    with pytest.raises(vicino.InvalidParameterError, match="alpha"):
        vicino.local_moran(x, w, alpha=1.5)
    with pytest.raises(vicino.InvalidParameterError, match="permutations"):
        vicino.local_moran(x, w, permutations=1)
    with pytest.raises(vicino.InvalidParameterError, match="alternative"):
        vicino.local_moran(x, w, alternative="both")
    with pytest.raises(vicino.InvalidTypeError):
        vicino.local_moran(x, w.to_scipy())
    with pytest.raises(vicino.InvalidTypeError):
        vicino.local_getis_ord(np.abs(x), w, star="yes")
    one = vicino.from_matrix(sp.csr_array((1, 1)))
    with pytest.raises(vicino.InvalidParameterError, match="at least 3 units"):
        vicino.local_moran([1.0], one)
    selfish = vicino.from_matrix(sp.csr_array(np.array([[1.0, 1, 0], [1, 0, 1], [0, 1, 0]])))
    with pytest.raises(vicino.InvalidMatrixError, match="themselves"):
        vicino.local_moran([1.0, 2.0, 4.0], selfish)
    with pytest.raises(vicino.InvalidMatrixError, match="star=True"):
        vicino.local_getis_ord([1.0, 2.0, 4.0], selfish)


def test_ids_index_the_table_and_html_carries_the_cautions():
    pts = _points(30, 6)
    ids = pd.Index([f"Borgo {k}" for k in range(30)])
    w = vicino.k_nearest(pts, 4, ids=ids).standardize("row")
    x = pd.Series(pts[:, 0], index=ids)
    r = vicino.local_moran(x, w, permutations=49, seed=3, adjust="fdr")
    t = r.table()
    assert t.index.equals(ids)
    assert list(t.columns) == [
        "value", "lag", "I", "E[I]", "variance", "z", "p_analytic", "p_permutation", "p_adjusted", "quadrant",
        "significant",
    ]  # fmt: skip
    assert t["quadrant"].dtype == "category" and t["significant"].dtype == "boolean"
    page = r._repr_html_()
    assert "not a cause" in page and "Benjamini-Hochberg" in page and "<table" in page
    assert "not a cause" in str(r)
    with pytest.raises(ValueError):
        r.statistic[0] = 1.0  # results are immutable
    g = vicino.local_getis_ord(x, w, star=True, permutations=0)
    assert list(g.table().columns)[:3] == ["G*", "E[G*]", "z"] and "not a cause" in g._repr_html_()


def test_constant_neighbourhood_values_give_p_one():
    # unit 0 sits at the mean: its I_i is 0 for every draw, so every draw is as extreme (p = 1)
    a = rook_lattice(1, 5)
    x = np.array([3.0, 1.0, 5.0, 2.0, 4.0])  # mean 3: unit 0 at the mean
    r = vicino.local_moran(x, vicino.from_matrix(a), permutations=99, seed=1)
    assert r.statistic[0] == 0.0 and r.p_permutation[0] == 1.0  # reference: Hope (1968), ties count


def test_results_survive_pickle_and_copies():
    import copy
    import pickle

    w = vicino.k_nearest(_points(25, 3), 3).standardize("row")
    x = _values(25, "skewed", seed=1)
    for r in (vicino.local_moran(x, w, permutations=19, seed=1), vicino.local_getis_ord(x, w, permutations=19, seed=1)):
        for twin in (pickle.loads(pickle.dumps(r)), copy.copy(r), copy.deepcopy(r)):
            assert type(twin) is type(r)
            np.testing.assert_array_equal(twin.p_permutation, r.p_permutation)
            assert twin.table().equals(r.table())


def test_readme_local_example_runs():
    import re
    from pathlib import Path

    pytest.importorskip("matplotlib").use("Agg")
    text = (Path(__file__).parents[2] / "README.md").read_text()
    session = re.search(r"## A short session\n\n```python\n(.*?)```", text, re.S)
    local = re.search(r"## Where is the clustering\?.*?\n```python\n(.*?)```", text, re.S)
    assert session and local, "the README's examples moved; update this test"
    scope: dict = {}
    code = "\n".join(line for line in session.group(1).splitlines() if not line.startswith("# ") and line != "w")
    exec(compile(code + "\n" + local.group(1), "README.md", "exec"), scope)
    r, wr = scope["local"], scope["wr"]
    # reference: Anselin (1995), sum_i I_i = S0 I, with vicino.moran checked against Cliff and Ord
    assert r.statistic.sum() == pytest.approx(wr.n * scope["result"].statistic, rel=1e-10)
    assert r.adjust == "fdr" and scope["hot"].star
