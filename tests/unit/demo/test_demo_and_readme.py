"""The demo runs end to end, and the README's example session stays true."""

from __future__ import annotations

import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import vicino
from vicino import demo

ROOT = Path(__file__).resolve().parents[3]


def test_demo_writes_its_tables_and_finds_the_remote_islands(tmp_path, capsys):
    tables = demo.run(tmp_path, permutations=99)
    out = capsys.readouterr().out
    for name in ("settlements", "neighbour_counts", "candidates", "contiguity", "district_counts", "lags", "moran"):
        assert (tmp_path / f"{name}.csv").stat().st_size > 0
    places = tables["settlements"]
    # reference: numpy brute force on the generated coordinates; a settlement is an
    # island under the 15 km band when no other one lies within 15 km
    xy = places[["x", "y"]].to_numpy()
    d = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    expected_islands = set(places.index[(d > 15.0).all(axis=1)])
    skerries = set(places.index[places["region"] == "Tarrow Skerries"])
    assert skerries <= expected_islands  # the scenario promises a remote cluster of islands
    assert int(tables["candidates"].loc["within 15 km", "islands"]) == len(expected_islands)
    # reference: the k-nearest candidates leave nobody out (k < n)  # common practice
    assert int(tables["candidates"].loc["6 nearest", "islands"]) == 0
    csv = pd.read_csv(tmp_path / "moran.csv", index_col=0)
    assert list(csv.index) == ["6 nearest", "10 nearest", "within 15 km", "queen", "rook", "Cliff-Ord"]
    assert "Cautions" in out and "not evidence of a cause" in out
    # the report stays readable in a terminal
    assert max(len(line) for line in out.splitlines()) <= 80, max(out.splitlines(), key=len)


def _reference_adjacency(shapes: np.ndarray):
    """Pairs of distinct districts that intersect, found by shapely alone."""
    import shapely

    i, j = shapely.STRtree(shapes).query(shapes, predicate="intersects")
    keep = i != j
    return i[keep], j[keep]


def test_district_neighbour_counts_match_shapely(tmp_path, capsys):
    shapely = pytest.importorskip("shapely")
    tables = demo.run(tmp_path, permutations=19)
    capsys.readouterr()
    places = tables["settlements"]
    shapes = demo.districts(7)
    assert list(shapes.index) == list(places.index)
    g = shapes.to_numpy()
    i, j = _reference_adjacency(g)
    n = len(g)
    queen = np.bincount(i, minlength=n)  # reference: shapely STRtree intersects, self pairs removed
    # reference: shapely DE-9IM relate: interiors apart, boundaries meeting in a line
    shared_line = shapely.relate_pattern(g[i], g[j], "F***1****")
    rook = np.bincount(i[shared_line], minlength=n)
    counts = pd.read_csv(tmp_path / "district_counts.csv", index_col=0)
    assert list(counts.index) == list(places.index)
    np.testing.assert_array_equal(counts["queen"].to_numpy(), queen)
    np.testing.assert_array_equal(counts["rook"].to_numpy(), rook)
    summary = pd.read_csv(tmp_path / "contiguity.csv", index_col=0)
    assert list(summary.index) == ["queen", "rook"]
    for rule, ref in (("queen", queen), ("rook", rook)):
        row = summary.loc[rule]
        # reference: numpy summaries of the shapely counts
        assert (row["links"], row["min"], row["max"], row["islands"]) == (ref.sum(), ref.min(), ref.max(), (ref == 0).sum())
        assert row["mean"] == pytest.approx(ref.mean(), abs=0.005)
    # the survey grid makes some districts meet only at a corner, so the rules differ
    assert queen.sum() > rook.sum()  # reference: the shapely counts above
    # the districts tile the coast without overlapping, one settlement in each
    coast = demo.coastline(7)
    vale = (places["region"] == "Brannock Vale").to_numpy()
    assert not shapely.relate_pattern(g[i], g[j], "T********").any()  # reference: shapely relate, interiors
    # reference: shapely area; the grid moves borders by at most half a cell
    assert shapely.area(g[vale]).sum() == pytest.approx(coast.area, rel=1e-3)
    points = shapely.points(places[["x", "y"]].to_numpy())
    # reference: shapely distance; rounding to the grid moves a border by less than a grid cell
    assert (shapely.distance(points, g) <= demo.SURVEY_GRID_KM).all()
    assert shapely.contains(g, points).all()  # reference: shapely contains (true for the demo seed)


def test_islets_are_exactly_the_skerries_and_islands(tmp_path, capsys):
    shapely = pytest.importorskip("shapely")
    tables = demo.run(tmp_path, permutations=19)
    out = capsys.readouterr().out
    places = tables["settlements"]
    g = demo.districts(7).to_numpy()
    i, _ = _reference_adjacency(g)
    alone = set(places.index[np.bincount(i, minlength=len(g)) == 0])  # reference: shapely STRtree intersects
    skerries = set(places.index[places["region"] == "Tarrow Skerries"])
    assert alone == skerries
    islets = g[(places["region"] == "Tarrow Skerries").to_numpy()]
    assert not shapely.intersects(islets, demo.coastline(7)).any()  # reference: shapely intersects
    for rule in ("queen", "rook"):
        w = vicino.contiguity(demo.districts(7), rule)
        assert set(w.islands) == skerries  # reference: the shapely set above
        assert int(tables["contiguity"].loc[rule, "islands"]) == len(skerries)
    block = out.split("islands under queen and rook", 1)[1].split("lag is 0", 1)[0]
    assert {name for name in skerries if name in block} == skerries


def test_moran_table_has_the_contiguity_rows(tmp_path, capsys):
    pytest.importorskip("shapely")
    tables = demo.run(tmp_path, permutations=19)
    capsys.readouterr()
    places = tables["settlements"]
    moran_table = pd.read_csv(tmp_path / "moran.csv", index_col=0)
    assert {"queen", "rook", "Cliff-Ord"} <= set(moran_table.index)
    g = demo.districts(7).to_numpy()
    i, j = _reference_adjacency(g)
    n = len(g)
    # reference: numpy, I = (n / S0) z'Wz / z'z with W the shapely adjacency, rows summing
    # to 1 and the islands' rows left empty (so S0 is the number of non-islands)
    w = np.zeros((n, n))
    w[i, j] = 1.0
    rows = w.sum(axis=1)
    w[rows > 0] /= rows[rows > 0, None]
    z = places["cistern_share"].to_numpy() - places["cistern_share"].mean()
    expected = n / w.sum() * (z @ w @ z) / (z @ z)
    assert moran_table.loc["queen", "I"] == pytest.approx(expected, rel=1e-10)
    expected_mean = np.full(3, -1 / (n - 1))  # common practice: E[I] = -1/(n - 1)
    np.testing.assert_allclose(moran_table.loc[["queen", "rook", "Cliff-Ord"], "E[I]"], expected_mean, rtol=1e-12)


def test_demo_skips_the_districts_without_shapely(tmp_path, capsys, monkeypatch):
    monkeypatch.setitem(sys.modules, "shapely", None)  # makes `import shapely` fail
    tables = demo.run(tmp_path, permutations=19)
    out = capsys.readouterr().out
    assert demo.NO_SHAPELY in out
    assert list(tables["moran"].index) == ["6 nearest", "10 nearest", "within 15 km"]
    assert not (tmp_path / "contiguity.csv").exists() and (tmp_path / "moran.csv").exists()


def test_command_line_demo_runs(tmp_path):
    r = subprocess.run([sys.executable, "-m", "vicino", "demo", "--out", str(tmp_path), "--permutations", "19"],
                       capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert "Moran's I" in r.stdout and (tmp_path / "moran.csv").exists()


def test_readme_session_runs_and_its_shown_output_is_true():
    text = (ROOT / "README.md").read_text()
    block = re.search(r"## A short session\n\n```python\n(.*?)```", text, re.S)
    if block is None:
        pytest.skip("README has no example session")
    code = block.group(1)
    shown = [line[2:] for line in code.splitlines() if line.startswith("# ")]
    runnable = "\n".join(line for line in code.splitlines() if not line.startswith("# ") and line.strip() != "w")
    scope: dict = {}
    exec(compile(runnable, "README.md", "exec"), scope)
    # reference: the repr lines printed in the README are what the code shows
    assert repr(scope["w"]).splitlines() == shown
    # reference: scipy product for the lag column the README adds
    w = scope["wr"]
    towns = scope["towns"]
    np.testing.assert_allclose(towns["income_lag"].to_numpy(), w.to_scipy() @ towns["income"].to_numpy(), rtol=1e-12)


def test_readme_polygon_example_runs():
    text = (ROOT / "README.md").read_text()
    block = re.search(r"get contiguity and\nshared-border weights:\n\n```python\n(.*?)```", text, re.S)
    assert block is not None, "the README's polygon example moved; update this test"
    scope: dict = {}
    exec(compile(block.group(1), "README.md", "exec"), {"vicino": vicino, **scope}, scope)
    import shapely

    geoms = np.asarray(scope["districts"].to_numpy(), dtype=object)
    tree = shapely.STRtree(geoms)
    a, b = tree.query(geoms, predicate="intersects")
    keep = a != b
    # reference: shapely STRtree intersects pairs
    assert scope["queen"].nnz == int(keep.sum())
    rook_pairs = shapely.relate_pattern(geoms[a[keep]], geoms[b[keep]], "****1****")
    # reference: shapely relate_pattern "****1****"; the by-border weights are rook links
    assert scope["by_border"].nnz == int(rook_pairs.sum())
    co = scope["co"].to_scipy()
    assert (co != co.T).nnz > 0  # Cliff-Ord weights are asymmetric  # common practice
