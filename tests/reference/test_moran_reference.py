"""Global Moran's I checked against the Cliff and Ord (1981) formulas,
written out here and evaluated with NumPy on dense matrices."""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
from scipy.stats import norm

import vicino


# ---------------------------------------------------------------- the reference
def cliff_ord(x, w):
    """Moran's I and its moments for a general (possibly asymmetric) dense W.

    reference: Cliff and Ord (1981), Spatial Processes: Models and Applications,
    Pion, London -- moments of I under normality and under randomization.
    """
    x = np.asarray(x, dtype=float)
    w = np.asarray(w, dtype=float)
    n = len(x)
    z = x - x.mean()
    s0 = w.sum()
    s1 = 0.5 * ((w + w.T) ** 2).sum()
    s2 = ((w.sum(axis=1) + w.sum(axis=0)) ** 2).sum()
    stat = n / s0 * (z @ w @ z) / (z @ z)
    ei = -1.0 / (n - 1)
    var_norm = (n**2 * s1 - n * s2 + 3 * s0**2) / ((n**2 - 1) * s0**2) - ei**2
    b2 = n * (z**4).sum() / (z**2).sum() ** 2
    var_rand = (
        n * ((n**2 - 3 * n + 3) * s1 - n * s2 + 3 * s0**2) - b2 * ((n**2 - n) * s1 - 2 * n * s2 + 6 * s0**2)
    ) / ((n - 1) * (n - 2) * (n - 3) * s0**2) - ei**2
    return dict(statistic=stat, expected=ei, s0=s0, s1=s1, s2=s2, var_norm=var_norm, var_rand=var_rand)


def normal_p(z, alternative):
    # reference: standard normal tails from scipy.stats.norm
    if alternative == "greater":
        return norm.sf(z)
    if alternative == "less":
        return norm.cdf(z)
    return min(1.0, 2 * norm.sf(abs(z)))


def moran_numpy(x, w):
    """I by the plain definition, for permutation loops: n/S0 z'Wz / z'z."""
    z = x - x.mean()
    return len(x) / w.sum() * (z @ w @ z) / (z @ z)  # reference: Moran (1950), Biometrika 37


def rook_lattice(rows, cols):
    def path(m):
        return sp.diags([np.ones(m - 1), np.ones(m - 1)], [-1, 1], shape=(m, m))

    return sp.csr_array(sp.kron(sp.eye(rows), path(cols)) + sp.kron(path(rows), sp.eye(cols)))


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
    "symmetric_binary_distance": lambda: vicino.within_distance(_points(60, 1), 0.3),
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
    return rng.exponential(size=n) ** 2  # skewed, heavy-tailed: b2 far from 3


# ---------------------------------------------------------------- analytic results
@pytest.mark.parametrize("kind", ["normal", "skewed"])
@pytest.mark.parametrize("alternative", ["two-sided", "greater", "less"])
def test_moran_matches_cliff_ord(w, kind, alternative):
    x = _values(w.n, kind)
    dense = w.to_dense()
    ref = cliff_ord(x, dense)
    r = vicino.moran(x, w, permutations=0, alternative=alternative)
    # reference: Cliff and Ord (1981), formulas in cliff_ord()
    assert r.n == w.n
    assert r.statistic == pytest.approx(ref["statistic"], rel=1e-10, abs=1e-13)
    assert r.expected == pytest.approx(-1.0 / (w.n - 1), rel=1e-14)
    assert r.s0 == pytest.approx(ref["s0"], rel=1e-12)
    assert r.s1 == pytest.approx(ref["s1"], rel=1e-12)
    assert r.s2 == pytest.approx(ref["s2"], rel=1e-12)
    assert r.normality.variance == pytest.approx(ref["var_norm"], rel=1e-10)
    assert r.randomization.variance == pytest.approx(ref["var_rand"], rel=1e-10)
    for inf, var in ((r.normality, ref["var_norm"]), (r.randomization, ref["var_rand"])):
        z = (ref["statistic"] - ref["expected"]) / np.sqrt(var)
        assert inf.z == pytest.approx(z, rel=1e-9, abs=1e-12)
        assert inf.p_value == pytest.approx(normal_p(z, alternative), rel=1e-9, abs=1e-15)  # scipy.stats.norm
    assert r.normality.assumption == "normality"
    assert r.randomization.assumption == "randomization"
    assert r.alternative == alternative
    assert r.permutation is None


def test_moran_series_input_matches_array(w):
    x = _values(w.n, "normal", seed=5)
    ref = cliff_ord(x, w.to_dense())
    r = vicino.moran(pd.Series(x, index=w.ids), w, permutations=0)
    assert r.statistic == pytest.approx(ref["statistic"], rel=1e-10, abs=1e-13)  # Cliff and Ord (1981)


def test_moran_clustered_data_is_positive_and_significant():
    pts = _points(200, 7)
    w = vicino.k_nearest(pts, 6).standardize("row")
    x = pts[:, 0] + pts[:, 1]  # a smooth trend: strongly clustered
    ref = cliff_ord(x, w.to_dense())
    r = vicino.moran(x, w, permutations=0, alternative="greater")
    assert r.statistic == pytest.approx(ref["statistic"], rel=1e-10)  # Cliff and Ord (1981)
    assert r.statistic > 0.7  # common practice: a smooth trend gives large positive I
    z = (ref["statistic"] - ref["expected"]) / np.sqrt(ref["var_norm"])
    assert r.normality.p_value == pytest.approx(norm.sf(z), rel=1e-6, abs=1e-300)  # scipy.stats.norm


@pytest.mark.parametrize("shape", [(6, 7), (4, 10), (8, 8)])
def test_checkerboard_on_rook_lattice_is_minus_one(shape):
    rows, cols = shape
    a = rook_lattice(rows, cols)
    w = vicino.from_matrix(a)
    x = (np.add.outer(np.arange(rows), np.arange(cols)) % 2).ravel().astype(float)
    r = vicino.moran(x, w, permutations=0)
    # common practice: with binary rook weights every link joins unlike cells, I = -1 exactly
    assert r.statistic == pytest.approx(-1.0, abs=1e-12)
    assert cliff_ord(x, a.toarray())["statistic"] == pytest.approx(-1.0, abs=1e-12)  # setup check of the reference


def test_moran_invariant_to_scaling_of_weights():
    # I is invariant to multiplying W by a constant (n/S0 normalisation)
    w = vicino.from_matrix(_asym_matrix(40, 9))
    x = _values(40, "normal", seed=2)
    ref = cliff_ord(x, w.to_dense() * 3.7)
    for method in ("global", "max_entry", "max_eigenvalue"):
        r = vicino.moran(x, w.standardize(method), permutations=0)
        assert r.statistic == pytest.approx(ref["statistic"], rel=1e-9)  # Cliff and Ord (1981), scale invariance
        assert r.randomization.variance == pytest.approx(ref["var_rand"], rel=1e-9)


# ---------------------------------------------------------------- permutations
@pytest.fixture(scope="module")
def knn60():
    return vicino.k_nearest(_points(60, 2), 5).standardize("row")


def test_permutation_p_is_hope(knn60):
    x = _values(60, "normal", seed=1)
    for alt in ("two-sided", "greater", "less"):
        r = vicino.moran(x, knn60, permutations=199, seed=3, alternative=alt)
        p = r.permutation
        assert p.permutations == 199 and len(p.draws) == 199
        assert p.p_value == pytest.approx((p.extreme + 1) / (199 + 1), rel=1e-15)  # reference: Hope (1968), JRSS B 30
        assert 0 < p.p_value <= 1


def test_permutation_summary_matches_numpy_on_draws(knn60):
    x = _values(60, "skewed", seed=2)
    r = vicino.moran(x, knn60, permutations=499, seed=4)
    d = r.permutation.draws
    assert r.permutation.mean == pytest.approx(np.mean(d), rel=1e-12)  # numpy
    assert r.permutation.std == pytest.approx(np.std(d, ddof=1), rel=1e-12)  # numpy, ddof=1
    assert r.permutation.z == pytest.approx((r.statistic - np.mean(d)) / np.std(d, ddof=1), rel=1e-10)  # numpy


def test_same_seed_same_draws_different_seed_different(knn60):
    x = _values(60, "normal", seed=3)
    a = vicino.moran(x, knn60, permutations=99, seed=12345)
    b = vicino.moran(x, knn60, permutations=99, seed=12345)
    c = vicino.moran(x, knn60, permutations=99, seed=12346)
    assert a.permutation.seed == 12345
    assert a.permutation.draws.tobytes() == b.permutation.draws.tobytes()
    assert not np.array_equal(a.permutation.draws, c.permutation.draws)
    # the seed does not depend on the alternative
    g = vicino.moran(x, knn60, permutations=99, seed=12345, alternative="greater")
    assert g.permutation.draws.tobytes() == a.permutation.draws.tobytes()


def test_random_seed_is_reported_and_reproduces(knn60):
    x = _values(60, "normal", seed=4)
    a = vicino.moran(x, knn60, permutations=49)
    b = vicino.moran(x, knn60, permutations=49, seed=a.permutation.seed)
    assert a.permutation.draws.tobytes() == b.permutation.draws.tobytes()


def test_draws_moments_match_randomization_moments(knn60):
    x = _values(60, "skewed", seed=5)
    R = 4000
    r = vicino.moran(x, knn60, permutations=R, seed=6)
    d = r.permutation.draws
    ref = cliff_ord(x, knn60.to_dense())
    se_mean = np.sqrt(ref["var_rand"] / R)
    # reference: Cliff and Ord (1981): E[I] = -1/(n-1) and the randomization variance are the exact
    # mean and variance of I over all permutations of the values
    assert abs(d.mean() - ref["expected"]) < 4 * se_mean
    # sampling sd of a sample variance ~ var * sqrt(2/(R-1)) (normal approximation; common practice);
    # 6 of them leave room for the excess kurtosis of I under skewed values
    assert abs(d.var(ddof=1) - ref["var_rand"]) < 6 * ref["var_rand"] * np.sqrt(2 / (R - 1))


def test_draws_distribution_matches_numpy_permutation_loop(knn60):
    x = _values(60, "normal", seed=7)
    dense = knn60.to_dense()
    rng = np.random.default_rng(8)
    R = 3000
    ours = np.array([moran_numpy(rng.permutation(x), dense) for _ in range(R)])  # plain numpy permutation loop
    r = vicino.moran(x, knn60, permutations=R, seed=9)
    d = r.permutation.draws
    # not bit-for-bit (different generator): compare mean and sd within a few standard errors
    se = np.sqrt(ours.var(ddof=1) / R + d.var(ddof=1) / R)
    assert abs(d.mean() - ours.mean()) < 4 * se  # numpy permutation reference
    se_sd = np.sqrt(ours.var() / (2 * (R - 1)) + d.var() / (2 * (R - 1)))
    assert abs(d.std(ddof=1) - ours.std(ddof=1)) < 5 * se_sd  # numpy permutation reference


def test_clustered_data_permutation_p_is_minimum():
    pts = _points(150, 10)
    w = vicino.k_nearest(pts, 6).standardize("row")
    x = pts[:, 0] * 3 + pts[:, 1]
    R = 999
    for alt in ("greater", "two-sided"):
        r = vicino.moran(x, w, permutations=R, seed=1, alternative=alt)
        assert r.permutation.extreme == 0
        assert r.permutation.p_value == pytest.approx(1 / (R + 1), rel=1e-15)  # reference: Hope (1968)
    r = vicino.moran(x, w, permutations=R, seed=1, alternative="less")
    assert r.permutation.extreme == R
    assert r.permutation.p_value == pytest.approx(1.0)  # reference: Hope (1968)


@pytest.mark.parametrize("seed", [0, 17])
def test_alternative_counts_match_numpy_recount(knn60, seed):
    x = _values(60, "normal", seed=11 + seed)
    R = 999
    results = {
        alt: vicino.moran(x, knn60, permutations=R, seed=seed, alternative=alt)
        for alt in ("two-sided", "greater", "less")
    }
    d = results["greater"].permutation.draws
    i = results["greater"].statistic
    ei = -1.0 / (60 - 1)
    counts = {
        "greater": int(np.sum(d >= i)),
        "less": int(np.sum(d <= i)),
        "two-sided": int(np.sum(np.abs(d - ei) >= np.abs(i - ei))),
    }
    for alt, r in results.items():
        assert r.permutation.draws.tobytes() == d.tobytes()
        assert r.permutation.extreme == counts[alt], alt  # numpy recount from draws
        assert r.permutation.p_value == pytest.approx((counts[alt] + 1) / (R + 1), rel=1e-15)  # Hope (1968)
    # the recounts are informative here (not all 0 or all R)
    assert 0 < counts["greater"] < R and 0 < counts["less"] < R


def test_permutations_zero_gives_none(knn60):
    r = vicino.moran(_values(60, "normal"), knn60, permutations=0)
    assert r.permutation is None
    assert len(r.table()) == 2  # normality and randomization only


# ---------------------------------------------------------------- threads
SCRIPT = textwrap.dedent(
    """
    import sys, numpy as np, vicino
    rng = np.random.default_rng(21)
    pts = rng.uniform(0, 1, size=(20_000, 2))
    w = vicino.k_nearest(pts, 8).standardize("row")
    x = pts[:, 0] + rng.normal(size=20_000)
    r = vicino.moran(x, w, permutations=64, seed=2024)
    lag = w.lag(x)
    np.save(sys.argv[1], np.concatenate([[r.statistic], r.permutation.draws, lag]))
    """
)


def test_draws_identical_across_thread_counts(tmp_path):
    script = tmp_path / "run.py"
    script.write_text(SCRIPT)
    out = {}
    for threads in ("1", "2", "4"):
        env = dict(os.environ, RAYON_NUM_THREADS=threads)
        path = tmp_path / f"out{threads}.npy"
        proc = subprocess.run(
            [sys.executable, str(script), str(path)], env=env, capture_output=True, text=True, timeout=300
        )
        assert proc.returncode == 0, proc.stderr
        out[threads] = np.load(path)
    assert out["1"].size == 1 + 64 + 20_000
    assert out["1"].tobytes() == out["2"].tobytes()
    assert out["1"].tobytes() == out["4"].tobytes()
    # and the statistic itself agrees with the Cliff-Ord definition evaluated with scipy
    rng = np.random.default_rng(21)
    pts = rng.uniform(0, 1, size=(20_000, 2))
    x = pts[:, 0] + rng.normal(size=20_000)
    w = vicino.k_nearest(pts, 8).standardize("row").to_scipy()
    z = x - x.mean()
    assert out["1"][0] == pytest.approx(len(x) / w.sum() * (z @ (w @ z)) / (z @ z), rel=1e-10)  # Moran (1950)


def test_moran_without_permutations_matches_the_numpy_formulas_on_asymmetric_weights():
    # reference: Cliff and Ord (1981): I = n/S0 z'Wz/z'z, S1 = 1/2 sum (w_ij + w_ji)^2,
    # S2 = sum (w_i. + w_.i)^2, variance under normality, written with numpy
    rng = np.random.default_rng(11)
    w = vicino.k_nearest(rng.random((500, 2)), 6).standardize("row")
    x = rng.normal(size=500)
    a = w.to_dense()
    n = 500
    z = x - x.mean()
    s0, s1 = a.sum(), 0.5 * ((a + a.T) ** 2).sum()
    s2 = ((a.sum(axis=1) + a.sum(axis=0)) ** 2).sum()
    i = n / s0 * (z @ a @ z) / (z @ z)
    e = -1 / (n - 1)
    var = (n * n * s1 - n * s2 + 3 * s0**2) / ((n * n - 1) * s0**2) - e**2
    r = vicino.moran(x, w, permutations=0)
    assert r.statistic == pytest.approx(i, rel=1e-12)
    assert (r.s0, r.s1, r.s2) == pytest.approx((s0, s1, s2), rel=1e-12)
    assert r.normality.variance == pytest.approx(var, rel=1e-10)
    # with draws the observed value comes from the symmetrized form: equal to rounding
    assert vicino.moran(x, w, permutations=9, seed=1).statistic == pytest.approx(r.statistic, rel=1e-12)
