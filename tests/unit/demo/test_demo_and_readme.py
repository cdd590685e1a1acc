"""The demo runs end to end, and the README's example session stays true."""

from __future__ import annotations

import contextlib
import io
import re
import subprocess
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import vicino
from vicino import demo

# one pytest-xdist worker runs this module, so its demo runs once
pytestmark = pytest.mark.xdist_group("demo")
ROOT = Path(__file__).resolve().parents[3]


@pytest.fixture(scope="module")
def demo_run(tmp_path_factory):
    """One run of the demo (99 permutations) shared by the tests that only read what it made."""
    folder = tmp_path_factory.mktemp("demo")
    printed = io.StringIO()
    with contextlib.redirect_stdout(printed):
        tables = demo.run(folder, permutations=99)
    return folder, tables, printed.getvalue()


def test_demo_writes_its_tables_and_finds_the_remote_islands(demo_run):
    out_dir, tables, out = demo_run
    for name in (
        "settlements",
        "neighbour_counts",
        "candidates",
        "contiguity",
        "district_counts",
        "repairs",
        "audit",
        "lags",
        "moran",
    ):
        assert (out_dir / f"{name}.csv").stat().st_size > 0
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
    csv = pd.read_csv(out_dir / "moran.csv", index_col=0)
    assert list(csv.index) == [
        "6 nearest",
        "10 nearest",
        "within 15 km",
        "queen",
        "rook",
        "Cliff-Ord",
        "queen, repaired",
    ]
    assert "Cautions" in out and "not evidence of a cause" in out
    assert "A repair adds links by assumption" in out
    # the report stays readable in a terminal; the audit's own first line is printed as
    # vicino gives it (it runs past 80 columns), so it is left out of this check
    lines = [line for line in out.splitlines() if not line.startswith("Weights audit: ")]
    assert max(len(line) for line in lines) <= 80, max(lines, key=len)


def _reference_adjacency(shapes: np.ndarray):
    """Pairs of distinct districts that intersect, found by shapely alone."""
    import shapely

    i, j = shapely.STRtree(shapes).query(shapes, predicate="intersects")
    keep = i != j
    return i[keep], j[keep]


def test_district_neighbour_counts_match_shapely(demo_run):
    import shapely

    out_dir, tables, out = demo_run
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
    counts = pd.read_csv(out_dir / "district_counts.csv", index_col=0)
    assert list(counts.index) == list(places.index)
    np.testing.assert_array_equal(counts["queen"].to_numpy(), queen)
    np.testing.assert_array_equal(counts["rook"].to_numpy(), rook)
    summary = pd.read_csv(out_dir / "contiguity.csv", index_col=0)
    assert list(summary.index) == ["queen", "rook"]
    for rule, ref in (("queen", queen), ("rook", rook)):
        row = summary.loc[rule]
        # reference: numpy summaries of the shapely counts
        assert (row["links"], row["min"], row["max"], row["islands"]) == (
            ref.sum(),
            ref.min(),
            ref.max(),
            (ref == 0).sum(),
        )
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


def test_islets_are_exactly_the_skerries_and_islands(demo_run):
    import shapely

    out_dir, tables, out = demo_run
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


def test_moran_table_has_the_contiguity_rows(demo_run):
    out_dir, tables, out = demo_run
    places = tables["settlements"]
    moran_table = pd.read_csv(out_dir / "moran.csv", index_col=0)
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


def _graph(n: int, i, j):
    """An undirected networkx graph on units 0..n-1 with edges (i, j)."""
    nx = pytest.importorskip("networkx")
    g = nx.Graph()
    g.add_nodes_from(range(n))
    g.add_edges_from(zip(np.asarray(i).tolist(), np.asarray(j).tolist()))
    return g


def _audit_rows(out: str) -> dict[str, list[str]]:
    """The compact audit table of section 3, as {weights: the words of its row}."""
    block = out.split("3. Audit of every candidate", 1)[1].split("4. Repairing", 1)[0]
    names = ["6 nearest", "10 nearest", "within 15 km", "queen", "rook", "Cliff-Ord"]
    return {
        name: line[len(name) :].split() for line in block.splitlines() for name in names if line.startswith(name + " ")
    }


def test_demo_audits_every_candidate(demo_run):
    nx = pytest.importorskip("networkx")
    out_dir, tables, out = demo_run
    places = tables["settlements"]
    n = len(places)
    rows = _audit_rows(out)
    assert set(rows) == {"6 nearest", "10 nearest", "within 15 km", "queen", "rook", "Cliff-Ord"}
    # reference: networkx.connected_components on numpy brute-force graphs (15 km band)
    # and on the shapely STRtree intersects pairs (queen); islands are nodes of degree 0
    xy = places[["x", "y"]].to_numpy()
    d = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1))
    np.fill_diagonal(d, np.inf)
    i, j = np.nonzero(d <= 15.0)
    band = _graph(n, i, j)
    i, j = _reference_adjacency(demo.districts(7).to_numpy())
    queen = _graph(n, i, j)
    for name, g in (("within 15 km", band), ("queen", queen)):
        islands = sum(1 for _, degree in g.degree() if degree == 0)
        groups = len(list(nx.connected_components(g)))
        assert rows[name][:4] == [str(islands), str(groups), "islands", "components"], rows[name]
    assert rows["6 nearest"][:2] == ["0", "1"]  # reference: k-nearest leaves nobody out (k < n)
    # every audit, the repaired one too, is written out, and uses the four levels only
    audit = pd.read_csv(out_dir / "audit.csv")
    assert list(audit["weights"].unique()) == list(tables["moran"].index)
    assert set(audit["level"]) <= {"problem", "warning", "note", "ok"}
    found = audit.set_index(["weights", "check"])["level"]
    assert found["queen", "islands"] == "problem" and found["queen, repaired", "islands"] == "ok"
    assert found["queen", "components"] == "warning" and found["queen, repaired", "components"] == "ok"
    # the full audits of queen before and after repair are printed
    section = out.split("4. Repairing the islets", 1)[1].split("5. Row-standardized", 1)[0]
    printed = [block for block in section.split("Weights audit: ")[1:]]
    assert len(printed) == 2
    assert "problem  islands: 6 unit(s) have no neighbours" in printed[0]
    assert "ok  islands: every unit has at least one neighbour" in printed[1]
    assert "ok  components: all units are connected in one group" in printed[1]
    assert "neighbour counts:" in printed[0] and "neighbour counts:" in printed[1]


def test_repaired_queen_has_no_islands_and_one_component(demo_run):
    nx = pytest.importorskip("networkx")
    import shapely

    out_dir, tables, out = demo_run
    places = tables["settlements"]
    shapes = demo.districts(7)
    n = len(shapes)
    queen = vicino.contiguity(shapes, "queen")
    linked, repaired = demo.repair_islets(queen, shapes)
    m = repaired.to_scipy()
    # reference: scipy row counts (no empty row) and networkx.connected_components on the
    # to_scipy() matrix, read as an undirected graph
    assert (np.diff(m.indptr) > 0).all()
    assert len(list(nx.connected_components(nx.from_scipy_sparse_array(m)))) == 1
    assert (m != m.T).nnz == 0  # the repair keeps symmetric weights symmetric  # reference: scipy transpose
    # reference: networkx on the first step alone: no islands, but the islets only reach
    # each other, so the skerries remain apart from the vale
    first = nx.from_scipy_sparse_array(linked.to_scipy())
    assert min(dict(first.degree()).values()) > 0
    assert len(list(nx.connected_components(first))) > 1
    # the repairs table lists exactly the links the repair added to the shapely adjacency
    repairs = pd.read_csv(out_dir / "repairs.csv", index_col=0)
    pos = places.index.get_indexer
    a, b = pos(repairs["district"]), pos(repairs["linked_to"])
    assert (a >= 0).all() and (b >= 0).all()
    i, j = _reference_adjacency(shapes.to_numpy())
    reference = _graph(n, np.concatenate([i, a]), np.concatenate([j, b]))
    ours = nx.from_scipy_sparse_array(m)
    assert {frozenset(e) for e in reference.edges()} == {frozenset(e) for e in ours.edges()}
    # reference: shapely area-weighted centroids (with the survey-grid precision dropped, as
    # shapely would round them to it) and numpy distances: every island is linked to a
    # nearest other unit (the islets are evenly spaced, so ties are decided by rounding),
    # and each ferry link is the closest pair between its group and the vale
    centre = shapely.get_coordinates(shapely.centroid(shapely.set_precision(shapes.to_numpy(), 0.0)))
    dist = np.sqrt(((centre[:, None, :] - centre[None, :, :]) ** 2).sum(-1))
    np.fill_diagonal(dist, np.inf)
    step = repairs["step"].to_numpy()
    skerries = set(places.index[places["region"] == "Tarrow Skerries"])
    islands = set(queen.islands)
    assert islands == skerries
    first_step = step == "connect_islands"
    for u in places.index.get_indexer(sorted(islands)):
        touching = first_step & ((a == u) | (b == u))
        shortest = min(dist[a[k], b[k]] for k in np.flatnonzero(touching))
        assert shortest == pytest.approx(dist[u].min(), rel=1e-9)
    assert set(places.index[a[first_step]]) | set(places.index[b[first_step]]) <= islands
    groups = list(nx.connected_components(first))
    vale = max(groups, key=len)
    for k in np.flatnonzero(step == "connect_components"):
        group = next(g for g in groups if a[k] in g)
        assert b[k] in vale and group is not vale
        assert dist[a[k], b[k]] == pytest.approx(dist[np.ix_(sorted(group), sorted(vale))].min(), rel=1e-9)
    np.testing.assert_allclose(repairs["distance_km"], dist[a, b], atol=0.05)  # printed to 0.1 km
    # reference: numpy Moran's I on the repaired graph, rows summing to 1 (no islands left)
    w = nx.to_numpy_array(reference, nodelist=range(n))
    w /= w.sum(axis=1, keepdims=True)
    z = places["cistern_share"].to_numpy() - places["cistern_share"].mean()
    expected = n / w.sum() * (z @ w @ z) / (z @ z)
    moran_table = pd.read_csv(out_dir / "moran.csv", index_col=0)
    assert moran_table.loc["queen, repaired", "I"] == pytest.approx(expected, rel=1e-10)


def test_demo_saves_plots_with_matplotlib(demo_run):
    pytest.importorskip("matplotlib")
    out_dir, tables, out = demo_run
    for name in ("queen_counts.png", "queen_links.png", "queen_repaired_links.png"):
        # reference: the PNG signature (ISO/IEC 15948)
        assert (out_dir / name).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
        assert name in out


def test_demo_without_out_dir_writes_nothing(tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    tables = demo.run(None, permutations=19)
    out = capsys.readouterr().out
    assert "Tables written" not in out and not list(tmp_path.iterdir())
    assert "audit" in tables


def test_demo_without_matplotlib_runs_whole_and_says_why_there_are_no_pictures(tmp_path, capsys, monkeypatch):
    for name in ("matplotlib", "matplotlib.figure"):
        monkeypatch.setitem(sys.modules, name, None)  # makes `from matplotlib.figure import ...` fail
    tables = demo.run(tmp_path, permutations=19)
    out = capsys.readouterr().out
    assert demo.NO_MATPLOTLIB in out
    assert not list(tmp_path.glob("*.png"))
    # every section still runs: districts, repair, and their rows of the Moran table
    assert list(tables["moran"].index)[-4:] == ["queen", "rook", "Cliff-Ord", "queen, repaired"]
    assert (tmp_path / "repairs.csv").exists() and (tmp_path / "weights" / "queen_repaired.mtx").exists()


def test_demo_writes_the_weights_of_every_candidate_for_r_octave_and_scipy(demo_run):
    import scipy.io
    import scipy.sparse as sp

    out_dir, tables, out = demo_run
    places = tables["settlements"]
    folder = out_dir / demo.WEIGHTS_DIR
    stems = [demo.file_stem(name) for name in tables["moran"].index]
    assert stems == ["6_nearest", "10_nearest", "within_15_km", "queen", "rook", "cliff_ord", "queen_repaired"]
    n = len(places)
    for stem in stems:
        # reference: scipy.io.mmread reads Matrix Market (Boisvert, Pozo and Remington 1996)
        m = sp.csr_array(scipy.io.mmread(folder / f"{stem}.mtx"))
        # reference: numpy loadtxt of the 1-based triplets, assembled by scipy as Octave's spconvert does
        i, j, v = np.loadtxt(folder / f"{stem}.txt", comments="%", unpack=True)
        tri = sp.csr_array(sp.coo_array((v, (i.astype(int) - 1, j.astype(int) - 1)), shape=(n, n)))
        npz = sp.load_npz(folder / f"{stem}.npz")  # reference: scipy.sparse.load_npz
        edges = pd.read_csv(folder / f"{stem}.csv", dtype={"source": str, "target": str})  # reference: pandas
        at = places.index.get_indexer
        table = sp.csr_array((edges["weight"], (at(edges["source"]), at(edges["target"]))), shape=(n, n))
        for other in (tri, npz, table):
            assert abs(m - other).max() == 0, stem
        # reference: pandas reads the ids sidecars; they are the settlements in row order
        for suffix in ("mtx", "txt", "csv"):
            ids = pd.read_csv(folder / f"{stem}.{suffix}.ids.csv", dtype=str)
            assert list(ids.columns) == ["id:str"] and list(ids.iloc[:, 0]) == list(places.index)
        # row-standardized, islands kept: rows sum to 1 or are empty  # common practice
        sums = np.asarray(m.sum(axis=1)).ravel()
        assert np.allclose(sums[sums > 0], 1.0, rtol=1e-12)
    # reference: shapely STRtree intersects (queen), rows divided by their sums with numpy
    i, j = _reference_adjacency(demo.districts(7).to_numpy())
    w = np.zeros((n, n))
    w[i, j] = 1.0
    rows = w.sum(axis=1)
    w[rows > 0] /= rows[rows > 0, None]
    queen = scipy.io.mmread(folder / "queen.mtx").toarray()
    np.testing.assert_allclose(queen, w, rtol=1e-15, atol=0)
    # the lines that load them name files that exist, in the R and Octave spellings
    stem = "queen_repaired"
    assert f'library(Matrix); W <- readMM("{stem}.mtx")' in out
    assert f'ids <- read.csv("{stem}.mtx.ids.csv", colClasses = "character")[[1]]' in out
    assert f'W = spconvert(load("{stem}.txt"));' in out
    for name in (f"{stem}.mtx", f"{stem}.mtx.ids.csv", f"{stem}.txt", f"{stem}.npz"):
        assert (folder / name).exists()


def test_moran_labels_spell_out_the_inference(demo_run):
    out_dir, tables, out = demo_run
    labels = ["z, randomization", "p, randomization", "p, permutation"]
    assert [c for c in tables["moran"].columns if c in labels] == labels
    section = out.split("6. Moran's I", 1)[1].split("Reading the results", 1)[0]
    header = next(line for line in section.splitlines() if line.lstrip().startswith("I "))
    assert all(label in header for label in labels)
    assert "(rand)" not in out and "(perm)" not in out
    n = len(tables["settlements"])
    assert f"E[I] = -1/(n - 1) = {-1 / (n - 1):.4g}" in section  # common practice: E[I] = -1/(n - 1)
    csv = pd.read_csv(out_dir / "moran.csv", index_col=0)
    assert labels == [c for c in csv.columns if c in labels]


def test_command_line_demo_runs(tmp_path):
    r = subprocess.run(
        [sys.executable, "-m", "vicino", "demo", "--out", str(tmp_path), "--permutations", "19"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert r.returncode == 0, r.stderr
    assert "Moran's I" in r.stdout and (tmp_path / "moran.csv").exists()
    assert (tmp_path / "queen_links.png").exists() and (tmp_path / "weights" / "queen.mtx").exists()


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


def _run_readme_polygon_example(text: str) -> dict:
    block = re.search(r"get contiguity and\nshared-border weights:\n\n```python\n(.*?)```", text, re.S)
    assert block is not None, "the README's polygon example moved; update this test"
    scope: dict = {"vicino": vicino}
    exec(compile(block.group(1), "README.md", "exec"), scope)
    return scope


def test_readme_audit_section_runs_and_its_shown_output_is_true():
    nx = pytest.importorskip("networkx")
    text = (ROOT / "README.md").read_text()
    block = re.search(r"## Checking and repairing weights\n.*?```python\n(.*?)```", text, re.S)
    assert block is not None, "the README's audit section moved; update this test"
    code = block.group(1).splitlines()
    scope = _run_readme_polygon_example(text)  # the section continues the polygon example
    exec(compile("\n".join(line for line in code if not line.startswith("# ")), "README.md", "exec"), scope)
    # reference: the audit printed in the README is what print(report) shows
    at = code.index("print(report)")
    shown = []
    for line in code[at + 1 :]:
        if not line.startswith("# "):
            break
        shown.append(line[2:])
    assert repr(scope["report"]).splitlines() == shown
    # every line whose comment opens with a value shows what its expression gives
    checked = 0
    for line in code:
        match = re.match(r"^(\S.*?)\s+# (\(\d+, \d+\)|\d+)(?=[:\s]|$)", line)
        if match:
            assert repr(eval(match.group(1), scope)) == match.group(2), line
            checked += 1
    assert checked == 3
    # reference: networkx.connected_components on the repaired matrix; the README's
    # repaired weights are in one piece without islands
    m = scope["fixed"].to_scipy()
    assert len(list(nx.connected_components(nx.from_scipy_sparse_array(m)))) == 1
    assert (np.diff(m.indptr) > 0).all()  # reference: scipy row counts


def test_demo_section_seven_intervals_trade_network_and_local_pictures(demo_run):
    out_dir, tables, out = demo_run
    assert "exogenous to the outcome" in out  # the trade network's caution is printed
    more = tables["more_candidates"]
    assert {"inverse distance, 6 nearest", "triangular kernel, adaptive 10", "trade flows"} <= set(more.index)
    # numpy.linalg.eigvals as the outside reference for the interval of rho
    places = demo.settlements()
    w = vicino.from_edges(
        demo.trade_flows(places), source="origin", target="destination", weight="loads", ids=places.index
    ).standardize("row", islands="keep")
    real = np.linalg.eigvals(w.to_dense())
    real = real[np.abs(real.imag) < 1e-9].real
    assert more.loc["trade flows", "rho from"] == pytest.approx(1 / real.min(), rel=1e-6)
    assert more.loc["trade flows", "rho to"] == pytest.approx(1 / real.max(), rel=1e-6)
    assert (out_dir / "moran_scatterplot.png").stat().st_size > 0
    assert (out_dir / "local_moran_clusters.png").stat().st_size > 0
    assert len(tables["local_moran"]) == len(places)
