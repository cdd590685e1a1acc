"""Every notebook in notebooks-demo/ runs in a fresh kernel, and the figures it prints are true."""

from __future__ import annotations

import re
from pathlib import Path

import nbformat
import numpy as np
import pytest
import scipy.io
import scipy.sparse
import scipy.stats
import shapely
from nbclient import NotebookClient

import vicino
from oracles import brute_euclidean
from vicino import demo

ROOT = Path(__file__).resolve().parents[3]
# one pytest-xdist worker runs this module, so its notebook runs once
pytestmark = pytest.mark.xdist_group("notebook")
NOTEBOOKS = sorted((ROOT / "notebooks-demo").glob("*.ipynb"))
_RUNS: dict[Path, tuple[str, Path]] = {}


def printed(nb) -> str:
    """The text a notebook's code cells printed (streams and plain-text results), in order."""
    parts = []
    for cell in nb.cells:
        for out in cell.get("outputs", []):
            if out.get("output_type") == "stream":
                parts.append(out["text"])
            elif "text/plain" in out.get("data", {}):
                parts.append(out["data"]["text/plain"] + "\n")
    return "".join(parts)


def execute(path: Path, folder: Path) -> str:
    """Run the notebook with nbclient in ``folder`` (kernel python3) and return what it printed."""
    if path not in _RUNS:
        nb = nbformat.read(path, as_version=4)
        NotebookClient(nb, timeout=240, kernel_name="python3", resources={"metadata": {"path": str(folder)}}).execute()
        _RUNS[path] = (printed(nb), folder)
    return _RUNS[path][0]


def test_there_are_notebooks():
    assert NOTEBOOKS, "notebooks-demo/ holds no notebook"


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.name)
def test_notebook_runs_and_is_committed_with_its_outputs(path, tmp_path):
    text = execute(path, tmp_path)  # a cell that raises fails the test (nbclient CellExecutionError)
    assert text
    committed = nbformat.read(path, as_version=4)
    code = [c for c in committed.cells if c.cell_type == "code"]
    assert all(c.get("execution_count") for c in code), "commit the notebook executed, with its outputs"
    # the committed outputs are those of the current code: the printed figures agree
    number = re.compile(r"-?\d+\.\d{6,}")
    assert number.findall(printed(committed)) == number.findall(text)


def _end_to_end(tmp_path_factory) -> tuple[str, Path]:
    path = ROOT / "notebooks-demo" / "weights-end-to-end.ipynb"
    if path not in _RUNS:
        execute(path, tmp_path_factory.mktemp("end-to-end"))
    return _RUNS[path]


def test_end_to_end_islands_are_true(tmp_path_factory):
    text, _ = _end_to_end(tmp_path_factory)
    islands = {m[0]: int(m[1]) for m in re.findall(r"^(.+?): \d+ links, islands: (\d+)$", text, re.M)}
    places = demo.settlements(seed=7)
    geoms = demo.districts(seed=7, places=places).to_numpy()
    i, j = shapely.STRtree(geoms).query(geoms, predicate="intersects")
    touching = np.bincount(i[i != j], minlength=len(geoms))
    assert islands["queen"] == islands["rook"] == int((touching == 0).sum()) == 6  # reference: shapely STRtree
    d = brute_euclidean(places[["x", "y"]].to_numpy())
    np.fill_diagonal(d, np.inf)
    assert islands["within 15 km"] == int((d > 15.0).all(axis=1).sum())  # reference: numpy brute force
    assert islands["6 nearest"] == 0  # common practice: k nearest reaches everyone (k < n)
    assert "after connect_components: islands 0, groups 1" in text


def test_end_to_end_morans_i_are_true(tmp_path_factory):
    text, _ = _end_to_end(tmp_path_factory)
    shown = {m[0]: float(m[1]) for m in re.findall(r"^Moran's I under (.+): (\S+)$", text, re.M)}
    assert list(shown) == [
        "6 nearest",
        "within 15 km",
        "queen",
        "rook",
        "queen, repaired",
        "inverse distance, 6 nearest",
        "triangular kernel, adaptive 10",
        "trade flows",
    ]
    places = demo.settlements(seed=7)
    shapes = demo.districts(seed=7, places=places)
    share = places["cistern_share"]
    queen = vicino.contiguity(shapes, "queen")
    built = {
        "6 nearest": vicino.k_nearest(places, 6),
        "within 15 km": vicino.within_distance(places, 15.0),
        "queen": queen,
        "rook": vicino.contiguity(shapes, "rook"),
        "queen, repaired": queen.connect_islands(shapes, k=1).connect_components(shapes),
    }
    for name, w in built.items():
        expected = vicino.moran(share, w.standardize("row", islands="keep"), permutations=0).statistic
        assert shown[name] == pytest.approx(expected, rel=1e-12, abs=1e-12), name
    # reference: Cliff and Ord (1981), I = (n / S0) z'Wz / z'z, with numpy on the queen weights, rows summing
    # to 1 and the islands' rows left empty
    w = queen.to_dense()
    rows = w.sum(axis=1)
    w[rows > 0] /= rows[rows > 0, None]
    z = share.to_numpy() - share.mean()
    assert shown["queen"] == pytest.approx(len(z) / w.sum() * (z @ w @ z) / (z @ z), rel=1e-10)
    # the same formula on the inverse-distance weights written out with numpy: 1/d to the 6 nearest, rows
    # summing to 1 (reference: Cliff and Ord (1981) as above; distances by brute force)
    d = brute_euclidean(places[["x", "y"]].to_numpy())
    np.fill_diagonal(d, np.inf)
    near = np.argsort(d, axis=1)[:, :6]
    w = np.zeros_like(d)
    rows = np.arange(len(d))[:, None]
    w[rows, near] = 1.0 / d[rows, near]
    w /= w.sum(axis=1, keepdims=True)
    assert shown["inverse distance, 6 nearest"] == pytest.approx((z @ w @ z) / (z @ z), rel=1e-10)
    # the trade network: a scipy coo_array of the flows, duplicate pairs summed (scipy's convention)
    flows = demo.trade_flows(places, seed=7)
    pos = {name: i for i, name in enumerate(places.index)}
    i = flows["origin"].map(pos).to_numpy()
    j = flows["destination"].map(pos).to_numpy()
    t = scipy.sparse.coo_array((flows["loads"].to_numpy(), (i, j)), shape=(len(z), len(z))).toarray()
    t /= t.sum(axis=1, keepdims=True)
    assert shown["trade flows"] == pytest.approx((z @ t @ z) / (z @ z), rel=1e-10)


def test_end_to_end_local_moran_counts_are_true(tmp_path_factory):
    text, _ = _end_to_end(tmp_path_factory)
    m = re.search(
        r"^significant: (\d+) \(high-high (\d+), low-low (\d+), high-low (\d+), low-high (\d+)\)$", text, re.M
    )
    assert m, "the notebook prints the local Moran summary"
    places = demo.settlements(seed=7)
    shapes = demo.districts(seed=7, places=places)
    share = places["cistern_share"]
    queen = vicino.contiguity(shapes, "queen")
    w = queen.connect_islands(shapes, k=1).connect_components(shapes).standardize("row")
    local = vicino.local_moran(share, w, permutations=999, seed=7, adjust="none")
    # reference: scipy.stats.false_discovery_control (Benjamini and Hochberg 1995) on the permutation p-values
    keep = scipy.stats.false_discovery_control(local.p_permutation) <= 0.05
    assert int(m[1]) == int(keep.sum())
    # quadrants from the sign of the centred value and of its lag (Anselin 1995), numpy on the dense matrix
    z = share.to_numpy() - share.mean()
    lag = w.to_dense() @ z
    quadrant = np.where(z > 0, np.where(lag > 0, "high-high", "high-low"), np.where(lag > 0, "low-high", "low-low"))
    for k, name in enumerate(["high-high", "low-low", "high-low", "low-high"], start=2):
        assert int(m[k]) == int((keep & (quadrant == name)).sum()), name


def test_end_to_end_hands_over_files_that_read_back(tmp_path_factory):
    text, folder = _end_to_end(tmp_path_factory)
    assert text.count("read back unchanged: True") == 2
    r_line = 'library(Matrix); W <- readMM("w.mtx"); ids <- read.csv("w.mtx.ids.csv", colClasses = "character")[[1]]'
    assert r_line in text
    assert 'W = spconvert(load("w.txt"));' in text
    places = demo.settlements(seed=7)
    shapes = demo.districts(seed=7, places=places)
    queen = vicino.contiguity(shapes, "queen")
    repaired = queen.connect_islands(shapes, k=1).connect_components(shapes).standardize("row")
    # reference: scipy.io.mmread (Matrix Market) and numpy loadtxt of the 1-based triplets (Octave's spconvert)
    np.testing.assert_array_equal(scipy.io.mmread(folder / "w.mtx").toarray(), repaired.to_dense())
    i, j, v = np.loadtxt(folder / "w.txt", comments="%", unpack=True)
    dense = np.zeros((repaired.n, repaired.n))
    dense[i.astype(int) - 1, j.astype(int) - 1] = v
    np.testing.assert_array_equal(dense, repaired.to_dense())
    ids = (folder / "w.mtx.ids.csv").read_text().splitlines()
    assert ids == ["id:str", *places.index]
