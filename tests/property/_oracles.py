"""Reference computations for the property tests, independent of vicino.

Each function names its source: scipy.spatial.cKDTree, NumPy brute force,
scipy.sparse, networkx, shapely (GEOS), or a published formula. Where extreme
magnitudes would overflow float64 arithmetic, the references compute in
NumPy's 80-bit extended precision (``np.longdouble``, exponent range about
1e+-4932) or on coordinates scaled exactly by a power of two.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import scipy.sparse as sp
from scipy.spatial import cKDTree

EARTH_RADIUS_KM = 6371.0088  # IUGG mean radius R1 (Moritz 2000, GRS80)
LD = np.longdouble
DBL_MAX = np.finfo(np.float64).max
DBL_TINY = np.finfo(np.float64).tiny  # smallest normal float64


# ---------------------------------------------------------------------------
# distances
# ---------------------------------------------------------------------------
def exact_squared_distances(ints: np.ndarray) -> np.ndarray:
    """All squared distances of integer points, exactly (NumPy int64 brute force)."""
    d = ints[:, None, :].astype(np.int64) - ints[None, :, :].astype(np.int64)
    return (d * d).sum(axis=-1)


def euclidean_distances(xy: np.ndarray) -> np.ndarray:
    """All pairwise distances by NumPy brute force, in a frame scaled exactly by a power of two
    (so squares neither overflow nor underflow), scaled back."""
    top = np.abs(xy).max(initial=0.0)
    e = int(np.frexp(top)[1]) if top > 0 else 0
    local = np.ldexp(xy, -e)
    d = local[:, None, :] - local[None, :, :]
    return np.ldexp(np.sqrt((d * d).sum(axis=-1)), e)


def kdtree_sorted_distances(xy: np.ndarray, k: int) -> np.ndarray:
    """For each point, its k + 1 smallest distances to all points (itself included), from
    scipy.spatial.cKDTree on exactly rescaled coordinates."""
    top = np.abs(xy).max(initial=0.0)
    e = int(np.frexp(top)[1]) if top > 0 else 0
    tree = cKDTree(np.ldexp(xy, -e))
    d, _ = tree.query(np.ldexp(xy, -e), k=k + 1)
    return np.ldexp(np.asarray(d).reshape(len(xy), k + 1), e)


def kdtree_within(xy: np.ndarray, radius: float) -> list[set[int]]:
    """For each point, the others within ``radius`` (scipy.spatial.cKDTree, rescaled)."""
    top = np.abs(xy).max(initial=0.0)
    e = int(np.frexp(top)[1]) if top > 0 else 0
    local = np.ldexp(xy, -e)
    r = float(np.ldexp(radius, -e))
    found = cKDTree(local).query_ball_point(local, r) if np.isfinite(r) else [list(range(len(xy)))] * len(xy)
    return [set(f) - {i} for i, f in enumerate(found)]


def canonical_lonlat(lonlat: np.ndarray) -> np.ndarray:
    """One spelling per place: longitudes >= 180 less 360, and longitude 0 at the poles
    (the convention vicino documents; the places are unchanged)."""
    out = lonlat.astype(np.float64).copy()
    east = out[:, 0] >= 180.0
    out[east, 0] -= 360.0
    out[np.abs(out[:, 1]) == 90.0, 0] = 0.0
    return out


def haversine_km(lonlat: np.ndarray) -> np.ndarray:
    """All pairwise great-circle distances in km, by the haversine formula (Sinnott 1984) on
    the sphere of radius R1 = 6371.0088 km."""
    p = canonical_lonlat(lonlat)
    lam, phi = np.radians(p[:, 0]), np.radians(p[:, 1])
    h = (
        np.sin((phi[:, None] - phi[None, :]) / 2) ** 2
        + np.cos(phi)[:, None] * np.cos(phi)[None, :] * np.sin((lam[:, None] - lam[None, :]) / 2) ** 2
    )
    return 2 * EARTH_RADIUS_KM * np.arcsin(np.sqrt(np.clip(h, 0.0, 1.0)))


def nearest_by_distance_then_position(d: np.ndarray, k: int) -> list[list[int]]:
    """For each row, the k others with the smallest (distance, position), NumPy brute force."""
    n = len(d)
    pos = np.arange(n)
    out = []
    for i in range(n):
        others = pos[pos != i]
        order = np.lexsort((others, d[i, others]))
        out.append(sorted(others[order[:k]].tolist()))
    return out


def duplicate_units(xy: np.ndarray) -> int:
    """How many units share their location with another (NumPy unique over rows; -0.0 == 0.0)."""
    _, inverse, counts = np.unique(xy + 0.0, axis=0, return_inverse=True, return_counts=True)
    return int((counts[inverse.ravel()] > 1).sum())


# ---------------------------------------------------------------------------
# matrices
# ---------------------------------------------------------------------------
def csr_of(w) -> sp.csr_array:
    """Canonical CSR copy of vicino's matrix through scipy (to compare)."""
    m = sp.csr_array(w.to_scipy(), copy=True)
    m.sort_indices()
    return m


def off_diagonal(dense: np.ndarray) -> np.ndarray:
    out = dense.copy()
    np.fill_diagonal(out, 0.0)
    return out


def islands(dense: np.ndarray) -> np.ndarray:
    """Units without a link to another unit (a self-link alone is no neighbour)."""
    return np.flatnonzero((off_diagonal(dense) > 0).sum(axis=1) == 0)


def digraph(dense: np.ndarray) -> nx.DiGraph:
    """The links as a networkx directed graph (self-loops dropped), every unit a node."""
    g = nx.DiGraph()
    g.add_nodes_from(range(len(dense)))
    r, c = np.nonzero(off_diagonal(dense))
    g.add_edges_from(zip(r.tolist(), c.tolist(), strict=True))
    return g


def component_labels(dense: np.ndarray) -> tuple[np.ndarray, list[int]]:
    """Weak components from networkx, labelled as vicino documents: 0 the largest, ties to the
    component holding the lowest position."""
    comps = [sorted(c) for c in nx.weakly_connected_components(digraph(dense))]
    comps.sort(key=lambda c: (-len(c), c[0]))
    labels = np.empty(len(dense), dtype=np.int64)
    for label, members in enumerate(comps):
        labels[members] = label
    return labels, [len(c) for c in comps]


def k_step_links(dense: np.ndarray, k: int, cumulative: bool) -> set[tuple[int, int]]:
    """Pairs (i, j), i != j, whose shortest directed path has exactly k links (1..k when
    cumulative), from networkx single-source shortest path lengths."""
    g = digraph(dense)
    out = set()
    for i in g.nodes:
        for j, d in nx.single_source_shortest_path_length(g, i, cutoff=k).items():
            if j != i and (d == k or (cumulative and 1 <= d <= k)):
                out.add((i, j))
    return out


def link_set(dense: np.ndarray) -> set[tuple[int, int]]:
    r, c = np.nonzero(dense)
    return set(zip(r.tolist(), c.tolist(), strict=True))


def spectral_radius(dense: np.ndarray) -> float:
    """max |eigenvalue| from numpy.linalg.eigvals on the matrix scaled by its largest entry."""
    top = dense.max(initial=0.0)
    if top == 0:
        return 0.0
    e = int(np.frexp(top)[1])
    return float(np.ldexp(np.abs(np.linalg.eigvals(np.ldexp(dense, -e))).max(), e))


def is_acyclic(dense: np.ndarray) -> bool:
    """No directed cycle (self-links count): then the spectral radius of a non-negative matrix
    is 0 (Perron-Frobenius); networkx decides."""
    g = nx.DiGraph()
    g.add_nodes_from(range(len(dense)))
    r, c = np.nonzero(dense)
    g.add_edges_from(zip(r.tolist(), c.tolist(), strict=True))
    return nx.is_directed_acyclic_graph(g)


# ---------------------------------------------------------------------------
# standardizations (NumPy dense formulas in extended precision)
# ---------------------------------------------------------------------------
def standardized(dense: np.ndarray, method: str, rho: float | None = None) -> np.ndarray:
    """The standardized matrix, in np.longdouble, by the textbook formula of each method."""
    w = dense.astype(LD)
    n = len(w)
    linked = w > 0
    if method == "none":
        return w
    if method == "binary":
        return linked.astype(LD)
    if method == "row":
        s = w.sum(axis=1, keepdims=True)
        return np.divide(w, s, out=np.zeros_like(w), where=s > 0)
    if method == "max_entry":
        return w / w.max()
    if method == "global":
        return n * w / w.sum()
    if method == "variance_stabilizing":
        # Tiefelsdorf, Griffith and Boots (1999): rows scaled by their root sum of squares, then sum n
        q = np.sqrt((w * w).sum(axis=1, keepdims=True))
        v = np.divide(w, q, out=np.zeros_like(w), where=q > 0)
        return n * v / v.sum()
    if method == "max_eigenvalue":
        # Kelejian and Prucha (2010): divided by the spectral radius
        return w / LD(rho)
    raise AssertionError(method)


# ---------------------------------------------------------------------------
# spatial lag
# ---------------------------------------------------------------------------
def lag_reference(dense: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(scipy.sparse product W x in float64, the same in np.longdouble, |W| |x| in np.longdouble)."""
    w = sp.csr_array(dense)
    ref = w @ x
    exact = dense.astype(LD) @ x.astype(LD)
    bound = dense.astype(LD) @ np.abs(x).astype(LD)
    return np.asarray(ref), exact, bound


# ---------------------------------------------------------------------------
# Moran's I: Cliff and Ord (1981) moments, dense, in extended precision
# ---------------------------------------------------------------------------
def centred(x: np.ndarray) -> np.ndarray:
    """x minus its mean, in np.longdouble, measured from the first value (exact for values
    close to each other) and corrected twice for the rounding of the mean."""
    z = x.astype(LD) - LD(x[0])
    for _ in range(2):
        z = z - z.mean()
    return z


def moran_reference(x: np.ndarray, dense: np.ndarray) -> dict:
    """Moran's I, E[I], and the variances under normality and randomization (Cliff and Ord
    1981, eqs. 1.35-1.38), with S0, S1, S2 from their definitions."""
    n = len(x)
    w = dense.astype(LD)
    z = centred(x)
    s0 = w.sum()
    s1 = LD(0.5) * ((w + w.T) ** 2).sum()
    s2 = ((w.sum(axis=1) + w.sum(axis=0)) ** 2).sum()
    m2 = (z * z).sum()
    m4 = (z**4).sum()
    stat = n / s0 * (z @ w @ z) / m2
    expected = LD(-1) / (n - 1)
    var_norm = (n * n * s1 - n * s2 + 3 * s0 * s0) / ((n * n - 1) * s0 * s0) - expected**2
    b2 = n * m4 / (m2 * m2)
    var_rand = (
        n * ((n * n - 3 * n + 3) * s1 - n * s2 + 3 * s0 * s0) - b2 * ((n * n - n) * s1 - 2 * n * s2 + 6 * s0 * s0)
    ) / ((n - 1) * (n - 2) * (n - 3) * s0 * s0) - expected**2
    # the size of the terms, for tolerances: sum |w_ij z_i z_j|
    spread = n / s0 * (np.abs(z) @ w @ np.abs(z)) / m2
    return {
        "statistic": stat,
        "expected": expected,
        "normality": var_norm,
        "randomization": var_rand,
        "s0": s0,
        "s1": s1,
        "s2": s2,
        "spread": spread,
        "norm_terms": (n * n * s1 + n * s2 + 3 * s0 * s0) / ((n * n - 1) * s0 * s0) + expected**2,
        "rand_terms": (
            n * ((n * n + 3 * n + 3) * s1 + n * s2 + 3 * s0 * s0) + b2 * ((n * n + n) * s1 + 2 * n * s2 + 6 * s0 * s0)
        )
        / ((n - 1) * (n - 2) * (n - 3) * s0 * s0)
        + expected**2,
    }


def moran_bounds(dense: np.ndarray) -> tuple[float, float]:
    """The range of Moran's I over all arrangements of any values: n / S0 times the extreme
    eigenvalues of M S M, S = (W + W^T) / 2, M = I - 11'/n (de Jong, Sprenger and van Veen 1984),
    from numpy.linalg.eigvalsh on W scaled by its largest entry."""
    n = len(dense)
    top = dense.max()
    w = dense / top
    s = (w + w.T) / 2
    m = np.eye(n) - np.full((n, n), 1.0 / n)
    ev = np.linalg.eigvalsh(m @ s @ m)
    scale = n / w.sum()
    return float(scale * ev.min()), float(scale * ev.max())
