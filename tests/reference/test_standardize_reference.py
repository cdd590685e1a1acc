"""Standardization and spectral radius checked against SciPy / NumPy.

Every expected value here is computed from the raw matrix with scipy.sparse
or scipy.sparse.linalg, never by vicino.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.sparse as sp
import scipy.sparse.linalg as spla

import vicino
from vicino import Step

METHODS = ("row", "binary", "max_entry", "max_eigenvalue", "global", "variance_stabilizing", "none")


# ---------------------------------------------------------------- helpers
def random_sparse(n, density, seed, *, symmetric):
    """A random non-negative sparse matrix without self-loops or empty rows."""
    rng = np.random.default_rng(seed)
    a = sp.random(n, n, density=density, random_state=rng, format="csr", data_rvs=lambda k: rng.uniform(0.1, 5.0, k))
    # a directed ring guarantees every row has a neighbour
    ring = sp.csr_array((rng.uniform(0.1, 5.0, n), (np.arange(n), (np.arange(n) + 1) % n)), shape=(n, n))
    a = sp.csr_array(a) + ring
    if symmetric:
        a = a + a.T
    a = sp.lil_array(a)
    a.setdiag(0)
    a = sp.csr_array(a)
    a.eliminate_zeros()
    a.sort_indices()
    return a


def rook_lattice(rows, cols):
    """Binary rook adjacency of a rows x cols grid: kron(I, P_c) + kron(P_r, I)."""

    def path(m):
        return sp.diags([np.ones(m - 1), np.ones(m - 1)], [-1, 1], shape=(m, m))

    a = sp.kron(sp.eye(rows), path(cols)) + sp.kron(path(rows), sp.eye(cols))
    return sp.csr_array(a)


def is_symmetric(a):
    return abs(a - a.T).max() == 0 if a.nnz else True


def rho_reference(a) -> float:
    """Spectral radius from ARPACK: eigsh for symmetric, eigs otherwise."""
    a = sp.csr_array(a, dtype=np.float64)
    n = a.shape[0]
    if is_symmetric(a):
        # k=2 so that a periodic spectrum (+rho and -rho) is caught either way
        vals = spla.eigsh(a, k=min(2, n - 1), which="LM", return_eigenvectors=False, tol=1e-14)
    else:
        vals = spla.eigs(a, k=1, which="LM", return_eigenvectors=False, tol=1e-14, maxiter=100_000)
    return float(np.max(np.abs(vals)))


def raw(w: vicino.Weights) -> sp.csr_array:
    """The matrix of w as an independent SciPy copy."""
    return sp.csr_array(w.to_scipy(), copy=True)


# ---------------------------------------------------------------- weights under test
def _points(n, seed):
    return np.random.default_rng(seed).uniform(0, 1, size=(n, 2))


def make_cases():
    cases = {}
    cases["knn"] = (vicino.k_nearest(_points(70, 1), 5), None)
    w = vicino.within_distance(_points(80, 2), 0.3)
    assert len(w.islands) == 0  # setup: this seed gives no islands
    cases["within_distance"] = (w, None)
    a = random_sparse(60, 0.08, 3, symmetric=True)
    cases["matrix_symmetric"] = (vicino.from_matrix(a), a)
    a = random_sparse(60, 0.08, 4, symmetric=False)
    cases["matrix_asymmetric"] = (vicino.from_matrix(a), a)
    return cases


CASES = make_cases()


@pytest.fixture(params=sorted(CASES))
def case(request):
    w, a = CASES[request.param]
    # for matrices we built ourselves the reference is our own SciPy matrix
    return w, (a if a is not None else raw(w))


# ---------------------------------------------------------------- references
def reference(a: sp.csr_array, method: str) -> np.ndarray:
    """Standardized weights computed with scipy/numpy from the raw matrix (zero rows allowed)."""
    a = sp.csr_array(a, dtype=np.float64)
    n = a.shape[0]
    rs = np.asarray(a.sum(axis=1)).ravel()
    if method == "row":
        # common practice: D^-1 W, D = diag(row sums); empty rows stay 0
        inv = np.divide(1.0, rs, out=np.zeros(n), where=rs > 0)
        return (sp.diags(inv) @ a).toarray()
    if method == "binary":
        return (a != 0).astype(np.float64).toarray()
    if method == "max_entry":
        return (a / a.max()).toarray()
    if method == "global":
        return (a * (n / a.sum())).toarray()
    if method == "variance_stabilizing":
        # reference: Tiefelsdorf, Griffith and Boots (1999), Environment and Planning A 31,
        # variance-stabilizing coding: w_ij / q_i, q_i = sqrt(sum_j w_ij^2), scaled to sum n
        q = np.sqrt(np.asarray(a.multiply(a).sum(axis=1)).ravel())
        inv = np.divide(1.0, q, out=np.zeros(n), where=q > 0)
        b = sp.diags(inv) @ a
        return (b * (n / b.sum())).toarray()
    if method == "max_eigenvalue":
        return (a / rho_reference(a)).toarray()
    if method == "none":
        return a.toarray()
    raise AssertionError(method)


# ---------------------------------------------------------------- tests
@pytest.mark.parametrize("method", METHODS)
def test_standardize_matches_scipy(case, method):
    w, a = case
    got = w.standardize(method)
    # the sparsity pattern never changes
    np.testing.assert_array_equal(got.to_scipy().indptr, raw(w).indptr)
    np.testing.assert_array_equal(got.to_scipy().indices, raw(w).indices)
    rtol = 1e-8 if method == "max_eigenvalue" else 1e-13
    # reference: scipy.sparse products on the raw matrix (see reference())
    np.testing.assert_allclose(got.to_dense(), reference(a, method), rtol=rtol, atol=1e-15)


def test_row_sums_are_one(case):
    w, _ = case
    rs = np.asarray(w.standardize("row").to_scipy().sum(axis=1)).ravel()
    np.testing.assert_allclose(rs, 1.0, rtol=1e-14)  # common practice: row-standardized rows sum to 1


def test_binary_is_all_ones(case):
    w, a = case
    d = w.standardize("binary").to_scipy().data
    assert d.size == a.nnz  # scipy nnz of the raw matrix
    assert np.all(d == 1.0)  # common practice: binary coding


def test_max_entry_max_is_one(case):
    w, a = case
    got = w.standardize("max_entry").to_scipy()
    assert got.max() == pytest.approx(1.0, rel=1e-15)  # common practice: W / max W
    np.testing.assert_allclose(got.toarray(), a.toarray() / a.max(), rtol=1e-14)  # numpy reference


def test_global_sums_to_n(case):
    w, _ = case
    total = w.standardize("global").to_scipy().sum()
    assert total == pytest.approx(w.n, rel=1e-12)  # common practice: global coding, weights sum to n


def test_variance_stabilizing_sums_to_n_and_rows_have_equal_norm(case):
    w, _ = case
    got = w.standardize("variance_stabilizing").to_scipy()
    assert got.sum() == pytest.approx(w.n, rel=1e-12)  # reference: Tiefelsdorf, Griffith and Boots (1999)
    # after w_ij / q_i every row has unit Euclidean norm; the global scaling keeps norms equal
    norms = np.sqrt(np.asarray(got.multiply(got).sum(axis=1)).ravel())
    np.testing.assert_allclose(norms, norms[0], rtol=1e-12)  # reference: Tiefelsdorf, Griffith and Boots (1999)


def test_max_eigenvalue_gives_unit_spectral_radius(case):
    w, _ = case
    got = w.standardize("max_eigenvalue")
    assert rho_reference(got.to_scipy()) == pytest.approx(1.0, rel=1e-8)  # scipy.sparse.linalg eigs/eigsh


# ---------------------------------------------------------------- spectral radius
@pytest.mark.parametrize("method", ["none", "row", "global", "variance_stabilizing", "max_entry"])
def test_spectral_radius_matches_arpack(case, method):
    w, _ = case
    s = w.standardize(method)
    # reference: scipy.sparse.linalg.eigs (asymmetric) / eigsh (symmetric)
    assert s.spectral_radius() == pytest.approx(rho_reference(s.to_scipy()), rel=1e-8)


def test_spectral_radius_matches_dense_numpy(case):
    w, _ = case
    vs = w.standardize("variance_stabilizing")
    dense = np.max(np.abs(np.linalg.eigvals(vs.to_dense())))
    assert vs.spectral_radius() == pytest.approx(dense, rel=1e-8)  # reference: numpy.linalg.eigvals


def test_row_standardized_largest_eigenvalue_is_one(case):
    w, _ = case
    r = w.standardize("row")
    assert r.spectral_radius() == pytest.approx(1.0, rel=1e-12)  # common practice: row-stochastic => rho = 1
    assert rho_reference(r.to_scipy()) == pytest.approx(1.0, rel=1e-8)  # scipy eigs agrees


@pytest.mark.parametrize("shape", [(6, 7), (5, 5), (10, 3)])
def test_spectral_radius_bipartite_rook_lattice(shape):
    a = rook_lattice(*shape)
    ev = np.linalg.eigvalsh(a.toarray())
    # setup check: a bipartite graph has a spectrum symmetric about 0 (eigenvalues +-rho)
    np.testing.assert_allclose(np.sort(ev), np.sort(-ev), atol=1e-10)  # common practice (bipartite graphs)
    w = vicino.from_matrix(a)
    rho = w.spectral_radius()
    assert rho == pytest.approx(rho_reference(a), rel=1e-8)  # scipy.sparse.linalg.eigsh
    r, c = shape
    # from memory: path P_m has eigenvalues 2 cos(pi k/(m+1)); a Cartesian product adds them
    assert rho == pytest.approx(2 * np.cos(np.pi / (r + 1)) + 2 * np.cos(np.pi / (c + 1)), rel=1e-10)
    s = w.standardize("max_eigenvalue").to_scipy()
    np.testing.assert_allclose(s.toarray(), a.toarray() / rho_reference(a), rtol=1e-8)  # eigsh reference


def test_spectral_radius_bipartite_asymmetric_weights():
    # rook lattice pattern (bipartite, periodic) with asymmetric positive weights
    a = rook_lattice(6, 8)
    rng = np.random.default_rng(11)
    a = sp.csr_array((rng.uniform(0.5, 2.0, a.nnz), a.indices, a.indptr), shape=a.shape)
    assert not is_symmetric(a)
    ev = np.linalg.eigvals(a.toarray())
    rho = np.max(np.abs(ev))
    # setup check: -rho is an eigenvalue too (periodic spectrum)
    assert np.min(np.abs(ev + rho)) < 1e-8 * rho  # common practice (bipartite graphs)
    w = vicino.from_matrix(a)
    assert w.spectral_radius() == pytest.approx(rho_reference(a), rel=1e-8)  # scipy.sparse.linalg.eigs
    assert w.spectral_radius() == pytest.approx(rho, rel=1e-8)  # numpy.linalg.eigvals


def test_spectral_radius_disconnected_symmetric():
    # a path of 5 and a complete graph on 4 (rho = 3): the radius is the max over components
    path = rook_lattice(1, 5)
    k4 = sp.csr_array(np.ones((4, 4)) - np.eye(4))
    a = sp.csr_array(sp.block_diag([path, k4, path]))
    w = vicino.from_matrix(a)
    assert w.spectral_radius() == pytest.approx(rho_reference(a), rel=1e-8)  # scipy.sparse.linalg.eigsh
    assert w.spectral_radius() == pytest.approx(3.0, rel=1e-10)  # common practice: complete graph K_m has rho = m - 1


def test_spectral_radius_disconnected_asymmetric():
    b1 = random_sparse(20, 0.2, 21, symmetric=False)
    b2 = random_sparse(30, 0.1, 22, symmetric=False) * 0.5
    a = sp.csr_array(sp.block_diag([b1, b2]))
    w = vicino.from_matrix(a)
    dense = np.max(np.abs(np.linalg.eigvals(a.toarray())))
    assert w.spectral_radius() == pytest.approx(rho_reference(a), rel=1e-8)  # scipy.sparse.linalg.eigs
    assert w.spectral_radius() == pytest.approx(dense, rel=1e-8)  # numpy.linalg.eigvals


def test_spectral_radius_with_island_row():
    a = sp.lil_array(random_sparse(40, 0.1, 31, symmetric=True))
    a[7, :] = 0
    a[:, 7] = 0
    a = sp.csr_array(a)
    a.eliminate_zeros()
    w = vicino.from_matrix(a)
    assert list(w.islands) == [7]
    assert w.spectral_radius() == pytest.approx(rho_reference(a), rel=1e-8)  # scipy.sparse.linalg.eigsh


# ---------------------------------------------------------------- islands
def island_matrix():
    a = sp.lil_array(random_sparse(30, 0.15, 41, symmetric=False))
    a[4, :] = 0  # row 4: no neighbours
    a[19, :] = 0
    a = sp.csr_array(a)
    a.eliminate_zeros()
    ids = [f"u{i}" for i in range(30)]
    return a, ids


@pytest.mark.parametrize("method", ["row", "variance_stabilizing"])
def test_islands_raise_by_default(method):
    a, ids = island_matrix()
    w = vicino.from_matrix(a, ids=ids)
    assert list(w.islands) == ["u4", "u19"]
    with pytest.raises(vicino.IslandError) as info:
        w.standardize(method)
    assert isinstance(info.value, ValueError)
    assert "u4" in str(info.value)
    assert info.value.ids[:2] == ["u4", "u19"]


@pytest.mark.parametrize("method", ["binary", "max_entry", "max_eigenvalue", "global", "none"])
def test_islands_need_no_decision_without_row_sums(method):
    # these methods scale every weight alike (or set it to 1): an island's empty row stays empty
    a, ids = island_matrix()
    w = vicino.from_matrix(a, ids=ids)
    got = w.standardize(method)
    dense = got.to_dense()
    assert np.all(dense[[4, 19], :] == 0)
    rtol = 1e-8 if method == "max_eigenvalue" else 1e-13
    np.testing.assert_allclose(dense, reference(a, method), rtol=rtol, atol=1e-15)  # scipy.sparse reference
    assert got.recipe[-1] == Step("standardize", {"method": method})
    # islands="keep" gives the same weights
    np.testing.assert_array_equal(w.standardize(method, islands="keep").to_dense(), dense)


def test_binary_standardize_of_weights_with_islands():
    # standardize("binary") needs no row sums: islands keep their empty rows, every link weighs 1
    xy = np.array([[0.0, 0.0], [0.5, 0.0], [1.0, 0.0], [10.0, 10.0], [20.0, 0.0]])
    w = vicino.within_distance(xy, 0.6)
    assert list(w.islands) == [3, 4]
    b = w.standardize("binary")
    d = np.sqrt(((xy[:, None] - xy[None]) ** 2).sum(-1))
    expected = ((d <= 0.6) & (d > 0)).astype(float)  # reference: numpy brute force distances
    np.testing.assert_array_equal(b.to_dense(), expected)


@pytest.mark.parametrize("method", METHODS)
def test_islands_keep_leaves_zero_rows(method):
    a, ids = island_matrix()
    w = vicino.from_matrix(a, ids=ids)
    got = w.standardize(method, islands="keep")
    dense = got.to_dense()
    assert np.all(dense[[4, 19], :] == 0)
    rtol = 1e-8 if method == "max_eigenvalue" else 1e-13
    # reference: scipy.sparse products on the raw matrix, empty rows stay empty
    np.testing.assert_allclose(dense, reference(a, method), rtol=rtol, atol=1e-15)
    assert list(got.islands) == ["u4", "u19"]
    assert got.recipe[-1] == Step("standardize", {"method": method, "islands": "keep"})


def test_row_keep_islands_other_rows_sum_to_one():
    a, ids = island_matrix()
    rs = np.asarray(vicino.from_matrix(a, ids=ids).standardize("row", islands="keep").to_scipy().sum(axis=1)).ravel()
    expected = np.ones(30)
    expected[[4, 19]] = 0
    np.testing.assert_allclose(rs, expected, rtol=1e-14)  # common practice: rows sum to 1, islands to 0


# ---------------------------------------------------------------- recipe
def test_each_step_is_appended_to_recipe():
    w = vicino.k_nearest(_points(30, 5), 4)
    first = w.recipe
    assert first == (Step("k_nearest", {"k": 4, "metric": "euclidean"}),)
    r = w.standardize("row")
    assert r.recipe == first + (Step("standardize", {"method": "row"}),)
    rr = r.standardize("max_eigenvalue")
    assert rr.recipe == first + (
        Step("standardize", {"method": "row"}),
        Step("standardize", {"method": "max_eigenvalue"}),
    )
    assert w.recipe == first  # the original is unchanged (immutable)
    # the chained result is the composition computed with scipy
    ref = reference(sp.csr_array(reference(raw(w), "row")), "max_eigenvalue")
    np.testing.assert_allclose(rr.to_dense(), ref, rtol=1e-8)  # scipy reference


def test_unknown_method_raises():
    w = vicino.k_nearest(_points(10, 6), 2)
    with pytest.raises(vicino.VicinoError, match="standardization"):
        w.standardize("rows")
    with pytest.raises(ValueError, match="islands"):
        w.standardize("row", islands="drop")


# ---------------------------------------------------------------- periodic asymmetric spectrum (period n)
def weighted_directed_cycle(n, seed):
    rng = np.random.default_rng(seed)
    w = rng.uniform(0.5, 2.0, n)
    return sp.csr_array((w, (np.arange(n), (np.arange(n) + 1) % n)), shape=(n, n)), w


def test_spectral_radius_short_weighted_directed_cycle():
    a, w = weighted_directed_cycle(50, 51)
    # from memory: a weighted directed n-cycle has lambda^n = prod w, so rho = geometric mean of w
    rho = np.exp(np.mean(np.log(w)))
    assert np.max(np.abs(np.linalg.eigvals(a.toarray()))) == pytest.approx(rho, rel=1e-10)  # numpy check of setup
    assert vicino.from_matrix(a).spectral_radius() == pytest.approx(rho, rel=1e-8)


def test_spectral_radius_long_weighted_directed_cycle():
    # once a known failure (the shifted power iteration oscillated); a simple cycle now has its closed form
    a, w = weighted_directed_cycle(200, 52)
    rho = np.exp(np.mean(np.log(w)))  # from memory: lambda^n = prod w for a weighted directed n-cycle
    assert np.max(np.abs(np.linalg.eigvals(a.toarray()))) == pytest.approx(rho, rel=1e-10)  # numpy.linalg.eigvals
    assert vicino.from_matrix(a).spectral_radius() == pytest.approx(rho, rel=1e-8)
