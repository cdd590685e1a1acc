"""The weights graph API of vicino checked against references outside the project.

Covered: audit facts (components, islands, zero columns, symmetry,
self-links, density), k-step neighbours (``order``), ``symmetrize``, the
set operations ``|``, ``&``, ``-``, unit selection (``subset``, ``drop``,
``drop_islands``, ``align``) and the repairs ``connect_islands`` and
``connect_components``.

References used here:
* networkx: ``connected_components`` (undirected), ``weakly_connected_components``
  (directed) and ``single_source_shortest_path_length`` (breadth-first
  shortest paths, following edge direction in a DiGraph);
* scipy.sparse: transposes, ``maximum`` / ``minimum``, matrix products,
  fancy indexing ``W[idx][:, idx]``;
* NumPy brute force over all pairs for nearest units and closest pairs
  (ties by lower position, as documented in rust/vicino-core/src/repair.rs);
* shapely 2 (GEOS): Voronoi tessellations, ``STRtree.query(predicate=
  "intersects")`` for queen contacts, boundary intersection lengths and
  area-weighted ``centroid``;
* the haversine formula (Sinnott 1984) on the IUGG mean sphere
  R1 = 6371.0088 km (Moritz 2000);
* hand calculations on small, hand-built maps.
"""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp
import shapely
from _shapes import shapely_queen, voronoi
from shapely import box

import vicino
from oracles import brute_euclidean, brute_haversine

R1_KM = 6371.0088  # IUGG mean Earth radius R1 (Moritz 2000, GRS80)


# ---------------------------------------------------------------------------
# helpers: data and independent references
# ---------------------------------------------------------------------------
def random_matrix(
    n: int, p: float, seed: int, *, isolated: int = 0, sinks: int = 0, self_loops: int = 0, symmetric: bool = False
) -> sp.csr_array:
    """A seeded random weighted matrix (NumPy): links with probability p and weights in [0.5, 3),
    ``isolated`` units without links in or out, ``sinks`` units without outgoing links (empty
    rows, in-links kept), and ``self_loops`` units linked to themselves."""
    rng = np.random.default_rng(seed)
    a = (rng.random((n, n)) < p) * rng.uniform(0.5, 3.0, (n, n))
    np.fill_diagonal(a, 0.0)
    if symmetric:
        a = np.triu(a) + np.triu(a).T
    pos = rng.permutation(n)
    gone = pos[:isolated]
    a[gone, :] = 0.0
    a[:, gone] = 0.0
    a[pos[isolated : isolated + sinks], :] = 0.0
    loops = pos[isolated + sinks : isolated + sinks + self_loops]
    a[loops, loops] = rng.uniform(0.5, 3.0, len(loops))
    return sp.csr_array(a)


def str_ids(n: int) -> list[str]:
    # ids whose sorted order differs from their positions, to catch id/position mix-ups
    return [f"u{(7 * i) % n:03d}x{i}" for i in range(n)]


def pairs_of(m) -> set[tuple[int, int]]:
    """Ordered (row, column) positions of the stored non-zeros of a scipy matrix."""
    c = sp.coo_array(m)
    c.eliminate_zeros()
    return set(zip(c.row.tolist(), c.col.tolist()))


def vicino_pairs(w: vicino.Weights) -> set[tuple[int, int]]:
    return pairs_of(w.to_scipy())


def nx_graph(m, directed: bool):
    """networkx graph of a scipy matrix, all n nodes present."""
    return nx.from_scipy_sparse_array(sp.csr_array(m), create_using=nx.DiGraph if directed else nx.Graph)


def expected_labels(partition, n: int) -> np.ndarray:
    """Labels from a partition: 0 for the largest part, ties to the part holding the lowest position."""
    parts = sorted((sorted(c) for c in partition), key=lambda c: (-len(c), c[0]))
    labels = np.full(n, -1)
    for label, c in enumerate(parts):
        labels[c] = label
    return labels


def assert_components_match(w: vicino.Weights, partition) -> None:
    """The audit's components against a reference partition of positions."""
    comps = w.audit().components
    labels = comps.labels
    assert labels.index.equals(w.ids)  # reference: the weights' ids, in order
    lab = labels.to_numpy()
    got = {frozenset(np.flatnonzero(lab == c).tolist()) for c in range(comps.count)}
    ref = {frozenset(c) for c in partition}
    assert got == ref  # reference: networkx components (as sets of frozensets)
    assert comps.count == len(ref)  # reference: networkx components
    np.testing.assert_array_equal(comps.sizes, sorted((len(c) for c in ref), reverse=True))  # reference: networkx
    # label 0 = largest, ties to the component holding the earliest unit
    np.testing.assert_array_equal(
        lab, expected_labels(ref, w.n)
    )  # reference: networkx partition, sorted by (-size, first position)


def graph_of_pairs(n: int, pairs, directed: bool = False):
    g = nx.DiGraph() if directed else nx.Graph()
    g.add_nodes_from(range(n))
    g.add_edges_from(pairs)
    return g


def positions(w: vicino.Weights):
    """Row and column positions of every link of w, in to_edges order, and the edge table."""
    e = w.to_edges()
    pos = pd.Series(np.arange(w.n), index=w.ids)
    return pos[e["source"]].to_numpy(), pos[e["target"]].to_numpy(), e


def brute_nearest(d: np.ndarray, i: int, k: int) -> list[int]:
    """The k units nearest to i (itself excluded) by (distance, position)."""
    others = np.array([j for j in range(d.shape[0]) if j != i])
    order = np.lexsort((others, d[i, others]))  # primary: distance, secondary: position
    return others[order[:k]].tolist()


def brute_island_links(m, d: np.ndarray, k: int, both: bool) -> set[tuple[int, int]]:
    """Links from each empty row of m to its k nearest units (and back when both)."""
    islands = np.flatnonzero(np.diff(sp.csr_array(m).indptr) == 0)
    out = set()
    for i in islands.tolist():
        for j in brute_nearest(d, i, k):
            out.add((i, j))
            if both:
                out.add((j, i))
    return out


def brute_component_links(partition, n: int, d: np.ndarray, both: bool) -> set[tuple[int, int]]:
    """For each smaller part, the closest pair (i in it, j in the largest) by (distance, i, j)."""
    labels = expected_labels(partition, n)
    largest = np.flatnonzero(labels == 0)
    out = set()
    for c in range(1, labels.max() + 1):
        members = np.flatnonzero(labels == c)
        ii, jj = np.meshgrid(members, largest, indexing="ij")
        ii, jj = ii.ravel(), jj.ravel()
        best = np.lexsort((jj, ii, d[ii, jj]))[0]  # primary: distance, then i, then j
        out.add((int(ii[best]), int(jj[best])))
        if both:
            out.add((int(jj[best]), int(ii[best])))
    return out


def is_symmetric(m) -> bool:
    diff = sp.csr_array(m - m.T)
    diff.eliminate_zeros()
    return diff.nnz == 0


# ---------------------------------------------------------------------------
# 1. connected components
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "n,p,seed,isolated", [(60, 0.02, 1, 5), (120, 0.012, 2, 10), (200, 0.006, 3, 20), (40, 0.0, 4, 0)]
)
def test_components_undirected_match_networkx(n, p, seed, isolated):
    m = random_matrix(n, p, seed, isolated=isolated, symmetric=True)
    w = vicino.from_matrix(m, ids=str_ids(n))
    ref = list(nx.connected_components(nx_graph(m, directed=False)))  # reference: networkx.connected_components
    assert len(ref) > 3  # the graph really falls apart (the test is meaningful)
    assert_components_match(w, ref)


@pytest.mark.parametrize(
    "n,p,seed,isolated,sinks", [(60, 0.015, 5, 4, 6), (150, 0.008, 6, 10, 15), (200, 0.005, 7, 5, 30)]
)
def test_components_directed_are_weak_components(n, p, seed, isolated, sinks):
    m = random_matrix(n, p, seed, isolated=isolated, sinks=sinks, self_loops=3)
    assert not is_symmetric(m)
    w = vicino.from_matrix(m, ids=str_ids(n))
    g = nx_graph(m, directed=True)
    ref = list(nx.weakly_connected_components(g))  # reference: networkx.weakly_connected_components
    # weak components differ from strong ones here (direction is really ignored)
    assert len(ref) < nx.number_strongly_connected_components(g)  # reference: networkx
    assert_components_match(w, ref)


@pytest.mark.parametrize("seed", [31, 32])
def test_components_of_broken_voronoi_tessellation(seed):
    cells = voronoi(300, seed)
    c = shapely.get_coordinates(shapely.centroid(cells))
    # remove a cross-shaped band of cells: the map falls into (at least) four quadrants
    band = (np.abs(c[:, 0] - 0.5) < 0.06) | (np.abs(c[:, 1] - 0.5) < 0.06)
    # and isolate the cell nearest to (0.8, 0.8) by removing all its queen neighbours
    lonely = int(np.argmin(((c - 0.8) ** 2).sum(1)))
    full = shapely_queen(cells)  # reference: shapely STRtree intersects
    around = {j for i, j in full if i == lonely}
    removed = np.flatnonzero(band | np.isin(np.arange(300), list(around)))
    kept = np.setdiff1d(np.arange(300), removed)

    sub = cells[kept]
    ref = list(
        nx.connected_components(graph_of_pairs(len(kept), shapely_queen(sub)))
    )  # reference: networkx on shapely contacts
    assert len(ref) >= 5
    assert_components_match(vicino.contiguity(sub, "queen"), ref)
    # the same from the full map with the cells dropped (ids are the original positions)
    dropped = vicino.contiguity(cells, "queen").drop(removed.tolist())
    assert dropped.ids.tolist() == kept.tolist()  # reference: numpy.setdiff1d (kept in order)
    assert_components_match(dropped, ref)
    new_pos = int(np.flatnonzero(kept == lonely)[0])
    assert dropped.audit().islands.tolist() == [lonely]  # reference: shapely contacts (all its neighbours removed)
    assert {new_pos} in [set(r) for r in ref]  # reference: networkx (an island is a component of one)


# ---------------------------------------------------------------------------
# 2. k-step neighbours
# ---------------------------------------------------------------------------
def reference_order(g, n: int, k: int, cumulative: bool) -> set[tuple[int, int]]:
    out = set()
    for i in range(n):
        lengths = nx.single_source_shortest_path_length(g, i, cutoff=k)  # reference: networkx BFS
        for j, dist in lengths.items():
            if j != i and (dist == k or (cumulative and 1 <= dist <= k)):
                out.add((i, j))
    return out


def scipy_exact_orders(m, kmax: int) -> list[set[tuple[int, int]]]:
    """exact_k = pattern(B + ... + B^k) minus pattern(B + ... + B^(k-1)) minus the diagonal,
    B the binary adjacency without self-links (scipy products)."""
    b = sp.csr_array(m, copy=True)
    b.setdiag(0)
    b.eliminate_zeros()
    b.data[:] = 1.0
    n = b.shape[0]
    diag = {(i, i) for i in range(n)}
    power, reach, out = sp.identity(n, format="csr"), set(), []
    for _ in range(kmax):
        power = sp.csr_array(power @ b)
        now = pairs_of(power) - diag
        out.append(now - reach)
        reach |= now
    return out


@pytest.mark.parametrize("directed", [False, True])
@pytest.mark.parametrize("n,p,seed", [(80, 0.03, 11), (150, 0.015, 12)])
def test_order_matches_networkx_shortest_paths(directed, n, p, seed):
    m = random_matrix(n, p, seed, isolated=3, sinks=4 if directed else 0, self_loops=4, symmetric=not directed)
    w = vicino.from_matrix(m, ids=str_ids(n))
    g = nx_graph(m, directed=directed)
    by_scipy = scipy_exact_orders(m, 3)
    for k in (1, 2, 3):
        exact = w.order(k)
        cum = w.order(k, cumulative=True)
        ref_exact = reference_order(g, n, k, cumulative=False)
        assert len(ref_exact) > 0
        assert vicino_pairs(exact) == ref_exact  # reference: networkx.single_source_shortest_path_length (== k)
        assert vicino_pairs(cum) == reference_order(g, n, k, cumulative=True)  # reference: networkx (1..k)
        assert vicino_pairs(exact) == by_scipy[k - 1]  # reference: scipy powers of the binary adjacency
        for o in (exact, cum):
            assert (o.to_scipy().data == 1.0).all()  # common practice: k-step neighbour weights are binary
            assert o.audit().self_links == 0  # reference: networkx (a unit is at distance 0 of itself)
            assert o.ids.equals(w.ids)  # reference: the input ids (unchanged)
    # order(1) is the binary form of the input less its self-links
    b = sp.lil_array(m)
    b.setdiag(0)
    assert vicino_pairs(w.order(1)) == pairs_of(b)  # reference: scipy pattern of W without diagonal
    assert m.diagonal().astype(bool).sum() == 4  # the input really had self-links


def test_order_two_is_reach_two_minus_reach_one_on_undirected():
    m = random_matrix(100, 0.04, 13, isolated=2, symmetric=True)
    w = vicino.from_matrix(m)
    b = sp.csr_array(m)
    b.data[:] = 1.0
    n = m.shape[0]
    reach2 = pairs_of(b @ b)  # reference: scipy product, walks of length 2
    exact2 = reach2 - pairs_of(b) - {(i, i) for i in range(n)}
    assert vicino_pairs(w.order(2)) == exact2  # reference: scipy (B@B) pattern minus B pattern minus diagonal
    assert vicino_pairs(w.order(2, cumulative=True)) == (reach2 | pairs_of(b)) - {
        (i, i) for i in range(n)
    }  # reference: scipy


@pytest.mark.parametrize("seed", [41, 42])
def test_order_on_voronoi_contiguity_matches_networkx(seed):
    cells = voronoi(150, seed)
    w = vicino.contiguity(cells, "queen")
    g = graph_of_pairs(150, shapely_queen(cells))  # reference: shapely STRtree intersects
    for k in (1, 2, 3):
        assert vicino_pairs(w.order(k)) == reference_order(g, 150, k, cumulative=False)  # reference: networkx BFS
        assert vicino_pairs(w.order(k, cumulative=True)) == reference_order(
            g, 150, k, cumulative=True
        )  # reference: networkx BFS


def test_order_on_a_path_by_hand():
    # the path a - b - c - d - e (both ways): by hand, c is exactly 2 steps from a and e
    m = sp.diags_array([np.ones(4), np.ones(4)], offsets=[-1, 1], shape=(5, 5))
    w = vicino.from_matrix(m, ids=list("abcde"))
    o2 = w.order(2)
    assert o2.neighbors_of("c").index.tolist() == ["a", "e"]  # hand calculation
    assert o2.neighbors_of("a").index.tolist() == ["c"]  # hand calculation
    assert w.order(4).neighbors_of("a").index.tolist() == ["e"]  # hand calculation
    assert w.order(5).nnz == 0  # hand calculation: no path is longer than 4 links
    assert sorted(w.order(2, cumulative=True).neighbors_of("c").index) == list("abde")  # hand calculation
    # directed cycle a -> b -> c -> a: c is 2 steps from a along the links, a is 1 step from c
    cyc = vicino.from_matrix(sp.csr_array(([1.0, 1.0, 1.0], ([0, 1, 2], [1, 2, 0])), shape=(3, 3)), ids=list("abc"))
    assert cyc.order(2).neighbors_of("a").index.tolist() == ["c"]  # hand calculation
    assert cyc.order(3).nnz == 0  # hand calculation: the unit itself is at 3 steps but never counts


# ---------------------------------------------------------------------------
# 3. symmetrize
# ---------------------------------------------------------------------------
def asymmetric_weighted(n: int, seed: int) -> sp.csr_array:
    """Random weights with one-way links and two-way links of different weights."""
    rng = np.random.default_rng(seed)
    a = random_matrix(n, 0.05, seed, isolated=2).toarray()
    i, j = np.nonzero(a)
    back = rng.random(len(i)) < 0.4  # some links get a reverse link with another weight
    a[j[back], i[back]] = rng.uniform(0.5, 3.0, back.sum())
    np.fill_diagonal(a, 0.0)
    return sp.csr_array(a)


@pytest.mark.parametrize("seed", [51, 52, 53])
def test_symmetrize_matches_scipy_elementwise(seed):
    m = asymmetric_weighted(90, seed)
    dense = m.toarray()
    assert ((dense > 0) & (dense.T > 0) & (dense != dense.T)).any()  # two-way links of unequal weight exist
    assert ((dense > 0) & (dense.T == 0)).any()  # one-way links exist
    w = vicino.from_matrix(m, ids=str_ids(90))
    refs = {
        "union": m.maximum(m.T),  # reference: scipy elementwise maximum of W and W.T
        "intersection": m.minimum(m.T),  # reference: scipy elementwise minimum of W and W.T
        "mean": (m + m.T) / 2,  # reference: scipy (W + W.T) / 2
    }
    for how, ref in refs.items():
        s = w.symmetrize(how)
        got = s.to_scipy()
        assert is_symmetric(got)  # reference: scipy, S - S.T has no non-zeros
        assert s.audit().symmetric and s.audit().max_asymmetry is None  # reference: scipy (S == S.T)
        np.testing.assert_allclose(got.toarray(), sp.csr_array(ref).toarray(), rtol=1e-15, atol=0)  # reference: scipy
        assert vicino_pairs(s) == pairs_of(ref)  # reference: scipy non-zero pattern (no stored zeros)
        assert s.ids.equals(w.ids)  # reference: the input ids (unchanged)
    # intersection drops the one-way links, union makes them two-way
    one_way = {(i, j) for i, j in pairs_of(m) if dense[j, i] == 0}
    assert not (vicino_pairs(w.symmetrize("intersection")) & one_way)  # reference: scipy minimum is 0 there
    assert one_way <= vicino_pairs(w.symmetrize("union"))  # reference: scipy maximum is > 0 there


def test_symmetrize_by_hand():
    # W = [[0, 2, 0], [0, 0, 0], [1, 3, 0]]; by hand mean = [[0, 1, .5], [1, 0, 1.5], [.5, 1.5, 0]]
    w = vicino.from_matrix(np.array([[0, 2, 0], [0, 0, 0], [1, 3, 0]], dtype=float))
    np.testing.assert_array_equal(
        w.symmetrize("mean").to_dense(), [[0, 1, 0.5], [1, 0, 1.5], [0.5, 1.5, 0]]
    )  # hand calculation
    np.testing.assert_array_equal(
        w.symmetrize("union").to_dense(), [[0, 2, 1], [2, 0, 3], [1, 3, 0]]
    )  # hand calculation
    assert w.symmetrize("intersection").nnz == 0  # hand calculation: no link runs both ways


# ---------------------------------------------------------------------------
# 4. set operations on links
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("seed", [61, 62])
def test_set_operations_match_python_sets(seed):
    n = 70
    ids = str_ids(n)
    ma = random_matrix(n, 0.06, seed, isolated=2, self_loops=2)
    mb = random_matrix(n, 0.06, seed + 100, isolated=3, self_loops=2)
    a, b = vicino.from_matrix(ma, ids=ids), vicino.from_matrix(mb, ids=ids)
    sa, sb = pairs_of(ma), pairs_of(mb)  # reference: scipy coo (row, col) pairs
    assert sa & sb and sa - sb and sb - sa  # the sets overlap partially (the test is meaningful)
    for got, ref in ((a | b, sa | sb), (a & b, sa & sb), (a - b, sa - sb), (b - a, sb - sa)):
        assert vicino_pairs(got) == ref  # reference: python set union / intersection / difference
        assert (got.to_scipy().data == 1.0).all()  # common practice: set operations give binary weights
        assert got.ids.equals(a.ids)  # reference: the input ids (unchanged)
    # with itself: union and intersection are the binary form, difference is empty
    assert vicino_pairs(a | a) == vicino_pairs(a & a) == sa  # reference: python sets (idempotence)
    assert (a - a).nnz == 0  # reference: python sets (s - s is empty)


def test_set_operations_need_equal_ids():
    m = random_matrix(10, 0.3, 63)
    a = vicino.from_matrix(m, ids=list("abcdefghij"))
    other_names = vicino.from_matrix(m, ids=list("abcdefghik"))
    other_order = vicino.from_matrix(m, ids=list("bacdefghij"))
    fewer = vicino.from_matrix(m[:9][:, :9], ids=list("abcdefghi"))
    for b in (other_names, other_order, fewer):
        for op in ("__or__", "__and__", "__sub__"):
            with pytest.raises(vicino.IdError):  # common practice: combining matrices needs matching units
                getattr(a, op)(b)
    # once aligned, the operation works and matches sets of (id, id) pairs
    aligned = other_order.align(a.ids)

    def id_pairs(w):
        e = w.to_edges()
        return set(zip(e["source"], e["target"]))

    assert id_pairs(a & aligned) == id_pairs(a) & id_pairs(other_order)  # reference: python sets of id pairs


# ---------------------------------------------------------------------------
# 5. subset, drop, drop_islands, align
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("seed", [71, 72])
def test_subset_drop_align_match_scipy_fancy_indexing(seed):
    n = 80
    rng = np.random.default_rng(seed)
    m = random_matrix(n, 0.06, seed, isolated=3, sinks=3, self_loops=2)
    ids = pd.Index(str_ids(n))
    w = vicino.from_matrix(m, ids=ids)

    idx = rng.permutation(n)[:50]  # a subset in a scrambled order
    s = w.subset(ids[idx])
    assert s.ids.equals(ids[idx])  # reference: the ids as given (given order)
    np.testing.assert_array_equal(s.to_dense(), m[idx][:, idx].toarray())  # reference: scipy W[idx][:, idx]

    gone = rng.choice(n, 17, replace=False)
    keep = np.setdiff1d(np.arange(n), gone)  # others keep their order
    d = w.drop(list(ids[gone]))
    assert d.ids.equals(ids[keep])  # reference: numpy.setdiff1d (others keep their order)
    np.testing.assert_array_equal(d.to_dense(), m[keep][:, keep].toarray())  # reference: scipy W[idx][:, idx]

    perm = rng.permutation(n)
    a = w.align(ids[perm])
    assert a.ids.equals(ids[perm])  # reference: the permutation as given
    np.testing.assert_array_equal(a.to_dense(), m[perm][:, perm].toarray())  # reference: scipy W[idx][:, idx]
    frame = pd.DataFrame({"v": np.arange(n)}, index=ids[perm])
    np.testing.assert_array_equal(w.align(frame).to_dense(), m[perm][:, perm].toarray())  # reference: scipy

    nonempty = np.flatnonzero(np.diff(m.indptr) > 0)  # reference: scipy CSR row counts
    di = w.drop_islands()
    assert di.ids.equals(ids[nonempty])  # reference: scipy non-empty rows, in order
    np.testing.assert_array_equal(di.to_dense(), m[nonempty][:, nonempty].toarray())  # reference: scipy W[idx][:, idx]


def test_subset_keeps_distances_of_links():
    rng = np.random.default_rng(73)
    xy = rng.random((120, 2))
    ids = pd.Index(str_ids(120))
    w = vicino.within_distance(xy, 0.12, ids=ids)
    full = brute_euclidean(xy)
    perm = rng.permutation(120)
    results = (
        w.subset(ids[perm[:70]]),
        w.drop(ids[perm[:20]]),
        w.align(ids[perm]),
        w.drop_islands().subset(w.drop_islands().ids[::-1]),
    )
    assert len(w.islands) > 0  # drop_islands really removes units here
    for out in results:
        i, j, e = positions(out)
        where = ids.get_indexer(out.ids)  # original positions of the kept units
        assert len(e) > 0
        np.testing.assert_allclose(
            e["distance"].to_numpy(), full[where[i], where[j]], rtol=1e-12, atol=1e-15
        )  # reference: numpy distances
        np.testing.assert_array_equal(
            out.to_dense(), w.to_scipy()[where][:, where].toarray()
        )  # reference: scipy fancy indexing


def test_drop_keeps_border_lengths_and_perimeters():
    cells = voronoi(120, 74)
    w = vicino.contiguity(cells, "rook")
    rng = np.random.default_rng(74)
    gone = rng.choice(120, 30, replace=False)
    keep = np.setdiff1d(np.arange(120), gone)
    d = w.drop(gone.tolist())
    i, j, e = positions(d)
    gi, gj = keep[i], keep[j]
    expected = shapely.length(shapely.intersection(shapely.boundary(cells[gi]), shapely.boundary(cells[gj])))
    np.testing.assert_allclose(
        e["border_length"].to_numpy(), expected, rtol=0, atol=1e-9
    )  # reference: shapely boundary intersection length
    np.testing.assert_allclose(
        d.perimeter.to_numpy(), shapely.length(cells[keep]), rtol=0, atol=1e-9
    )  # reference: shapely.length


# ---------------------------------------------------------------------------
# 6. repairs
# ---------------------------------------------------------------------------
def test_connect_islands_hand_built():
    # A(0,0) - B(1,0) linked, D(10,0) - E(10,1) linked; C(0,3) and F(5.5,0) are islands.
    # By hand: C's nearest is A (3 < sqrt(10)); F is 4.5 from both B and D: the tie goes to B (lower position).
    xy = np.array([[0, 0], [1, 0], [0, 3], [10, 0], [10, 1], [5.5, 0]])
    ids = list("ABCDEF")
    m = np.zeros((6, 6))
    for a, b in ((0, 1), (3, 4)):
        m[a, b] = m[b, a] = 1.0
    w = vicino.from_matrix(m, ids=ids)
    assert list(w.audit().islands) == ["C", "F"]  # hand calculation
    r = w.connect_islands(xy)
    added = vicino_pairs(r) - vicino_pairs(w)
    assert added == {(2, 0), (0, 2), (5, 1), (1, 5)}  # hand calculation (both ways: the input is symmetric)
    assert len(r.audit().islands) == 0  # hand calculation
    # k = 2: C gets A (3) and B (sqrt 10); F gets B and D (both at 4.5)
    r2 = w.connect_islands(xy, k=2, weight=0.5)
    assert vicino_pairs(r2) - vicino_pairs(w) == {
        (2, 0),
        (0, 2),
        (2, 1),
        (1, 2),
        (5, 1),
        (1, 5),
        (5, 3),
        (3, 5),
    }  # hand calculation
    dense = r2.to_dense()
    assert dense[2, 0] == dense[0, 2] == 0.5 and dense[0, 1] == 1.0  # hand calculation: new links weigh 0.5
    # brute force agrees
    assert added == brute_island_links(m, brute_euclidean(xy), 1, True)  # reference: numpy brute force


def test_connect_islands_ties_by_position_not_by_id():
    # the island at the origin has four units at distance exactly 1; ties go to the lower positions
    xy = np.array([[1, 0], [0, -1], [-1, 0], [0, 0], [0, 1]], dtype=float)
    ids = ["t4", "t3", "t2", "isle", "t0"]
    m = np.zeros((5, 5))
    for a, b in ((0, 1), (2, 4)):
        m[a, b] = m[b, a] = 1.0
    w = vicino.from_matrix(m, ids=ids)
    for k, expected in ((1, [0]), (2, [0, 1]), (3, [0, 1, 2]), (4, [0, 1, 2, 4])):
        r = w.connect_islands(xy, k=k)
        assert sorted(r.neighbors_of("isle").index) == sorted(
            ids[j] for j in expected
        )  # hand calculation: all at distance 1, lower positions first
        assert brute_nearest(brute_euclidean(xy), 3, k) == expected  # reference: numpy lexsort (distance, position)


@pytest.mark.parametrize("seed,k", [(81, 1), (82, 2), (83, 3)])
def test_connect_islands_random_symmetric(seed, k):
    rng = np.random.default_rng(seed)
    xy = rng.random((150, 2))
    ids = pd.Index(str_ids(150))
    w = vicino.within_distance(xy, 0.05, ids=ids)
    m = w.to_scipy()
    isl = np.flatnonzero(np.diff(m.indptr) == 0)  # reference: scipy empty rows
    assert len(isl) >= 3
    assert w.audit().islands.equals(ids[isl])  # reference: scipy empty rows
    d = brute_euclidean(xy)
    locations = pd.DataFrame({"x": xy[:, 0], "y": xy[:, 1]}, index=ids)  # a DataFrame with the ids as index
    r = w.connect_islands(locations, k=k, weight=2.0)
    expected = brute_island_links(m, d, k, both=True)  # reference: numpy brute force, ties by position
    assert vicino_pairs(r) == vicino_pairs(w) | expected  # reference: numpy brute force
    assert len(r.audit().islands) == 0  # reference: numpy brute force (every island got k links)
    assert is_symmetric(r.to_scipy())  # reference: scipy (symmetric input stays symmetric)
    # weights: old links keep 1, new ones weigh 2; old links keep their distances
    i, j, e = positions(r)
    new = np.array([(a, b) in expected for a, b in zip(i, j)])
    assert (e["weight"].to_numpy()[new] == 2.0).all() and (
        e["weight"].to_numpy()[~new] == 1.0
    ).all()  # reference: numpy brute force (which links are new)
    np.testing.assert_allclose(
        e["distance"].to_numpy()[~new], d[i[~new], j[~new]], rtol=1e-12, atol=1e-15
    )  # reference: numpy distances
    assert r.recipe[-1].params["links_added"] == len(expected)  # reference: numpy brute force


@pytest.mark.parametrize("seed", [84, 85])
def test_connect_islands_asymmetric_adds_outgoing_links_only(seed):
    n = 80
    rng = np.random.default_rng(seed)
    xy = rng.random((n, 2))
    m = random_matrix(n, 0.04, seed, isolated=3, sinks=6)
    assert not is_symmetric(m)  # reference: scipy
    w = vicino.from_matrix(m, ids=str_ids(n))
    isl = np.flatnonzero(np.diff(m.indptr) == 0)  # reference: scipy empty rows
    assert (np.bincount(m.indices, minlength=n)[isl] > 0).any()  # some islands have in-links (sinks)
    r = w.connect_islands(xy, k=2)
    expected = brute_island_links(m, brute_euclidean(xy), 2, both=False)  # reference: numpy brute force
    assert all(a in isl for a, _ in expected)  # reference: scipy empty rows (links only leave islands)
    assert vicino_pairs(r) == pairs_of(m) | expected  # reference: numpy brute force (outgoing links only)
    assert len(r.audit().islands) == 0  # reference: numpy brute force (every island got k links)
    others = ~np.isin(np.arange(n), isl)
    np.testing.assert_array_equal(r.to_dense()[others], m.toarray()[others])  # reference: scipy (other rows unchanged)


def test_repairs_great_circle():
    rng = np.random.default_rng(86)
    lonlat = np.column_stack([rng.uniform(10.0, 14.0, 120), rng.uniform(45.0, 48.0, 120)])
    w = vicino.within_distance(lonlat, 18.0, metric="great_circle")
    m = w.to_scipy()
    assert (np.diff(m.indptr) == 0).sum() >= 3
    r = w.connect_islands(lonlat, k=2, metric="great_circle")
    expected = brute_island_links(
        m, brute_haversine(lonlat), 2, both=True
    )  # reference: haversine brute force (Sinnott 1984)
    assert vicino_pairs(r) == vicino_pairs(w) | expected  # reference: haversine brute force
    ref = list(nx.connected_components(nx_graph(m, directed=False)))  # reference: networkx.connected_components
    assert len(ref) >= 3
    c = w.connect_components(lonlat, metric="great_circle")
    expected = brute_component_links(ref, 120, brute_haversine(lonlat), both=True)  # reference: haversine brute force
    assert vicino_pairs(c) == vicino_pairs(w) | expected  # reference: haversine brute force closest pairs
    assert (
        c.audit().components.count == 1
    )  # reference: networkx (one closest pair per smaller part joins it to the largest)


def test_connect_components_hand_built():
    # units on a line at x = 0, 1, 10, 11; 0 - 1 linked, 2 and 3 islands.
    # connect_islands: 2 and 3 are each other's nearest (distance 1), so they pair up (by hand);
    # connect_components then joins {2, 3} to {0, 1} through the closest pair (2, 1), distance 9.
    xy = np.array([[0, 0], [1, 0], [10, 0], [11, 0]], dtype=float)
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 0] = 1.0
    w = vicino.from_matrix(m, ids=["p", "q", "r", "s"])
    r = w.connect_islands(xy)
    assert vicino_pairs(r) - vicino_pairs(w) == {(2, 3), (3, 2)}  # hand calculation
    assert r.audit().components.count == 2  # hand calculation: {p, q}, {r, s}
    c = r.connect_components(xy)
    assert vicino_pairs(c) - vicino_pairs(r) == {(2, 1), (1, 2)}  # hand calculation
    assert c.audit().components.count == 1  # hand calculation
    # straight from w: components {0, 1} (largest), {2}, {3}; 2 joins via 1 (1), 3 via 1 (10 > 9 from 0)
    direct = w.connect_components(xy)
    assert vicino_pairs(direct) - vicino_pairs(w) == {(2, 1), (1, 2), (3, 1), (1, 3)}  # hand calculation
    # already connected: nothing to add
    assert vicino_pairs(c.connect_components(xy)) == vicino_pairs(c)  # hand calculation


def test_connect_components_ties_lower_i_then_j():
    # largest {0, 1, 2} at (0,0), (2,0), (4,0) (a path); smaller {3, 4} at (1,2), (3,2).
    # By hand: the pairs (3,0), (3,1), (4,1), (4,2) are all at sqrt(5): the tie goes to (3, 0).
    xy = np.array([[0, 0], [2, 0], [4, 0], [1, 2], [3, 2]], dtype=float)
    m = np.zeros((5, 5))
    for a, b in ((0, 1), (1, 2), (3, 4)):
        m[a, b] = m[b, a] = 1.0
    w = vicino.from_matrix(m)
    added = vicino_pairs(w.connect_components(xy)) - vicino_pairs(w)
    assert added == {(3, 0), (0, 3)}  # hand calculation
    ref = list(nx.connected_components(nx_graph(sp.csr_array(m), directed=False)))  # reference: networkx
    assert added == brute_component_links(
        ref, 5, brute_euclidean(xy), True
    )  # reference: numpy brute force, (distance, i, j)


@pytest.mark.parametrize("seed", [91, 92, 93])
def test_connect_components_random_symmetric(seed):
    rng = np.random.default_rng(seed)
    xy = rng.random((160, 2))
    w = vicino.within_distance(xy, 0.07, ids=str_ids(160))
    m = w.to_scipy()
    ref = list(nx.connected_components(nx_graph(m, directed=False)))  # reference: networkx.connected_components
    assert len(ref) >= 4
    r = w.connect_components(xy)
    expected = brute_component_links(
        ref, 160, brute_euclidean(xy), both=True
    )  # reference: numpy brute force closest pairs
    assert len(expected) == 2 * (len(ref) - 1)
    assert vicino_pairs(r) == vicino_pairs(w) | expected  # reference: numpy brute force closest pairs
    assert r.audit().components.count == 1  # reference: networkx.is_connected (above)
    assert nx.is_connected(nx_graph(r.to_scipy(), directed=False))  # reference: networkx.is_connected
    assert is_symmetric(r.to_scipy())  # reference: scipy


@pytest.mark.parametrize("seed", [94, 95])
def test_connect_components_asymmetric_adds_one_way_links(seed):
    # three-nearest neighbours of points in well separated clusters: asymmetric, in several pieces
    rng = np.random.default_rng(seed)
    centres = rng.uniform(0, 100, (5, 2))
    xy = np.concatenate([c + rng.normal(0, 1.0, (int(s), 2)) for c, s in zip(centres, rng.integers(6, 20, 5))])
    w = vicino.k_nearest(xy, 3)
    m = w.to_scipy()
    assert not is_symmetric(m)  # reference: scipy
    ref = list(nx.weakly_connected_components(nx_graph(m, directed=True)))  # reference: networkx weak components
    assert len(ref) >= 2
    r = w.connect_components(xy)
    expected = brute_component_links(ref, len(xy), brute_euclidean(xy), both=False)  # reference: numpy brute force
    assert vicino_pairs(r) == vicino_pairs(w) | expected  # reference: numpy brute force (one way, small -> largest)
    assert nx.is_weakly_connected(nx_graph(r.to_scipy(), directed=True))  # reference: networkx
    assert r.audit().components.count == 1  # reference: networkx.is_weakly_connected (above)


def test_repairs_locate_polygons_at_area_centroids():
    # an L-shaped island: its area centroid (19/14, 19/14) is nearer the square around (-3, -3),
    # while its vertex mean (5/3, 5/3) and its bounding-box centre (2, 2) are nearer the square around (6, 6)
    L = shapely.Polygon([(0, 0), (4, 0), (4, 1), (1, 1), (1, 4), (0, 4)])
    s1, s1b = box(-3.5, -3.5, -2.5, -2.5), box(-4.5, -3.5, -3.5, -2.5)
    s2, s2b = box(5.5, 5.5, 6.5, 6.5), box(6.5, 5.5, 7.5, 6.5)
    polys = [L, s1, s1b, s2, s2b]
    c = shapely.get_coordinates(shapely.centroid(polys))
    np.testing.assert_allclose(c[0], [19 / 14, 19 / 14], rtol=1e-14)  # hand calculation: (4*(2, .5) + 3*(.5, 2.5)) / 7
    w = vicino.contiguity(polys, "queen", ids=["L", "S1", "S1b", "S2", "S2b"])
    assert list(w.audit().islands) == ["L"]  # hand calculation: L touches nothing
    r = w.connect_islands(polys)
    assert r.neighbors_of("L").index.tolist() == ["S1"]  # hand calculation: sqrt(2) * 61/14 < sqrt(2) * 65/14
    assert vicino_pairs(r) - vicino_pairs(w) == brute_island_links(
        w.to_scipy(), brute_euclidean(c), 1, True
    )  # reference: shapely.centroid + numpy
    # components {S1, S1b} (label 0: tie of size 2, holds the earlier unit), {S2, S2b}, {L}
    comps = w.audit().components
    assert comps.labels.tolist() == [2, 0, 0, 1, 1]  # hand calculation
    cc = w.connect_components(pd.Series(polys, index=w.ids))
    ref = list(nx.connected_components(nx_graph(w.to_scipy(), directed=False)))  # reference: networkx
    assert vicino_pairs(cc) - vicino_pairs(w) == brute_component_links(
        ref, 5, brute_euclidean(c), True
    )  # reference: shapely.centroid + numpy
    assert vicino_pairs(cc) - vicino_pairs(w) == {
        (0, 1),
        (1, 0),
        (3, 1),
        (1, 3),
    }  # hand calculation: L-S1, S2-S1 (9 sqrt 2)


@pytest.mark.parametrize("seed", [96, 97])
def test_repairs_with_voronoi_cells_as_locations(seed):
    cells = voronoi(200, seed)
    full = shapely_queen(cells)  # reference: shapely STRtree intersects
    rng = np.random.default_rng(seed)
    lonely = rng.choice(200, 3, replace=False)
    removed = {j for i, j in full if i in set(lonely.tolist())} - set(lonely.tolist())
    keep = np.setdiff1d(np.arange(200), sorted(removed))
    sub = cells[keep]
    w = vicino.contiguity(sub, "queen")
    c = shapely.get_coordinates(shapely.centroid(sub))  # reference: shapely.centroid (area-weighted)
    d = brute_euclidean(c)
    m = w.to_scipy()
    assert (np.diff(m.indptr) == 0).sum() >= 1
    r = w.connect_islands(sub, k=2)
    assert vicino_pairs(r) == vicino_pairs(w) | brute_island_links(
        m, d, 2, True
    )  # reference: shapely.centroid + numpy brute force
    assert len(r.audit().islands) == 0  # reference: numpy brute force (every island got 2 links)
    i, j, e = positions(r)
    old = np.array([(a, b) in vicino_pairs(w) for a, b in zip(i, j)])
    expected_length = shapely.length(shapely.intersection(shapely.boundary(sub[i[old]]), shapely.boundary(sub[j[old]])))
    np.testing.assert_allclose(
        e["border_length"].to_numpy()[old], expected_length, rtol=0, atol=1e-9
    )  # reference: shapely boundary intersection length
    ref = list(
        nx.connected_components(graph_of_pairs(len(keep), shapely_queen(sub)))
    )  # reference: networkx on shapely contacts
    assert len(ref) >= 2
    cc = w.connect_components(list(sub))
    assert vicino_pairs(cc) == vicino_pairs(w) | brute_component_links(
        ref, len(keep), d, True
    )  # reference: shapely.centroid + numpy
    assert (
        cc.audit().components.count == 1
    )  # reference: networkx (one closest pair per smaller part joins it to the largest)


# ---------------------------------------------------------------------------
# 7. audit facts
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("seed", [101, 102, 103])
def test_audit_facts_match_scipy(seed):
    n = 60
    m = asymmetric_weighted(n, seed).tolil()
    rng = np.random.default_rng(seed)
    loops = rng.choice(n, 4, replace=False)
    m[loops, loops] = 1.5
    m[:, 3] = 0  # one more unit that is nobody's neighbour
    m = sp.csr_array(m)
    m.eliminate_zeros()
    ids = pd.Index(str_ids(n))
    a = vicino.from_matrix(m, ids=ids).audit()
    dense = m.toarray()
    off = ~np.eye(n, dtype=bool)
    # neighbours are other units: self-links do not count (common practice)
    row_counts = np.diff(m.indptr) - (m.diagonal() != 0)  # reference: scipy CSR row counts less the diagonal
    assert a.islands.equals(ids[row_counts == 0])  # reference: scipy rows without an off-diagonal entry
    col_counts = (dense * off > 0).sum(axis=0)  # reference: numpy off-diagonal column counts
    assert a.zero_columns.equals(ids[col_counts == 0])
    assert ids[3] in a.zero_columns  # reference: the matrix was built with column 3 zeroed
    assert a.self_links == int((m.diagonal() != 0).sum()) == 4  # reference: scipy diagonal
    assert a.one_way_links == int(((dense > 0) & (dense.T == 0) & off).sum())  # reference: numpy W_ij > 0, W_ji == 0
    asym = np.abs(dense - dense.T)
    value, id_i, id_j = a.max_asymmetry
    assert value == asym.max()  # reference: numpy max |W - W.T|
    i, j = ids.get_loc(id_i), ids.get_loc(id_j)
    assert asym[i, j] == value  # reference: numpy |W - W.T| at the reported pair
    assert a.symmetric is False  # reference: scipy W != W.T
    assert a.density == pytest.approx((m.nnz - 4) / (n * (n - 1)), rel=1e-15)  # reference: (nnz - diag) / (n (n - 1))
    pd.testing.assert_series_equal(
        a.counts, pd.Series(row_counts, index=ids, name="neighbors"), check_dtype=False
    )  # reference: scipy row counts
    assert a.summary["min"] == row_counts.min() and a.summary["max"] == row_counts.max()  # reference: numpy
    assert a.summary["median"] == np.median(row_counts) and a.summary["mean"] == pytest.approx(
        row_counts.mean()
    )  # reference: numpy
    # the histogram counts units per neighbour count
    h = a.histogram
    lo = row_counts.min()
    ref_hist = np.bincount(row_counts - lo)
    if len(ref_hist) <= 16:
        assert h["neighbours"].tolist() == [
            str(v) for v in range(lo, row_counts.max() + 1)
        ]  # reference: numpy.bincount
        np.testing.assert_array_equal(h["units"], ref_hist)  # reference: numpy.bincount
    assert h["units"].sum() == n and h["share"].sum() == pytest.approx(1.0)  # reference: every unit is counted once


def test_audit_max_asymmetry_ties_go_to_first_pair():
    # binary one-way links: every one-way pair has |w_ij - w_ji| = 1, the largest; the first pair (i < j) is reported
    m = random_matrix(40, 0.08, 104)
    m.data[:] = 1.0
    dense = m.toarray()
    asym = np.triu(np.abs(dense - dense.T), 1)
    flat = int(np.argmax(asym))  # reference: numpy argmax (row-major: lowest i, then lowest j)
    assert (asym == 1.0).sum() > 1  # there are ties
    ids = pd.Index(str_ids(40))
    assert vicino.from_matrix(m, ids=ids).audit().max_asymmetry == (
        1.0,
        ids[flat // 40],
        ids[flat % 40],
    )  # reference: numpy argmax


def test_audit_symmetric_facts_match_scipy():
    m = random_matrix(70, 0.05, 105, isolated=4, symmetric=True)
    a = vicino.from_matrix(m).audit()
    assert is_symmetric(m)  # reference: scipy
    assert a.symmetric and a.max_asymmetry is None and a.one_way_links == 0  # reference: scipy W == W.T
    assert (
        a.zero_columns.tolist() == np.flatnonzero(np.diff(m.indptr) == 0).tolist()
    )  # reference: scipy (symmetric: zero columns are empty rows)


def test_audit_hand_built_map():
    # 7 units in scrambled order: a triangle a-b-c, a pair d-e, islands f (first) and g
    ids = ["f", "d", "a", "e", "b", "g", "c"]
    pos = {u: p for p, u in enumerate(ids)}
    m = np.zeros((7, 7))
    for u, v in (("a", "b"), ("b", "c"), ("a", "c"), ("d", "e")):
        m[pos[u], pos[v]] = m[pos[v], pos[u]] = 1.0
    w = vicino.from_matrix(m, ids=ids)
    a = w.audit()
    assert sorted(a.islands) == ["f", "g"]  # hand calculation
    assert a.components.count == 4  # hand calculation: triangle, pair, two islands
    assert a.components.sizes.tolist() == [3, 2, 1, 1]  # hand calculation
    # label 0 the triangle, 1 the pair; the islands tie: f comes first, so f is 2 and g is 3
    assert a.components.labels.to_dict() == {"f": 2, "d": 1, "a": 0, "e": 1, "b": 0, "g": 3, "c": 0}  # hand calculation
    assert a.symmetric and a.one_way_links == 0 and a.max_asymmetry is None  # hand calculation
    assert sorted(a.zero_columns) == ["f", "g"]  # hand calculation
    assert a.self_links == 0  # hand calculation
    assert a.density == pytest.approx(8 / 42)  # hand calculation: 8 links among 7 * 6 ordered pairs
    assert a.counts.to_dict() == {"f": 0, "d": 1, "a": 2, "e": 1, "b": 2, "g": 0, "c": 2}  # hand calculation
    assert a.summary.to_dict() == pytest.approx({"min": 0, "median": 1, "mean": 8 / 7, "max": 2})  # hand calculation
    assert a.histogram["units"].tolist() == [2, 2, 3]  # hand calculation: counts 0, 1, 2
    levels = {f.check: f.level for f in a.findings}
    assert (
        levels["islands"] == "problem" and levels["components"] == "warning"
    )  # hand calculation: islands and pieces exist
    assert levels["symmetry"] == "ok" and levels["self-links"] == "ok"  # hand calculation
    frame = a.to_frame()
    assert list(frame.columns) == ["level", "check", "message"] and len(frame) == len(a.findings)
    assert "f" in frame.set_index("check").loc["islands", "message"]  # hand calculation: the island ids are named

    # add a one-way link g -> a of weight 3 and a self-link on d
    m2 = m.copy()
    m2[pos["g"], pos["a"]] = 3.0
    m2[pos["d"], pos["d"]] = 1.0
    b = vicino.from_matrix(m2, ids=ids).audit()
    assert list(b.islands) == ["f"]  # hand calculation
    assert b.components.sizes.tolist() == [4, 2, 1]  # hand calculation: g joins the triangle (either direction counts)
    assert b.components.labels["g"] == 0 and b.components.labels["f"] == 2  # hand calculation
    assert b.one_way_links == 1 and not b.symmetric  # hand calculation
    assert b.max_asymmetry == (3.0, "a", "g")  # hand calculation: |3 - 0| between a (position 2) and g (position 5)
    assert b.self_links == 1  # hand calculation
    assert b.density == pytest.approx(9 / 42)  # hand calculation: 10 entries less 1 self-link
    assert sorted(b.zero_columns) == ["f", "g"]  # hand calculation: nobody links to f or g (d links to itself)
    levels = {f.check: f.level for f in b.findings}
    assert (
        levels["self-links"] == "warning" and levels["symmetry"] == "note"
    )  # hand calculation: a self-link and a one-way link exist
    assert levels["zero columns"] == "note"  # hand calculation: g has a neighbour but is nobody's


# ---------------------------------------------------------------------------
# a matrix large enough for the core's parallel paths (more than 2^15 links)
# ---------------------------------------------------------------------------
def test_large_matrix_graph_operations_match_scipy():
    from scipy.sparse.csgraph import connected_components

    n = 5000
    rng = np.random.default_rng(111)
    rows = rng.integers(0, 4000, 45_000)  # units 4000.. have empty rows (some are linked to: sinks)
    cols = rng.integers(0, n, 45_000)
    keep = rows != cols
    m = sp.csr_array((rng.uniform(0.5, 3.0, keep.sum()), (rows[keep], cols[keep])), shape=(n, n))
    m.sum_duplicates()
    assert m.nnz > 2**15
    w = vicino.from_matrix(m)
    # components
    count, lab = connected_components(m, directed=True, connection="weak")  # reference: scipy.sparse.csgraph (weak)
    parts = [np.flatnonzero(lab == c).tolist() for c in range(count)]
    assert_components_match(w, parts)
    # order 2 and cumulative 2
    exact = scipy_exact_orders(m, 2)
    assert vicino_pairs(w.order(2)) == exact[1]  # reference: scipy powers of the binary adjacency
    assert vicino_pairs(w.order(2, cumulative=True)) == exact[0] | exact[1]  # reference: scipy
    # symmetrize and set operations
    gap = sp.csr_array(w.symmetrize("mean").to_scipy() - (m + m.T) / 2)
    assert abs(gap).max() <= 1e-15  # reference: scipy (W + W.T) / 2
    t = vicino.from_matrix(m.T)
    assert vicino_pairs(w & t) == pairs_of(m) & pairs_of(m.T)  # reference: python sets of scipy pairs
    assert vicino_pairs(w - t) == pairs_of(m) - pairs_of(m.T)  # reference: python sets of scipy pairs
    # selection
    idx = rng.permutation(n)[:3000]
    assert (w.subset(idx).to_scipy() != m[idx][:, idx]).nnz == 0  # reference: scipy W[idx][:, idx]
    # audit facts
    a = w.audit()
    assert (
        a.zero_columns.tolist() == np.flatnonzero(np.bincount(m.indices, minlength=n) == 0).tolist()
    )  # reference: scipy column counts
    assert a.one_way_links == len(
        pairs_of(m) - pairs_of(m.T)
    )  # reference: python sets of scipy pairs (W_ij > 0, W_ji == 0)
    assert a.max_asymmetry[0] == abs(sp.csr_array(m - m.T)).max()  # reference: scipy max |W - W.T|


def test_repair_links_carry_their_distance():
    # four units on a line at x = 0, 1, 2, 10; 0 - 1 linked, 2 and 3 islands
    xy = np.array([[0.0, 0.0], [1.0, 0.0], [2.0, 0.0], [10.0, 0.0]])
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 0] = 1.0
    fixed = vicino.from_matrix(m, ids=list("abcd")).connect_islands(xy)
    edges = fixed.to_edges().set_index(["source", "target"])["distance"]
    for (i, j), d in edges.items():
        a, b = "abcd".index(i), "abcd".index(j)
        if m[a, b] > 0:
            assert np.isnan(d)  # the given matrix knew no distances
        else:
            assert d == pytest.approx(np.hypot(*(xy[a] - xy[b])))  # reference: numpy Euclidean distance
    # reference: by hand, c's nearest is b (distance 1) and d's nearest is c (distance 8)
    assert set(edges.index) - {("a", "b"), ("b", "a")} == {("b", "c"), ("c", "b"), ("c", "d"), ("d", "c")}
