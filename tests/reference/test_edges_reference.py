"""Weights from networks: from_edges against scipy.sparse.coo_array and networkx; to / from networkx."""

from __future__ import annotations

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

import vicino


def random_edges(seed: int, n: int = 30, m: int = 120) -> pd.DataFrame:
    rng = np.random.default_rng(seed)
    names = np.array([f"port {i}" for i in range(n)], dtype=object)
    return pd.DataFrame(
        {
            "exporter": names[rng.integers(0, n, m)],
            "importer": names[rng.integers(0, n, m)],
            "tonnes": rng.gamma(2.0, 50.0, m),
        }
    )


def test_summed_edges_equal_scipy_coo_with_islands_from_ids():
    e = random_edges(1)
    ids = [f"port {i}" for i in range(35)]  # five more units than appear in the edges
    with pytest.warns(UserWarning, match="self-loop"):
        w = vicino.from_edges(e, source="exporter", target="importer", weight="tonnes", ids=ids)
    pos = {u: i for i, u in enumerate(ids)}
    r, c = e["exporter"].map(pos).to_numpy(), e["importer"].map(pos).to_numpy()
    off = r != c
    ref = sp.coo_array((e["tonnes"].to_numpy()[off], (r[off], c[off])), shape=(35, 35)).tocsr()  # sums duplicates
    np.testing.assert_allclose(w.to_dense(), ref.toarray(), rtol=1e-14)  # reference: scipy coo_array
    assert set(w.islands) >= set(ids[30:])
    assert w.recipe[0].params["network"] is True
    assert any(f.check == "network" and f.level == "warning" for f in w.audit().findings)


@pytest.mark.parametrize("how", ["mean", "max"])
def test_duplicate_policies(how):
    e = pd.DataFrame({"source": ["a", "a", "b"], "target": ["b", "b", "a"], "weight": [1.0, 4.0, 2.0]})
    w = vicino.from_edges(e, weight="weight", duplicates=how)
    expected = {"mean": 2.5, "max": 4.0}[how]  # by hand from the two a -> b edges
    assert w.neighbors_of("a").to_dict() == {"b": expected}
    with pytest.raises(vicino.InvalidInputError, match="the edge at row 0 and the edge at row 1 both give"):
        vicino.from_edges(e, weight="weight", duplicates="error")


def test_undirected_edges_match_a_networkx_graph():
    e = random_edges(2)
    e = e[e["exporter"] != e["importer"]]
    g = nx.Graph()
    for a, b, t in e.itertuples(index=False):
        g.add_edge(a, b, weight=g.get_edge_data(a, b, {"weight": 0})["weight"] + t)
    w = vicino.from_edges(e, source="exporter", target="importer", weight="tonnes", directed=False)
    ref = nx.to_numpy_array(g, nodelist=list(w.ids), weight="weight")  # reference: networkx adjacency
    # each undirected edge counts once per direction; repeated pairs sum as in the graph above
    np.testing.assert_allclose(w.to_dense(), ref, rtol=1e-13)
    assert w.audit().symmetric


def test_networkx_round_trip_keeps_nodes_weights_and_facts():
    xy = np.random.default_rng(3).random((25, 2))
    w = vicino.k_nearest(xy, 3, ids=[f"n{i}" for i in range(25)])
    g = w.to_networkx()
    assert list(g.nodes) == list(w.ids) and g.number_of_edges() == w.nnz
    e = w.to_edges().iloc[0]
    assert g.edges[e["source"], e["target"]]["distance"] == e["distance"]
    back = vicino.from_networkx(g)
    np.testing.assert_array_equal(back.to_dense(), w.to_dense())
    assert back.recipe[0].action == "from_networkx"
    ring = vicino.from_networkx(nx.cycle_graph(6), weight=None)
    np.testing.assert_array_equal(ring.to_dense(), nx.to_numpy_array(nx.cycle_graph(6)))  # reference: networkx


def test_zero_weights_are_no_links_and_self_loops_follow_the_policy():
    e = pd.DataFrame({"source": [1, 2, 3, 3], "target": [2, 3, 3, 1], "weight": [1.0, 0.0, 5.0, 2.0]})
    with pytest.warns(UserWarning, match="1 self-loop"):
        w = vicino.from_edges(e, weight="weight")
    assert w.nnz == 2 and w.recipe[0].params["zero_weights_dropped"] == 1
    kept = vicino.from_edges(e, weight="weight", self_loops="keep")
    assert kept.self_links == 1
    with pytest.raises(vicino.InvalidInputError, match="links unit 3 to itself"):
        vicino.from_edges(e, weight="weight", self_loops="error")


@pytest.mark.parametrize(
    "edges,kwargs,error,words",
    [
        (pd.DataFrame({"a": [1], "b": [2]}), {}, vicino.InvalidInputError, "no column 'source'"),
        (pd.DataFrame({"source": [1], "target": [2]}), {"weight": "w"}, vicino.InvalidInputError, "no column 'w'"),
        (pd.DataFrame({"source": [1], "target": [9]}), {"ids": [1, 2]}, vicino.IdError, "9"),
        (
            pd.DataFrame({"source": [1], "target": [2], "w": [np.nan]}),
            {"weight": "w"},
            vicino.InvalidValuesError,
            "nan",
        ),
        (pd.DataFrame({"source": [1], "target": [2], "w": [-1.0]}), {"weight": "w"}, vicino.InvalidValuesError, ">= 0"),
        (pd.DataFrame({"source": [1], "target": [2], "w": ["x"]}), {"weight": "w"}, vicino.InvalidTypeError, "numbers"),
        (pd.DataFrame({"source": [1, None], "target": [2, 1]}), {}, vicino.InvalidInputError, "missing"),
        (pd.DataFrame({"source": [1], "target": [2]}), {"duplicates": "first"}, vicino.InvalidParameterError, "dupl"),
        ([1, 2], {}, vicino.InvalidTypeError, "DataFrame"),
    ],
)
def test_bad_edge_tables_are_refused(edges, kwargs, error, words):
    with pytest.raises(error, match=words):
        vicino.from_edges(edges, **kwargs)


def test_arrays_as_edges():
    w = vicino.from_edges(None, source=np.array(["x", "y"]), target=np.array(["y", "z"]), ids=["x", "y", "z", "q"])
    assert w.to_dense().tolist() == [[0, 1, 0, 0], [0, 0, 1, 0], [0, 0, 0, 0], [0, 0, 0, 0]]  # by hand
