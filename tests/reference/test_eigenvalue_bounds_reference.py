"""Eigenvalue bounds checked against NumPy, ARPACK (through SciPy) and a published formula.

Every expected value is computed here from the raw matrix with
numpy.linalg.eigvals, scipy.sparse.linalg.eigsh / eigs, or a closed form,
never by vicino.
"""

from __future__ import annotations

import math

import networkx as nx
import numpy as np
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla
from scipy.spatial import cKDTree

import vicino


# ---------------------------------------------------------------- matrices
def lattice(rows, cols, *, queen=False):
    """Binary rook (or queen) adjacency of a rows x cols grid."""

    def path(m):
        return sp.diags([np.ones(m - 1), np.ones(m - 1)], [-1, 1], shape=(m, m))

    a = sp.kron(sp.eye(rows), path(cols)) + sp.kron(path(rows), sp.eye(cols))
    if queen:
        a = a + sp.kron(path(rows), path(cols))
    return sp.csr_array(a)


def row_standardized(a):
    a = sp.csr_array(a, dtype=np.float64)
    return sp.csr_array(sp.diags(1.0 / np.asarray(a.sum(axis=1)).ravel()) @ a)


def knn(n, k, seed):
    """Row-standardized k-nearest-neighbour weights of random points (asymmetric)."""
    xy = np.random.default_rng(seed).random((n, 2))
    _, j = cKDTree(xy).query(xy, k + 1)  # reference: scipy.spatial.cKDTree
    a = sp.csr_array((np.full(n * k, 1.0 / k), (np.repeat(np.arange(n), k), j[:, 1:].ravel())), shape=(n, n))
    return a


def weighted_cycle(n, seed):
    w = np.random.default_rng(seed).uniform(0.5, 2.0, n)
    return sp.csr_array((w, (np.arange(n), (np.arange(n) + 1) % n)), shape=(n, n)), w


def ord_rook(rows, cols):
    """Ord (1975), JASA 70(349): binary rook on an r x c lattice has 2 cos(pi i/(r+1)) + 2 cos(pi j/(c+1))."""
    i = np.arange(1, rows + 1)[:, None]
    j = np.arange(1, cols + 1)[None, :]
    ev = 2 * np.cos(np.pi * i / (rows + 1)) + 2 * np.cos(np.pi * j / (cols + 1))
    return ev.min(), ev.max()


def real_ends(dense):
    """Smallest and largest real eigenvalues from numpy.linalg.eigvals."""
    ev = np.linalg.eigvals(dense)
    scale = np.abs(ev).max()
    real = ev.real[np.abs(ev.imag) <= 1e-8 * scale]
    return real.min(), real.max()


# ---------------------------------------------------------------- small: dense, against numpy
@pytest.mark.parametrize(("rows", "cols"), [(9, 13), (1, 12), (15, 20)])
def test_small_rook_lattice_matches_ord_1975(rows, cols):
    b = vicino.from_matrix(lattice(rows, cols)).eigenvalue_bounds()
    lo, hi = ord_rook(rows, cols)
    assert b.lambda_min == pytest.approx(lo, abs=1e-12)  # reference: Ord (1975) closed form
    assert b.lambda_max == pytest.approx(hi, abs=1e-12)  # reference: Ord (1975) closed form
    assert b.min_method.startswith("bipartite")  # a rook lattice is bipartite (a checkerboard)
    assert b.interval == (1 / b.lambda_min, 1 / b.lambda_max)


def test_small_row_standardized_queen_matches_numpy():
    a = row_standardized(lattice(12, 11, queen=True))
    b = vicino.from_matrix(a).eigenvalue_bounds()
    lo, hi = real_ends(a.toarray())
    assert b.lambda_min == pytest.approx(lo, abs=1e-12)  # reference: numpy.linalg.eigvals
    assert b.lambda_max == pytest.approx(hi, abs=1e-12)  # reference: numpy.linalg.eigvals
    assert b.lambda_max == 1.0 and b.max_method == "constant sums"  # common practice: rows sum to 1
    assert b.interval[1] == 1.0


def test_small_k_nearest_asymmetric_matches_numpy():
    a = knn(250, 5, 3)
    b = vicino.from_matrix(a).eigenvalue_bounds()
    lo, hi = real_ends(a.toarray())
    assert b.lambda_min == pytest.approx(lo, abs=1e-10)  # reference: numpy.linalg.eigvals
    assert b.lambda_max == pytest.approx(hi, abs=1e-12)  # reference: numpy.linalg.eigvals
    assert b.min_error < 1e-10


def test_small_random_symmetric_matches_numpy():
    rng = np.random.default_rng(5)
    a = sp.random(120, 120, density=0.05, random_state=rng, data_rvs=lambda k: rng.uniform(0.1, 3.0, k))
    a = sp.csr_array(a + a.T)
    a.setdiag(0)
    a.eliminate_zeros()
    b = vicino.from_matrix(a).eigenvalue_bounds()
    ev = np.linalg.eigvalsh(a.toarray())  # reference: numpy.linalg.eigvalsh
    assert b.lambda_min == pytest.approx(ev.min(), abs=1e-11)
    assert b.lambda_max == pytest.approx(ev.max(), abs=1e-11)


@pytest.mark.parametrize("n", [7, 8, 400, 100_001])
def test_directed_cycles(n):
    a, w = weighted_cycle(n, n)
    b = vicino.from_matrix(a).eigenvalue_bounds()
    # from memory: a weighted directed n-cycle has lambda^n = prod w, so its real
    # eigenvalues are g (and -g for even n), g the geometric mean of the weights
    g = math.exp(np.mean(np.log(w)))
    assert b.lambda_max == pytest.approx(g, rel=1e-12)
    assert b.lambda_min == pytest.approx(-g if n % 2 == 0 else g, rel=1e-12)
    if n <= 400:
        lo, hi = real_ends(a.toarray())
        assert (b.lambda_min, b.lambda_max) == pytest.approx((lo, hi), rel=1e-9)  # reference: numpy.linalg.eigvals
    # odd cycle: no negative real eigenvalue, so nothing bounds rho from below
    assert b.interval[0] == (-math.inf if n % 2 else -1 / g)


def test_islands_add_the_eigenvalue_zero():
    # a directed 3-cycle (real eigenvalue 1 only) beside two islands
    a = sp.csr_array((np.ones(3), ([0, 1, 2], [1, 2, 0])), shape=(5, 5))
    w = vicino.from_matrix(a)
    assert list(w.islands) == [3, 4]
    b = w.eigenvalue_bounds()
    lo, hi = real_ends(a.toarray())
    assert (b.lambda_min, b.lambda_max) == pytest.approx((lo, hi), abs=1e-14)  # reference: numpy.linalg.eigvals
    assert (b.lambda_min, b.lambda_max) == (0.0, 1.0)  # the 3-cycle's closed form and the islands' 0
    assert b.interval == (-math.inf, 1.0)


def test_acyclic_weights_have_only_the_eigenvalue_zero():
    # a directed path of 2,000 units: nilpotent (no cycle), so every eigenvalue is 0;
    # a dense solver would scatter them on a circle of radius eps^(1/n)
    n = 2000
    a = sp.csr_array((np.linspace(1, 2, n - 1), (np.arange(n - 1), np.arange(1, n))), shape=(n, n))
    assert nx.is_directed_acyclic_graph(nx.DiGraph(a))  # reference: networkx; acyclic => nilpotent (from memory)
    b = vicino.from_matrix(a).eigenvalue_bounds()
    assert (b.lambda_min, b.lambda_max) == (0.0, 0.0)
    assert b.interval == (-math.inf, math.inf)


# ---------------------------------------------------------------- large: iterative, against ARPACK
def test_large_rook_lattice_matches_ord_1975_and_eigsh():
    a = lattice(110, 100)
    b = vicino.from_matrix(a).eigenvalue_bounds(tol=1e-10)
    lo, hi = ord_rook(110, 100)
    assert b.lambda_min == pytest.approx(lo, abs=1e-8)  # reference: Ord (1975) closed form
    assert b.lambda_max == pytest.approx(hi, abs=1e-8)  # reference: Ord (1975) closed form
    ref = spla.eigsh(a.astype(float), k=2, which="BE", return_eigenvectors=False, tol=1e-12)
    assert b.lambda_min == pytest.approx(ref.min(), abs=1e-8)  # reference: scipy.sparse.linalg.eigsh (ARPACK)


def test_large_binary_queen_lattice_uses_lanczos_for_both_ends():
    rows, cols = 60, 70
    a = lattice(rows, cols, queen=True)
    b = vicino.from_matrix(a).eigenvalue_bounds(tol=1e-10)
    assert b.min_method == b.max_method == "Lanczos"
    # from memory: queen = (P_r + I) kron (P_c + I) - I, so its eigenvalues are
    # (1 + 2 cos(pi i / (r + 1))) (1 + 2 cos(pi j / (c + 1))) - 1
    u = 1 + 2 * np.cos(np.pi * np.arange(1, rows + 1) / (rows + 1))
    v = 1 + 2 * np.cos(np.pi * np.arange(1, cols + 1) / (cols + 1))
    ev = np.outer(u, v) - 1
    assert b.lambda_min == pytest.approx(ev.min(), abs=1e-7)
    assert b.lambda_max == pytest.approx(ev.max(), abs=1e-7)
    assert abs(b.lambda_max - ev.max()) <= b.max_error + 1e-12  # the bound holds
    ref = spla.eigsh(a.astype(float), k=2, which="BE", return_eigenvectors=False, tol=1e-12)
    assert (b.lambda_min, b.lambda_max) == pytest.approx((ref.min(), ref.max()), abs=1e-7)  # reference: eigsh


def test_large_row_standardized_queen_matches_eigsh_on_symmetric_form():
    a = lattice(90, 95, queen=True)
    w = row_standardized(a)
    b = vicino.from_matrix(w).eigenvalue_bounds()
    d = 1 / np.sqrt(np.asarray(a.sum(axis=1)).ravel())
    sym = sp.csr_array(sp.diags(d) @ a @ sp.diags(d))  # D^-1/2 A D^-1/2, similar to D^-1 A
    ref = spla.eigsh(sym, k=1, which="SA", return_eigenvectors=False, tol=1e-12)[0]
    assert b.lambda_min == pytest.approx(ref, abs=1e-7)  # reference: scipy.sparse.linalg.eigsh (ARPACK)
    assert abs(b.lambda_min - ref) <= b.min_error + 1e-12
    assert (b.lambda_max, b.max_method) == (1.0, "constant sums")


def test_large_k_nearest_matches_eigs():
    a = knn(4000, 6, 11)
    b = vicino.from_matrix(a).eigenvalue_bounds()
    assert b.min_method == "implicitly restarted Arnoldi"
    ev = spla.eigs(a, k=6, which="SR", return_eigenvectors=False, tol=1e-12, maxiter=100_000)
    first = ev[np.argmin(ev.real)]
    assert abs(first.imag) < 1e-10  # the leftmost eigenvalue is real here (scipy check of the setup)
    assert b.lambda_min == pytest.approx(first.real, abs=1e-7)  # reference: scipy.sparse.linalg.eigs (ARPACK)
    assert b.lambda_max == pytest.approx(1.0, abs=1e-15)  # common practice: rows sum to 1
    assert abs(b.lambda_min - first.real) <= b.min_error  # the bound holds


def test_long_cycle_with_chords_matches_numpy():
    # a weighted directed cycle of 600 units with a few chords: one irreducible block (too
    # large for the dense route) with many eigenvalues of nearly the same modulus, where the
    # shifted power iteration stalls and restarted Arnoldi takes over
    n = 600
    a, _ = weighted_cycle(n, 8)
    rng = np.random.default_rng(9)
    src = rng.integers(0, n, 6)
    chords = sp.csr_array((np.full(6, 0.3), (src, (src + n // 2) % n)), shape=(n, n))
    a = sp.csr_array(a + chords)
    ev = np.linalg.eigvals(a.toarray())
    rho = np.abs(ev).max()  # reference: numpy.linalg.eigvals
    # (ARPACK's eigs(which="LR", tol=1e-13) stops at a wrong value here, about 1.1682)
    assert vicino.from_matrix(a).spectral_radius() == pytest.approx(rho, rel=1e-9)


def test_row_standardized_interval_upper_end_is_one():
    a = row_standardized(lattice(30, 31))
    b = vicino.from_matrix(a).eigenvalue_bounds()
    # common practice: a row-standardized bipartite (rook) lattice has eigenvalues in [-1, 1], both attained
    assert b.interval == (-1.0, 1.0)
    ref = spla.eigs(a, k=2, which="LM", return_eigenvectors=False, tol=1e-12)
    assert sorted(ref.real) == pytest.approx([-1.0, 1.0], abs=1e-9)  # reference: scipy.sparse.linalg.eigs


def c3_kron_path(m):
    """C3 kron (path + 2 I): eigenvalues omega^k mu_j, mu_j in (0, 4); the leftmost are complex
    (real part -mu/2), the smallest real one (min mu_j > 0) lies deep inside the spectrum."""
    path = sp.diags([np.ones(m - 1), np.full(m, 2.0), np.ones(m - 1)], [-1, 0, 1], shape=(m, m))
    c3 = sp.csr_array((np.ones(3), ([0, 1, 2], [1, 2, 0])), shape=(3, 3))
    return sp.csr_array(sp.kron(c3, path))


def c3_kron_path_eigenvalues(m):
    """Closed form: the eigenvalues of a Kronecker product are the products of the factors' eigenvalues
    (Horn and Johnson 1991, Topics in Matrix Analysis, Thm 4.2.12); C3 has the cube roots of unity, the
    tridiagonal Toeplitz path + 2 I has 2 + 2 cos(pi j / (m + 1)), j = 1..m (Smith 1985, Numerical
    Solution of Partial Differential Equations, 3rd ed., p. 55)."""
    mu = 2 + 2 * np.cos(np.pi * np.arange(1, m + 1) / (m + 1))
    return np.concatenate([mu * np.exp(2j * np.pi * k / 3) for k in range(3)])


@pytest.mark.parametrize("m", [5, 40])
def test_closed_form_of_c3_kron_path_matches_numpy(m):
    ev = c3_kron_path_eigenvalues(m)
    got = np.linalg.eigvals(c3_kron_path(m).toarray())  # reference: numpy.linalg.eigvals
    gap = np.abs(ev[:, None] - got[None, :])
    assert gap.min(axis=1).max() < 1e-9 and gap.min(axis=0).max() < 1e-9


def test_no_real_eigenvalue_in_reach_is_a_clear_convergence_error():
    # 1,200 units: above the size solved densely when Arnoldi does not settle
    a = c3_kron_path(400)
    ev = c3_kron_path_eigenvalues(400)
    assert abs(ev[np.argmin(ev.real)].imag) > 0.1  # the leftmost eigenvalues are complex
    with pytest.raises(vicino.ConvergenceError, match="inside the spectrum") as err:
        vicino.from_matrix(a).eigenvalue_bounds()
    assert "spectral_radius()" in str(err.value)  # says what to do instead


def test_real_eigenvalue_inside_the_spectrum_of_a_smaller_block_is_found_densely():
    a = c3_kron_path(200)  # 600 units
    ev = c3_kron_path_eigenvalues(200)
    real = ev[np.abs(ev.imag) < 1e-9].real  # the real eigenvalues: those of the path + 2 I (closed form)
    lo, hi = real.min(), real.max()
    b = vicino.from_matrix(a).eigenvalue_bounds()
    assert b.lambda_min == pytest.approx(lo, abs=1e-9)
    assert b.lambda_max == pytest.approx(hi, rel=1e-9)
    assert abs(b.lambda_min - lo) <= b.min_error + 1e-12


@pytest.mark.parametrize("seed", [0, 1, 2])
@pytest.mark.parametrize("row", [False, True])
def test_directed_cycle_with_random_chords_converges(seed, row):
    # a directed cycle of 400 units plus five random chords, binary or row-standardized:
    # hundreds of eigenvalues near the unit circle, complex ones left of the smallest real
    # one, where restarted Arnoldi used to run out of products (seeds 0 and 2 end in
    # the dense fallback, seed 1 in Arnoldi)
    n = 400
    rng = np.random.default_rng(seed)
    src = np.concatenate([np.arange(n), rng.integers(0, n, 5)])
    dst = np.concatenate([(np.arange(n) + 1) % n, rng.integers(0, n, 5)])
    keep = src != dst
    a = sp.csr_array((np.ones(keep.sum()), (src[keep], dst[keep])), shape=(n, n))
    a.data[:] = 1.0  # a chord along the cycle counts once
    if row:
        a = row_standardized(a)
    lo, hi = real_ends(a.toarray())  # reference: numpy.linalg.eigvals
    b = vicino.from_matrix(a).eigenvalue_bounds()
    assert b.lambda_min == pytest.approx(lo, abs=1e-8)
    assert b.lambda_max == pytest.approx(hi, abs=1e-8)
    assert abs(b.lambda_min - lo) <= b.min_error + 1e-10  # the bound holds


# ---------------------------------------------------------------- the result and bad inputs
def test_result_is_frozen_with_table_and_html():
    b = vicino.from_matrix(lattice(5, 6)).eigenvalue_bounds()
    assert isinstance(b, vicino.EigenvalueBounds)
    with pytest.raises(AttributeError):
        b.lambda_min = 0.0  # type: ignore[misc]
    t = b.table()
    assert list(t.index) == ["lambda_min", "lambda_max"]
    assert t.loc["lambda_min", "rho_limit"] == pytest.approx(1 / t.loc["lambda_min", "eigenvalue"], rel=1e-15)
    assert "<table" in b._repr_html_() and "invertible" in b._repr_html_()
    assert "admissible rho" in str(b) and "from_matrix" in str(b)
    lo, hi = ord_rook(5, 6)
    assert (b.lambda_min, b.lambda_max) == pytest.approx((lo, hi), abs=1e-12)  # reference: Ord (1975)


@pytest.mark.parametrize("tol", [0.0, -1e-8, 1.0, float("nan"), 1e-20])
def test_bad_tolerance(tol):
    w = vicino.from_matrix(lattice(3, 3))
    with pytest.raises(vicino.InvalidParameterError, match="tol"):
        w.eigenvalue_bounds(tol=tol)


def test_tolerance_of_wrong_type():
    with pytest.raises(vicino.InvalidParameterTypeError, match="tol"):
        vicino.from_matrix(lattice(3, 3)).eigenvalue_bounds(tol="1e-8")  # type: ignore[arg-type]


def test_weights_without_links():
    w = vicino.from_matrix(sp.csr_array((4, 4)))
    with pytest.raises(vicino.InvalidMatrixError, match="eigenvalue bounds"):
        w.eigenvalue_bounds()


def test_huge_and_tiny_weights_scale_exactly():
    a = lattice(7, 8)
    lo, hi = ord_rook(7, 8)
    for scale in (1e-200, 1e250):
        b = vicino.from_matrix(a * scale).eigenvalue_bounds()
        assert b.lambda_min == pytest.approx(lo * scale, rel=1e-12)  # reference: Ord (1975), scaled
        assert b.lambda_max == pytest.approx(hi * scale, rel=1e-12)
