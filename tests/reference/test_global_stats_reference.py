"""Geary's C, Getis-Ord G and join counts checked against their published formulas,
written out here and evaluated with NumPy on dense matrices, against the exact moments
over every permutation (or every labelling) of small examples, and against direct
double sums."""

from __future__ import annotations

import itertools
import os
import subprocess
import sys
import textwrap

import numpy as np
import pytest
import scipy.sparse as sp
from scipy.stats import norm

import vicino


# ---------------------------------------------------------------- the references
def sums(w):
    """S0, S1, S2 of a dense (possibly asymmetric) W. reference: Cliff and Ord (1981)."""
    s0 = w.sum()
    s1 = 0.5 * ((w + w.T) ** 2).sum()
    s2 = ((w.sum(axis=1) + w.sum(axis=0)) ** 2).sum()
    return s0, s1, s2


def geary_direct(x, w):
    """C by its definition, a dense double sum. reference: Geary (1954)."""
    n = len(x)
    z = x - x.mean()
    diff2 = (x[:, None] - x[None, :]) ** 2
    return (n - 1) * (w * diff2).sum() / (2 * w.sum() * (z @ z))


def geary_moments(x, w):
    """E[C] = 1 and the variances of C under normality and randomization.

    reference: Cliff, A. D. and Ord, J. K. (1981), Spatial Processes, Pion, the
    moments of Geary's contiguity ratio in terms of S0, S1, S2, n and the kurtosis b2.
    """
    n = len(x)
    s0, s1, s2 = sums(w)
    z = x - x.mean()
    b2 = n * (z**4).sum() / (z @ z) ** 2
    var_norm = ((2 * s1 + s2) * (n - 1) - 4 * s0**2) / (2 * (n + 1) * s0**2)
    var_rand = (
        (n - 1) * s1 * (n**2 - 3 * n + 3 - (n - 1) * b2)
        - 0.25 * (n - 1) * s2 * (n**2 + 3 * n - 6 - (n**2 - n + 2) * b2)
        + s0**2 * (n**2 - 3 - (n - 1) ** 2 * b2)
    ) / (n * (n - 2) * (n - 3) * s0**2)
    return 1.0, var_norm, var_rand


def getis_direct(x, w):
    """G by its definition. reference: Getis and Ord (1992), Geographical Analysis 24(3)."""
    off = ~np.eye(len(x), dtype=bool)
    outer = np.outer(x, x)
    return (w * outer)[off].sum() / outer[off].sum()


def getis_moments(x, w):
    """E[G] and Var[G] under randomization with the terms B0..B4.

    reference: Getis, A. and Ord, J. K. (1992), The analysis of spatial association by
    use of distance statistics, Geographical Analysis 24(3), the moments of G(d).
    """
    n = len(x)
    s0, s1, s2 = sums(w)
    m1, m2, m3, m4 = ((x**k).sum() for k in (1, 2, 3, 4))
    b0 = (n**2 - 3 * n + 3) * s1 - n * s2 + 3 * s0**2
    b1 = -((n**2 - n) * s1 - 2 * n * s2 + 6 * s0**2)
    b2 = -(2 * n * s1 - (n + 3) * s2 + 6 * s0**2)
    b3 = 4 * (n - 1) * s1 - 2 * (n + 1) * s2 + 8 * s0**2
    b4 = s1 - s2 + s0**2
    eg = s0 / (n * (n - 1))
    eg2 = (b0 * m2**2 + b1 * m4 + b2 * m1**2 * m2 + b3 * m1 * m3 + b4 * m1**4) / (
        (m1**2 - m2) ** 2 * n * (n - 1) * (n - 2) * (n - 3)
    )
    return eg, eg2 - eg**2


def join_direct(x, w):
    """BB, WW, BW as half sums over the weights. reference: Cliff and Ord (1981), chapter 1."""
    bb = 0.5 * x @ w @ x
    ww = 0.5 * (1 - x) @ w @ (1 - x)
    bw = 0.5 * (w * (x[:, None] - x[None, :]) ** 2).sum()
    return bb, ww, bw


def join_moments(x, w):
    """Moments of BB, WW, BW under free and non-free sampling.

    reference: Cliff and Ord (1981), chapter 1: free sampling
    E[BB] = S0 p^2 / 2, Var BB = (S1 p^2 + (S2 - 2 S1) p^3 + (S1 - S2) p^4) / 4,
    E[BW] = S0 p q, Var BW = (2 S1 pq + (S2 - 2 S1) pq + 4 (S1 - S2) p^2 q^2) / 4;
    non-free sampling with p^(k) = n1^(k) / n^(k):
    E[BB] = S0 p^(2) / 2, Var BB = (S1 p^(2) + (S2 - 2 S1) p^(3) + (S0^2 + S1 - S2) p^(4)) / 4 - E^2,
    E[BW] = S0 n1 n0 / n^(2),
    Var BW = (2 S1 n1 n0 / n^(2) + (S2 - 2 S1) n1 n0 (n - 2) / n^(3)
              + 4 (S0^2 + S1 - S2) n1^(2) n0^(2) / n^(4)) / 4 - E^2.
    """
    n = len(x)
    s0, s1, s2 = sums(w)
    n1 = x.sum()
    n0 = n - n1

    def ff(a, k):  # falling factorial a (a-1) ... (a-k+1)
        return np.prod([a - i for i in range(k)])

    out = {}
    for name, m in (("BB", n1), ("WW", n0)):
        p = m / n
        e_free = s0 * p**2 / 2
        v_free = (s1 * p**2 + (s2 - 2 * s1) * p**3 + (s1 - s2) * p**4) / 4
        pk = [ff(m, k) / ff(n, k) for k in (2, 3, 4)]
        e = s0 * pk[0] / 2
        v = (s1 * pk[0] + (s2 - 2 * s1) * pk[1] + (s0**2 + s1 - s2) * pk[2]) / 4 - e**2
        out[name] = (e_free, v_free, e, v)
    p, q = n1 / n, n0 / n
    e_free = s0 * p * q
    v_free = (2 * s1 * p * q + (s2 - 2 * s1) * p * q + 4 * (s1 - s2) * p**2 * q**2) / 4
    e = s0 * n1 * n0 / ff(n, 2)
    v = (
        2 * s1 * n1 * n0 / ff(n, 2)
        + (s2 - 2 * s1) * n1 * n0 * (n - 2) / ff(n, 3)
        + 4 * (s0**2 + s1 - s2) * ff(n1, 2) * ff(n0, 2) / ff(n, 4)
    ) / 4 - e**2
    out["BW"] = (e_free, v_free, e, v)
    return out


def normal_p(z, alternative):
    # reference: standard normal tails from scipy.stats.norm
    if alternative == "greater":
        return norm.sf(z)
    if alternative == "less":
        return norm.cdf(z)
    return min(1.0, 2 * norm.sf(abs(z)))


# ---------------------------------------------------------------- test weights
def rook_lattice(rows, cols):
    def path(m):
        return sp.diags([np.ones(m - 1), np.ones(m - 1)], [-1, 1], shape=(m, m))

    return sp.csr_array(sp.kron(sp.eye(rows), path(cols)) + sp.kron(path(rows), sp.eye(cols)))


def torus(rows, cols):
    def ring(m):
        return sp.diags([np.ones(m - 1), np.ones(m - 1), [1.0], [1.0]], [-1, 1, m - 1, -(m - 1)], shape=(m, m))

    return sp.csr_array(sp.kron(sp.eye(rows), ring(cols)) + sp.kron(ring(rows), sp.eye(cols)))


def _points(n, seed):
    return np.random.default_rng(seed).uniform(0, 1, size=(n, 2))


def _asym_matrix(n, seed):
    rng = np.random.default_rng(seed)
    a = sp.random(n, n, density=0.1, random_state=rng, format="csr", data_rvs=lambda k: rng.uniform(0.1, 4.0, k))
    ring = sp.csr_array((rng.uniform(0.1, 4.0, n), (np.arange(n), (np.arange(n) + 1) % n)), shape=(n, n))
    a = sp.lil_array(sp.csr_array(a) + ring)
    a.setdiag(0)
    a = sp.csr_array(a)
    a.eliminate_zeros()
    return a


CASES = {
    "symmetric_binary": lambda: vicino.from_matrix(rook_lattice(7, 9)),
    "distance_band": lambda: vicino.within_distance(_points(60, 1), 0.3),
    "knn_row_asymmetric": lambda: vicino.k_nearest(_points(60, 2), 5).standardize("row"),
    "matrix_asymmetric": lambda: vicino.from_matrix(_asym_matrix(50, 3)),
}


@pytest.fixture(params=sorted(CASES))
def w(request):
    return CASES[request.param]()


def _values(n, kind, seed=0):
    rng = np.random.default_rng(seed)
    if kind == "normal":
        return rng.normal(size=n)
    return rng.exponential(size=n) ** 2  # skewed, heavy-tailed, non-negative: b2 far from 3


# ---------------------------------------------------------------- analytic results
@pytest.mark.parametrize("kind", ["normal", "skewed"])
@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_geary_matches_cliff_ord(w, kind, alternative):
    x = _values(w.n, kind)
    dense = w.to_dense()
    e, var_norm, var_rand = geary_moments(x, dense)
    r = vicino.geary(x, w, permutations=0, alternative=alternative)
    c = geary_direct(x, dense)
    assert r.statistic == pytest.approx(c, rel=1e-10)  # reference: Geary (1954), dense double sum
    assert r.expected == 1.0  # reference: Cliff and Ord (1981), E[C] = 1
    s0, s1, s2 = sums(dense)
    assert (r.s0, r.s1, r.s2) == pytest.approx((s0, s1, s2), rel=1e-12)  # reference: Cliff and Ord (1981)
    assert r.normality.variance == pytest.approx(var_norm, rel=1e-10)  # reference: Cliff and Ord (1981)
    assert r.randomization.variance == pytest.approx(var_rand, rel=1e-10)  # reference: Cliff and Ord (1981)
    for inf, var in ((r.normality, var_norm), (r.randomization, var_rand)):
        z = (c - e) / np.sqrt(var)
        assert inf.z == pytest.approx(z, rel=1e-9, abs=1e-12)
        assert inf.p_value == pytest.approx(normal_p(z, alternative), rel=1e-9, abs=1e-15)  # scipy.stats.norm
    assert r.permutation is None and r.alternative == alternative


@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_getis_ord_matches_getis_and_ord(w, alternative):
    x = _values(w.n, "skewed", seed=3)
    dense = w.to_dense()
    eg, var = getis_moments(x, dense)
    r = vicino.getis_ord(x, w, permutations=0, alternative=alternative)
    g = getis_direct(x, dense)
    assert r.statistic == pytest.approx(g, rel=1e-10)  # reference: Getis and Ord (1992), dense double sum
    assert r.expected == pytest.approx(eg, rel=1e-12)  # reference: Getis and Ord (1992), E[G] = S0 / (n (n - 1))
    assert r.randomization.variance == pytest.approx(var, rel=1e-8)  # reference: Getis and Ord (1992), B0..B4
    z = (g - eg) / np.sqrt(var)
    assert r.randomization.z == pytest.approx(z, rel=1e-7, abs=1e-10)
    assert r.randomization.p_value == pytest.approx(normal_p(z, alternative), rel=1e-6, abs=1e-15)  # scipy
    assert r.normality is None  # Getis and Ord (1992) give moments under randomization only


@pytest.mark.parametrize("share", [0.5, 0.2])
def test_join_counts_match_cliff_ord(w, share):
    rng = np.random.default_rng(4)
    x = (rng.uniform(size=w.n) < share).astype(float)
    dense = w.to_dense()
    bb, ww, bw = join_direct(x, dense)
    ref = join_moments(x, dense)
    r = vicino.join_counts(x, w, permutations=0)
    assert r.labels == (0.0, 1.0) and r.label_counts == (int((x == 0).sum()), int(x.sum()))
    for jc, count, key in ((r.like_of(1.0), bb, "BB"), (r.like_of(0.0), ww, "WW"), (r.unlike, bw, "BW")):
        e_free, v_free, e, v = ref[key]
        assert jc.count == pytest.approx(count, rel=1e-12)  # reference: Cliff and Ord (1981), half sums
        assert jc.free.expected == pytest.approx(e_free, rel=1e-12)  # reference: Cliff and Ord (1981), free
        assert jc.free.variance == pytest.approx(v_free, rel=1e-9)
        assert jc.nonfree.expected == pytest.approx(e, rel=1e-12)  # reference: Cliff and Ord (1981), non-free
        assert jc.nonfree.variance == pytest.approx(v, rel=1e-9)
        z = (count - e) / np.sqrt(v)
        assert jc.nonfree.z == pytest.approx(z, rel=1e-8, abs=1e-10)
        assert jc.nonfree.p_value == pytest.approx(normal_p(z, "two-sided"), rel=1e-7, abs=1e-15)  # scipy
    # identity: the three counts share the weight of every link, BB + WW + BW = S0 / 2
    # reference: Cliff and Ord (1981), chapter 1 (x_i x_j + (1-x_i)(1-x_j) + (x_i-x_j)^2 = 1 for 0/1 values)
    assert bb + ww + bw == pytest.approx(dense.sum() / 2, rel=1e-12)
    assert sum(j.count for j in r.joins) == pytest.approx(r.s0 / 2, rel=1e-12)


def test_join_counts_of_symmetric_binary_weights_count_each_join_once():
    a = rook_lattice(5, 6)
    w = vicino.from_matrix(a)
    rng = np.random.default_rng(5)
    x = rng.integers(0, 2, size=30)
    r = vicino.join_counts(x, w, permutations=0)
    # reference: networkx edges of the same lattice, each undirected edge once, counted by hand
    nx = pytest.importorskip("networkx")
    g = nx.grid_2d_graph(5, 6)
    label = {(i, j): x[i * 6 + j] for i, j in g.nodes}
    edges = [(label[u], label[v]) for u, v in g.edges]
    assert r.like_of(1).count == sum(1 for a_, b in edges if a_ == b == 1)
    assert r.like_of(0).count == sum(1 for a_, b in edges if a_ == b == 0)
    assert r.unlike.count == sum(1 for a_, b in edges if a_ != b)
    assert sum(j.count for j in r.joins) == g.number_of_edges()  # BB + WW + BW = S0 / 2 = edges


@pytest.mark.parametrize("shape", [(6, 7), (4, 10)])
def test_checkerboard(shape):
    rows, cols = shape
    w = vicino.from_matrix(rook_lattice(rows, cols))
    x = (np.add.outer(np.arange(rows), np.arange(cols)) % 2).ravel().astype(float)
    n = rows * cols
    j = vicino.join_counts(x, w, permutations=0)
    # common practice: on a rook lattice a checkerboard has only unlike joins
    assert j.like_of(1.0).count == 0 and j.like_of(0.0).count == 0
    assert j.unlike.count == w.nnz / 2
    c = vicino.geary(x, w, permutations=0)
    # every link joins values 1 apart and sum z^2 = n / 4 (half ones): C = 2 (n - 1) / n, above 1
    # reference: Geary (1954), the definition evaluated by hand; and the dense double sum
    assert c.statistic == pytest.approx(2 * (n - 1) / n, rel=1e-12)
    assert c.statistic == pytest.approx(geary_direct(x, w.to_dense()), rel=1e-12)
    assert vicino.moran(x, w, permutations=0).statistic == pytest.approx(-1.0, abs=1e-12)  # common practice


def test_smooth_trend_gives_small_c_and_large_g():
    pts = _points(200, 7)
    w = vicino.k_nearest(pts, 6).symmetrize("union")
    x = 1 + pts[:, 0] + pts[:, 1]  # a smooth trend: alike neighbours
    c = vicino.geary(x, w, permutations=0, alternative="less")
    assert c.statistic == pytest.approx(geary_direct(x, w.to_dense()), rel=1e-10)  # Geary (1954)
    assert c.statistic < 0.3 and c.normality.z < -5  # common practice: positive autocorrelation, C < 1
    assert c.normality.p_value == pytest.approx(norm.cdf(c.normality.z), rel=1e-9, abs=1e-300)  # scipy
    g = vicino.getis_ord(x**4, w, permutations=0, alternative="greater")
    assert g.statistic == pytest.approx(getis_direct(x**4, w.to_dense()), rel=1e-10)  # Getis and Ord (1992)
    assert g.statistic > g.expected and g.randomization.z > 3  # high values near high values


def test_statistics_invariant_to_scale_where_they_should_be():
    w = vicino.from_matrix(_asym_matrix(40, 9))
    x = _values(40, "skewed", seed=2)
    dense = w.to_dense()
    base = vicino.geary(x, w, permutations=0)
    for method in ("global", "max_entry"):
        r = vicino.geary(x, w.standardize(method), permutations=0)
        assert r.statistic == pytest.approx(base.statistic, rel=1e-10)  # Geary (1954): n-free of W's scale
        assert r.randomization.variance == pytest.approx(base.randomization.variance, rel=1e-9)
    # G is invariant to the scale of x and proportional to the scale of W (definition, Getis and Ord 1992)
    g = vicino.getis_ord(x, w, permutations=0)
    assert vicino.getis_ord(x * 1e-30, w, permutations=0).statistic == pytest.approx(g.statistic, rel=1e-12)
    assert vicino.getis_ord(x * 1e250, w, permutations=0).statistic == pytest.approx(g.statistic, rel=1e-12)
    scaled = vicino.from_matrix(sp.csr_array(w.to_scipy() * 1e200))
    gs = vicino.getis_ord(x, scaled, permutations=0)
    assert gs.statistic == pytest.approx(g.statistic * 1e200, rel=1e-10)
    assert gs.randomization.z == pytest.approx(g.randomization.z, rel=1e-8)
    assert g.statistic == pytest.approx(getis_direct(x, dense), rel=1e-10)  # Getis and Ord (1992)


def test_getis_ord_with_one_dominant_value():
    w = vicino.from_matrix(rook_lattice(4, 5))
    x = np.ones(20)
    x[7] = 1e12
    r = vicino.getis_ord(x, w, permutations=0)
    # reference: exact rational arithmetic of the definition (Python fractions)
    from fractions import Fraction

    a = w.to_dense()
    xs = [Fraction(v) for v in x.astype(int)]
    num = sum(Fraction(a[i, j]) * xs[i] * xs[j] for i in range(20) for j in range(20) if i != j)
    den = sum(xs[i] * xs[j] for i in range(20) for j in range(20) if i != j)
    assert r.statistic == pytest.approx(float(num / den), rel=1e-13)


# ---------------------------------------------------------------- exact moments by enumeration
SMALL = sp.csr_array(
    np.array(
        [
            [0, 1, 0, 0, 2, 0, 0],
            [1, 0, 1, 0, 0, 0, 0],
            [0, 3, 0, 1, 0, 0, 1],
            [0, 0, 1, 0, 1, 0, 0],
            [1, 0, 0, 1, 0, 1, 0],
            [0, 0, 0, 0, 1, 0, 1],
            [0, 0, 1, 0, 0, 0.5, 0],
        ],
        dtype=float,
    )
)  # asymmetric, non-binary, 7 units: 5040 permutations


@pytest.fixture(scope="module")
def perms():
    return np.array(list(itertools.permutations(range(7))))


def test_randomization_moments_are_exact_permutation_moments(perms):
    # reference: the randomization moments are, by definition, the mean and variance over all
    # n! assignments of the observed values to the units (Cliff and Ord 1981); enumerated here
    w = vicino.from_matrix(SMALL)
    dense = SMALL.toarray()
    x = np.array([0.3, 2.0, 5.5, 0.0, 1.25, 9.0, 4.0])
    xs = x[perms]  # every relabelling, one per row
    z = xs - x.mean()
    diff2 = (xs[:, :, None] - xs[:, None, :]) ** 2
    cs = (7 - 1) * (diff2 * dense).sum(axis=(1, 2)) / (2 * dense.sum() * (z[0] @ z[0]))
    c = vicino.geary(x, w, permutations=0)
    assert cs.mean() == pytest.approx(1.0, rel=1e-12)  # E[C] = 1 exactly
    assert c.randomization.variance == pytest.approx(cs.var(), rel=1e-10)
    num = np.einsum("ri,ij,rj->r", xs, dense, xs)
    den = x.sum() ** 2 - (x**2).sum()
    gs = num / den
    g = vicino.getis_ord(x, w, permutations=0)
    assert g.expected == pytest.approx(gs.mean(), rel=1e-12)
    assert g.randomization.variance == pytest.approx(gs.var(), rel=1e-9)
    # the published formulas written out above agree with the enumeration as well (setup check)
    assert geary_moments(x, dense)[2] == pytest.approx(cs.var(), rel=1e-10)
    assert getis_moments(x, dense)[1] == pytest.approx(gs.var(), rel=1e-9)


def test_join_count_moments_are_exact(perms):
    w = vicino.from_matrix(SMALL)
    dense = SMALL.toarray()
    x = np.array([1, 0, 0, 1, 1, 0, 0], dtype=float)
    r = vicino.join_counts(x, w, permutations=0)
    # non-free sampling: every assignment of the observed labels (all 5040 permutations)
    xs = x[perms]
    bb = 0.5 * np.einsum("ri,ij,rj->r", xs, dense, xs)
    ww = 0.5 * np.einsum("ri,ij,rj->r", 1 - xs, dense, 1 - xs)
    bw = dense.sum() / 2 - bb - ww
    # free sampling: every one of the 2^7 labellings, weighted by its binomial probability
    p = x.mean()
    labs = np.array(list(itertools.product([0.0, 1.0], repeat=7)))
    prob = p ** labs.sum(axis=1) * (1 - p) ** (7 - labs.sum(axis=1))
    fbb = 0.5 * np.einsum("ri,ij,rj->r", labs, dense, labs)
    fww = 0.5 * np.einsum("ri,ij,rj->r", 1 - labs, dense, 1 - labs)
    fbw = dense.sum() / 2 - fbb - fww
    assert prob.sum() == pytest.approx(1.0)
    for jc, nonfree, free in ((r.like_of(1.0), bb, fbb), (r.like_of(0.0), ww, fww), (r.unlike, bw, fbw)):
        # reference: exact enumeration (itertools), the definition of each sampling scheme
        assert jc.nonfree.expected == pytest.approx(nonfree.mean(), rel=1e-12)
        assert jc.nonfree.variance == pytest.approx(nonfree.var(), rel=1e-10)
        mean = prob @ free
        assert jc.free.expected == pytest.approx(mean, rel=1e-12)
        assert jc.free.variance == pytest.approx(prob @ (free - mean) ** 2, rel=1e-10)


def test_geary_normality_variance_by_simulation():
    # reference: Monte Carlo with numpy: C of normal samples; the tolerance is five standard
    # errors of the sample variance, sqrt((m4 - s^4) / R), from the sample itself
    dense = SMALL.toarray()
    w = vicino.from_matrix(SMALL)
    rng = np.random.default_rng(11)
    R = 200_000
    xs = rng.normal(size=(R, 7))
    z = xs - xs.mean(axis=1, keepdims=True)
    diff2 = (xs[:, :, None] - xs[:, None, :]) ** 2
    cs = 6 * (diff2 * dense).sum(axis=(1, 2)) / (2 * dense.sum() * (z**2).sum(axis=1))
    v = cs.var()
    se = np.sqrt((((cs - cs.mean()) ** 4).mean() - v**2) / R)
    r = vicino.geary(rng.normal(size=7), w, permutations=0)
    assert abs(r.normality.variance - v) < 5 * se
    assert abs(cs.mean() - 1.0) < 5 * np.sqrt(v / R)  # E[C] = 1 under normality too


# ---------------------------------------------------------------- permutations
@pytest.fixture(scope="module")
def knn60():
    return vicino.k_nearest(_points(60, 2), 5)


@pytest.mark.parametrize("name", ["geary", "getis_ord"])
def test_permutation_draws_centre_on_the_randomization_moments(knn60, name):
    x = _values(60, "skewed", seed=5)
    R = 4000
    r = getattr(vicino, name)(x, knn60, permutations=R, seed=6)
    d = r.permutation.draws
    var = r.randomization.variance
    dense = knn60.to_dense()
    ref_var = geary_moments(x, dense)[2] if name == "geary" else getis_moments(x, dense)[1]
    assert var == pytest.approx(ref_var, rel=1e-8)  # the formulas above
    # reference: the randomization expectation and variance are the exact mean and variance of the
    # permutation distribution (Cliff and Ord 1981; Getis and Ord 1992): within 4 standard errors
    assert abs(d.mean() - r.expected) < 4 * np.sqrt(var / R)
    # sampling sd of a sample variance ~ var sqrt(2 / (R - 1)) (normal approximation; common practice);
    # 6 of them leave room for the excess kurtosis under skewed values
    assert abs(d.var(ddof=1) - var) < 6 * var * np.sqrt(2 / (R - 1))
    assert r.permutation.mean == pytest.approx(d.mean(), rel=1e-12)  # numpy
    assert r.permutation.std == pytest.approx(d.std(ddof=1), rel=1e-12)  # numpy, ddof=1


def test_join_count_draws_centre_on_the_nonfree_moments(knn60):
    rng = np.random.default_rng(8)
    x = (rng.uniform(size=60) < 0.4).astype(int)
    R = 4000
    r = vicino.join_counts(x, knn60, permutations=R, seed=9)
    total = np.zeros(R)
    for jc in r.joins:
        d = jc.permutation.draws
        total += d
        # reference: non-free sampling is random assignment of the observed labels (Cliff and Ord 1981)
        assert abs(d.mean() - jc.nonfree.expected) < 4 * np.sqrt(jc.nonfree.variance / R)
        assert abs(d.var(ddof=1) - jc.nonfree.variance) < 6 * jc.nonfree.variance * np.sqrt(2 / (R - 1))
    # every draw keeps BB + WW + BW = S0 / 2 (Cliff and Ord 1981, chapter 1)
    np.testing.assert_allclose(total, knn60.nnz / 2, rtol=1e-12)


@pytest.mark.parametrize("seed", [0, 17])
def test_alternative_counts_match_numpy_recount(knn60, seed):
    x = _values(60, "skewed", seed=11 + seed)
    R = 999
    for name in ("geary", "getis_ord"):
        results = {
            alt: getattr(vicino, name)(x, knn60, permutations=R, seed=seed, alternative=alt)
            for alt in ("two-sided", "greater", "less")
        }
        d = results["greater"].permutation.draws
        s, e = results["greater"].statistic, results["greater"].expected
        counts = {
            "greater": int(np.sum(d >= s)),
            "less": int(np.sum(d <= s)),
            "two-sided": int(np.sum(np.abs(d - e) >= np.abs(s - e))),
        }
        for alt, r in results.items():
            assert r.permutation.draws.tobytes() == d.tobytes()  # the seed alone fixes the draws
            assert r.permutation.extreme == counts[alt], (name, alt)  # numpy recount from draws
            p = r.permutation.p_value
            assert p == pytest.approx((counts[alt] + 1) / (R + 1), rel=1e-15)  # reference: Hope (1968)
            assert 1 / (R + 1) <= p <= 1
        assert 0 < counts["greater"] < R  # the recount is informative here


def test_join_count_alternatives_match_numpy_recount(knn60):
    x = (np.random.default_rng(12).uniform(size=60) < 0.5).astype(int)
    R = 499
    for alt in ("two-sided", "greater", "less"):
        r = vicino.join_counts(x, knn60, permutations=R, seed=3, alternative=alt)
        for jc in r.joins:
            d, c, e = jc.permutation.draws, jc.count, jc.nonfree.expected
            m = {"greater": np.sum(d >= c), "less": np.sum(d <= c), "two-sided": np.sum(np.abs(d - e) >= abs(c - e))}
            assert jc.permutation.extreme == m[alt]  # numpy recount
            assert jc.permutation.p_value == pytest.approx((m[alt] + 1) / (R + 1), rel=1e-15)  # Hope (1968)


def test_geary_uses_morans_draws_on_a_regular_graph():
    # on a graph where every unit has k neighbours (a torus), sum_i d_i z_i^2 = 2 k z'z, so
    # C = (n - 1) / n (1 - I) for every arrangement of the values: the algebra of the two
    # definitions (Moran 1950, Geary 1954). The same seed gives the same permutations.
    w = vicino.from_matrix(torus(6, 8))
    x = _values(48, "normal", seed=13)
    m = vicino.moran(x, w, permutations=300, seed=77)
    c = vicino.geary(x, w, permutations=300, seed=77)
    assert c.statistic == pytest.approx(47 / 48 * (1 - m.statistic), rel=1e-12)
    np.testing.assert_allclose(c.permutation.draws, 47 / 48 * (1 - m.permutation.draws), rtol=1e-10, atol=1e-12)


def test_clustered_data_gets_the_smallest_permutation_p():
    pts = _points(150, 10)
    w = vicino.k_nearest(pts, 6)
    x = 1 + pts[:, 0] * 3 + pts[:, 1]
    R = 499
    c = vicino.geary(x, w, permutations=R, seed=1, alternative="less")
    assert c.permutation.extreme == 0 and c.permutation.p_value == pytest.approx(1 / (R + 1))  # Hope (1968)
    c = vicino.geary(x, w, permutations=R, seed=1, alternative="greater")
    assert c.permutation.extreme == R and c.permutation.p_value == pytest.approx(1.0)  # Hope (1968)


def test_permutation_p_values_are_roughly_uniform_under_the_null():
    # values shuffled at random: the permutation p-values of independent data sets are
    # roughly uniform on (0, 1]; a loose Kolmogorov-Smirnov check (scipy.stats.kstest)
    from scipy.stats import kstest

    w = vicino.k_nearest(_points(80, 14), 4)
    rng = np.random.default_rng(15)
    ps = {"geary": [], "getis_ord": [], "join_counts": []}
    for k in range(120):
        x = rng.exponential(size=80)
        ps["geary"].append(vicino.geary(x, w, permutations=99, seed=k).permutation.p_value)
        ps["getis_ord"].append(vicino.getis_ord(x, w, permutations=99, seed=k).permutation.p_value)
        b = vicino.join_counts((x > np.median(x)).astype(int), w, permutations=99, seed=k)
        ps["join_counts"].append(b.unlike.permutation.p_value)
    for name, p in ps.items():
        # discrete p-values on a grid of 1/100 and ties in join counts: a generous threshold
        assert kstest(p, "uniform").pvalue > 0.001, name


# ---------------------------------------------------------------- threads
SCRIPT = textwrap.dedent(
    """
    import sys, numpy as np, vicino
    rng = np.random.default_rng(21)
    pts = rng.uniform(0, 1, size=(20_000, 2))
    w = vicino.k_nearest(pts, 8)
    x = 1 + pts[:, 0] + rng.exponential(size=20_000)
    c = vicino.geary(x, w, permutations=32, seed=2024)
    g = vicino.getis_ord(x, w, permutations=32, seed=2024)
    j = vicino.join_counts(x > 1.8, w, permutations=32, seed=2024)
    out = [[c.statistic, g.statistic], c.permutation.draws, g.permutation.draws]
    out += [jc.permutation.draws for jc in j.joins]
    np.save(sys.argv[1], np.concatenate(out))
    """
)


def test_draws_identical_across_thread_counts(tmp_path):
    script = tmp_path / "run.py"
    script.write_text(SCRIPT)
    out = {}
    for threads in ("1", "2"):
        env = dict(os.environ, RAYON_NUM_THREADS=threads)
        path = tmp_path / f"out{threads}.npy"
        proc = subprocess.run(
            [sys.executable, str(script), str(path)], env=env, capture_output=True, text=True, timeout=300
        )
        assert proc.returncode == 0, proc.stderr
        out[threads] = np.load(path)
    assert out["1"].size == 2 + 5 * 32
    assert out["1"].tobytes() == out["2"].tobytes()
    # and the statistics agree with the definitions evaluated with scipy.sparse
    rng = np.random.default_rng(21)
    pts = rng.uniform(0, 1, size=(20_000, 2))
    x = 1 + pts[:, 0] + rng.exponential(size=20_000)
    a = vicino.k_nearest(pts, 8).to_scipy()
    z = x - x.mean()
    i, j = a.nonzero()
    c = (len(x) - 1) * (a.data * (x[i] - x[j]) ** 2).sum() / (2 * a.sum() * (z @ z))  # Geary (1954)
    g = (x @ (a @ x)) / (x.sum() ** 2 - (x**2).sum())  # Getis and Ord (1992)
    assert out["1"][0] == pytest.approx(c, rel=1e-10)
    assert out["1"][1] == pytest.approx(g, rel=1e-10)
