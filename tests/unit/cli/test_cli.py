"""The command line: each subcommand on small files, checked against scipy, numpy, shapely and networkx;
user errors exit 2 with one line on stderr, internal errors exit 1, --debug shows the traceback."""

from __future__ import annotations

import io
import json
import subprocess
import sys
import threading
from importlib.metadata import entry_points

import networkx as nx
import numpy as np
import pandas as pd
import pytest
import scipy.io
import scipy.sparse as sp
import shapely
from scipy.spatial import cKDTree

import vicino
from oracles import brute_haversine
from vicino import cli

N = 40


def run(argv, capsys):
    """Run the command line in-process: (exit code, stdout, stderr)."""
    code = cli.main([str(a) for a in argv])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def run_process(argv, cwd):
    return subprocess.run(
        [sys.executable, "-m", "vicino", *map(str, argv)], cwd=cwd, capture_output=True, text=True, timeout=120
    )


@pytest.fixture
def towns(tmp_path):
    """A CSV of 40 points with text ids that have leading zeros, and two value columns."""
    rng = np.random.default_rng(3)
    frame = pd.DataFrame(
        {
            "code": [f"{i:03d}" for i in range(N)],
            "x": rng.uniform(0, 10, N),
            "y": rng.uniform(0, 10, N),
            "income": rng.normal(50, 10, N),
        }
    )
    frame["rent"] = 0.5 * frame["x"] + rng.normal(0, 1, N)
    path = tmp_path / "towns.csv"
    frame.to_csv(path, index=False)
    return path, frame


@pytest.fixture
def boxes(tmp_path):
    """A GeoPackage of a 3 x 3 grid of unit boxes and one box far away (an island)."""
    geopandas = pytest.importorskip("geopandas")
    geoms = [shapely.box(i % 3, i // 3, i % 3 + 1, i // 3 + 1) for i in range(9)] + [shapely.box(10, 10, 11, 11)]
    names = [f"box-{i}" for i in range(10)]
    path = tmp_path / "boxes.gpkg"
    frame = geopandas.GeoDataFrame({"name": names, "value": np.arange(10.0) ** 2}, geometry=geoms, crs="EPSG:3857")
    frame.to_file(path)
    return path, frame


def mtx(path):
    """A Matrix Market file as a CSR array, read by scipy (Boisvert, Pozo and Remington 1996)."""
    return sp.csr_array(scipy.io.mmread(path))


def sidecar(path):
    return pd.read_csv(f"{path}.ids.csv", dtype=str).iloc[:, 0].tolist()


# ---- build ------------------------------------------------------------------------------------
def test_build_k_nearest_from_csv_matches_ckdtree_and_keeps_the_ids(towns, tmp_path, capsys):
    path, frame = towns
    out = tmp_path / "k5.mtx"
    code, stdout, err = run(["build", path, out, "--k", 5, "--id", "code"], capsys)
    assert code == 0, err
    assert "40 units" in stdout and str(out) in stdout and err == ""
    xy = frame[["x", "y"]].to_numpy()
    _, nearest = cKDTree(xy).query(xy, k=6)  # reference: scipy cKDTree (itself first)
    m = mtx(out)
    expected = sp.csr_array((np.ones(N * 5), (np.repeat(np.arange(N), 5), nearest[:, 1:].ravel())), shape=(N, N))
    assert abs(m - expected).max() == 0
    assert sidecar(out) == frame["code"].tolist()  # the leading zeros survive: '000', '001', ...


def test_build_within_distance_with_named_columns_matches_ckdtree(towns, tmp_path, capsys):
    path, frame = towns
    renamed = frame.rename(columns={"x": "east", "y": "north"})
    source = tmp_path / "named.csv"
    renamed.to_csv(source, index=False)
    out = tmp_path / "band.npz"
    code, _, err = run(["build", source, out, "--radius", 2.5, "--x", "east", "--y", "north", "--id", "code"], capsys)
    assert code == 0, err
    xy = renamed[["east", "north"]].to_numpy()
    pairs = cKDTree(xy).query_pairs(2.5, output_type="ndarray")  # reference: scipy cKDTree pairs
    dense = np.zeros((N, N))
    dense[pairs[:, 0], pairs[:, 1]] = dense[pairs[:, 1], pairs[:, 0]] = 1.0
    np.testing.assert_array_equal(sp.load_npz(out).toarray(), dense)  # reference: scipy.sparse.load_npz
    assert list(vicino.read(out).ids) == renamed["code"].tolist()


def test_build_great_circle_k_nearest_matches_haversine(tmp_path, capsys):
    rng = np.random.default_rng(5)
    frame = pd.DataFrame({"id": range(30), "lon": rng.uniform(-10, 10, 30), "lat": rng.uniform(40, 55, 30)})
    frame.to_csv(tmp_path / "places.csv", index=False)
    out = tmp_path / "gc.mtx"
    code, _, err = run(
        ["build", tmp_path / "places.csv", out, "--k", 3, "--metric", "great_circle", "--id", "id"], capsys
    )
    assert code == 0, err
    d = brute_haversine(frame[["lon", "lat"]].to_numpy())  # reference: the haversine formula, R1 = 6371.0088 km
    np.fill_diagonal(d, np.inf)
    nearest = np.argsort(d, axis=1)[:, :3]
    m = mtx(out)
    np.testing.assert_array_equal(np.sort(m.indices.reshape(30, 3), axis=1), np.sort(nearest, axis=1))


def _shapely_adjacency(geoms, rule):
    """Pairs of distinct boxes that touch (queen) or share a stretch of border (rook), by shapely alone."""
    i, j = shapely.STRtree(geoms).query(geoms, predicate="intersects")
    keep = i != j
    i, j = i[keep], j[keep]
    if rule == "rook":
        line = shapely.relate_pattern(geoms[i], geoms[j], "****1****")  # reference: shapely DE-9IM
        i, j = i[line], j[line]
    w = np.zeros((len(geoms), len(geoms)))
    w[i, j] = 1.0
    return w


@pytest.mark.parametrize("rule", ["queen", "rook"])
def test_build_contiguity_from_a_geopackage_matches_shapely(boxes, tmp_path, capsys, rule):
    path, frame = boxes
    out = tmp_path / f"{rule}.txt"
    code, _, err = run(["build", path, out, "--rule", rule, "--id", "name"], capsys)
    assert code == 0, err
    # reference: numpy loadtxt of the 1-based triplets, assembled as Octave's spconvert does
    i, j, v = np.loadtxt(out, comments="%", unpack=True)
    got = sp.coo_array((v, (i.astype(int) - 1, j.astype(int) - 1)), shape=(10, 10)).toarray()
    np.testing.assert_array_equal(got, _shapely_adjacency(frame.geometry.to_numpy(), rule))
    assert sidecar(out) == frame["name"].tolist()


def test_build_standardizes_keeping_islands_from_geojson(boxes, tmp_path, capsys):
    _, frame = boxes
    source = tmp_path / "boxes.geojson"
    frame.to_file(source, driver="GeoJSON")
    out = tmp_path / "queen-row.mtx"
    argv = ["build", source, out, "--rule", "queen", "--id", "name", "--standardize", "row", "--islands", "keep"]
    code, _, err = run(argv, capsys)
    assert code == 0, err
    w = _shapely_adjacency(frame.geometry.to_numpy(), "queen")
    rows = w.sum(axis=1)
    w[rows > 0] /= rows[rows > 0, None]  # reference: numpy row sums; the island's row stays empty
    np.testing.assert_allclose(mtx(out).toarray(), w, rtol=1e-15)


# ---- audit -----------------------------------------------------------------------------------------
def test_audit_text_csv_and_json(boxes, tmp_path, capsys):
    path, frame = boxes
    weights = tmp_path / "queen.mtx"
    assert run(["build", path, weights, "--rule", "queen", "--id", "name", "--quiet"], capsys)[0] == 0
    report = vicino.read(weights).audit()
    code, text, _ = run(["audit", weights], capsys)
    assert code == 0 and text == repr(report) + "\n"
    code, table, _ = run(["audit", weights, "--format", "csv"], capsys)
    assert code == 0
    pd.testing.assert_frame_equal(pd.read_csv(io.StringIO(table)), report.to_frame())
    code, data, _ = run(["audit", weights, "--format", "json"], capsys)
    assert code == 0
    record = json.loads(data)
    # reference: networkx on the shapely adjacency: the far box is the one node of degree 0
    g = nx.from_numpy_array(_shapely_adjacency(frame.geometry.to_numpy(), "queen"))
    isolated = [frame["name"][k] for k, degree in g.degree() if degree == 0]
    assert record["islands"] == isolated == ["box-9"]
    assert record["components"] == {"count": nx.number_connected_components(g), "sizes": [9, 1]}
    assert record["links"] == 2 * g.number_of_edges() and record["units"] == 10
    assert [f["check"] for f in record["findings"]] == list(report.to_frame()["check"])
    out = tmp_path / "audit.json"
    assert run(["audit", weights, "--format", "json", "--out", out], capsys)[0] == 0
    assert json.loads(out.read_text()) == record


# ---- lag and moran -------------------------------------------------------------------------------------
@pytest.fixture
def k5(towns, tmp_path, capsys):
    path, _ = towns
    weights = tmp_path / "k5.mtx"
    assert run(["build", path, weights, "--k", 5, "--id", "code", "--quiet"], capsys)[0] == 0
    return weights


def test_lag_equals_scipy_product_in_the_tables_row_order(towns, k5, tmp_path, capsys):
    _, frame = towns
    shuffled = frame.sample(frac=1.0, random_state=1)  # rows in another order than the weights' units
    table = tmp_path / "values.csv"
    shuffled[["income", "code", "rent"]].to_csv(table, index=False)
    code, out, err = run(["lag", k5, table, "--columns", "income", "rent", "--id", "code"], capsys)
    assert code == 0, err
    got = pd.read_csv(io.StringIO(out), dtype={"code": str})
    assert list(got.columns) == ["code", "income_lag", "rent_lag"]
    assert got["code"].tolist() == shuffled["code"].tolist()
    w = mtx(k5)  # rows in the order of the frame's codes (the sidecar)
    for column in ("income", "rent"):
        expected = pd.Series(w @ frame[column].to_numpy(), index=frame["code"])  # reference: scipy W @ x
        np.testing.assert_allclose(got[f"{column}_lag"], expected[got["code"]], rtol=1e-12)


def test_lag_row_standardized_to_a_file(towns, k5, tmp_path, capsys):
    path, frame = towns
    out = tmp_path / "lags.csv"
    # the id column defaults to the first column of the table (here 'code')
    code, stdout, err = run(["lag", k5, path, "--columns", "income", "--standardize", "row", "--out", out], capsys)
    assert code == 0 and stdout == "" and err == ""
    w = mtx(k5).toarray()
    expected = (w / w.sum(axis=1, keepdims=True)) @ frame["income"].to_numpy()  # reference: numpy
    np.testing.assert_allclose(pd.read_csv(out)["income_lag"], expected, rtol=1e-12)


def test_moran_matches_the_published_formula(towns, k5, capsys):
    path, frame = towns
    argv = ["moran", k5, path, "--column", "income", "rent", "--id", "code", "--permutations", 99, "--seed", 4]
    code, out, err = run(argv, capsys)
    assert code == 0, err
    got = pd.read_csv(io.StringIO(out)).set_index("column")
    w = mtx(k5).toarray()
    for column in ("income", "rent"):
        z = frame[column].to_numpy() - frame[column].mean()
        # reference: Cliff and Ord (1981), I = (n / S0) z'Wz / z'z, E[I] = -1 / (n - 1)
        assert got.loc[column, "I"] == pytest.approx(N / w.sum() * (z @ w @ z) / (z @ z), rel=1e-12)
        assert got.loc[column, "expected"] == pytest.approx(-1 / (N - 1), rel=1e-15)
        # reference: Hope (1968), p = (M + 1) / (R + 1) with R = 99
        p = got.loc[column, "p_permutation"] * 100
        assert p == pytest.approx(round(p)) and 1 <= round(p) <= 100
        # reference: scipy.stats.norm two-sided tail of the z-score
        from scipy.stats import norm

        z_rand = got.loc[column, "z_randomization"]
        assert got.loc[column, "p_randomization"] == pytest.approx(2 * norm.sf(abs(z_rand)), rel=1e-12)
    assert (got["seed"] == 4).all() and (got["permutations"] == 99).all()


def test_moran_without_permutations_has_no_permutation_columns(towns, k5, capsys):
    path, _ = towns
    code, out, _ = run(["moran", k5, path, "--column", "rent", "--permutations", 0], capsys)
    assert code == 0
    columns = pd.read_csv(io.StringIO(out)).columns
    assert "p_randomization" in columns and "p_permutation" not in columns


def test_lag_and_moran_read_and_write_parquet_tables(towns, k5, tmp_path, capsys):
    _, frame = towns
    table = tmp_path / "values.parquet"
    frame.sample(frac=1.0, random_state=2).to_parquet(table, index=False)  # rows in another order
    out = tmp_path / "lags.parquet"
    code, stdout, err = run(["lag", k5, table, "--columns", "rent", "--id", "code", "--out", out], capsys)
    assert code == 0 and stdout == "", err
    got = pd.read_parquet(out).set_index("code")
    w = mtx(k5)
    expected = pd.Series(w @ frame["rent"].to_numpy(), index=frame["code"])  # reference: scipy W @ x
    np.testing.assert_allclose(got["rent_lag"], expected[got.index], rtol=1e-12)
    out = tmp_path / "moran.parquet"
    code, _, err = run(
        ["moran", k5, table, "--column", "rent", "--id", "code", "--permutations", 0, "--out", out], capsys
    )
    assert code == 0, err
    z = frame["rent"].to_numpy() - frame["rent"].mean()
    dense = w.toarray()
    # reference: Cliff and Ord (1981), I = (n / S0) z'Wz / z'z
    assert pd.read_parquet(out)["I"].iloc[0] == pytest.approx(N / dense.sum() * (z @ dense @ z) / (z @ z), rel=1e-12)


def test_a_file_that_is_not_parquet_exits_2_naming_it(towns, k5, tmp_path, capsys):
    bad = tmp_path / "values.parquet"
    bad.write_text("code,rent\n000,1.0\n")
    code, out, err = run(["lag", k5, bad, "--columns", "rent", "--id", "code"], capsys)
    assert code == 2 and out == ""
    assert "values.parquet" in err and "Parquet" in err and len(err.strip().splitlines()) == 1


# ---- convert --------------------------------------------------------------------------------------------------
@pytest.mark.parametrize("suffix", ["txt", "npz", "csv", "parquet"])
def test_convert_keeps_the_matrix_and_the_ids(k5, tmp_path, capsys, suffix):
    out = tmp_path / f"k5.{suffix}"
    code, stdout, err = run(["convert", k5, out], capsys)
    assert code == 0 and str(out) in stdout, err
    m = mtx(k5)
    if suffix == "txt":
        i, j, v = np.loadtxt(out, comments="%", unpack=True)  # reference: numpy, 1-based triplets
        other = sp.csr_array(sp.coo_array((v, (i.astype(int) - 1, j.astype(int) - 1)), shape=m.shape))
    elif suffix == "npz":
        other = sp.load_npz(out)  # reference: scipy.sparse.load_npz
    else:
        # reference: pandas (with pyarrow for Parquet)
        edges = pd.read_csv(out, dtype={"source": str, "target": str}) if suffix == "csv" else pd.read_parquet(out)
        at = pd.Index(sidecar(k5)).get_indexer
        other = sp.csr_array((edges["weight"], (at(edges["source"]), at(edges["target"]))), shape=m.shape)
    assert abs(m - other).max() == 0
    assert list(vicino.read(out).ids) == sidecar(k5)


# ---- demo, help, entry points --------------------------------------------------------------------------------
def test_demo_subcommand_runs(tmp_path, capsys):
    code, out, _ = run(["demo", "--out", tmp_path, "--permutations", 19], capsys)
    assert code == 0 and "Moran's I" in out and (tmp_path / "weights" / "queen.mtx").exists()


@pytest.mark.parametrize("command", ["demo", "build", "audit", "lag", "moran", "convert"])
def test_every_subcommand_has_help_with_an_example(command, capsys):
    code, out, _ = run([command, "--help"], capsys)
    assert code == 0 and f"usage: vicino {command}" in out and f"vicino {command} " in out.split("\nexample:\n")[1]


def test_version_and_the_console_script(capsys):
    code, out, _ = run(["--version"], capsys)
    assert code == 0 and out.strip() == f"vicino {vicino.__version__}"
    (script,) = entry_points(group="console_scripts", name="vicino")
    assert script.load() is cli.main


# ---- errors ------------------------------------------------------------------------------------------------------
def _without(frame, path, code):
    frame[frame["code"] != code].to_csv(path, index=False)
    return path


USER_ERRORS = {
    "no builder": (lambda p, t, w: ["build", p, t / "o.mtx"], "one of the arguments --rule --k --radius"),
    "two builders": (lambda p, t, w: ["build", p, t / "o.mtx", "--k", 2, "--radius", 1], "not allowed with"),
    "unknown command": (lambda p, t, w: ["frobnicate"], "invalid choice: 'frobnicate'"),
    "bad number": (lambda p, t, w: ["build", p, t / "o.mtx", "--k", "two"], "invalid int value: 'two'"),
    "missing input": (lambda p, t, w: ["build", t / "none.csv", t / "o.mtx", "--k", 2], "no such file"),
    "unknown suffix": (lambda p, t, w: ["build", p, t / "o.weights", "--k", 2], "cannot tell the weights format"),
    "k too large": (lambda p, t, w: ["build", p, t / "o.mtx", "--k", N], f"k = {N}"),
    "unknown id column": (lambda p, t, w: ["build", p, t / "o.mtx", "--k", 2, "--id", "zip"], "no column 'zip'"),
    "rule on points": (lambda p, t, w: ["build", p, t / "o.mtx", "--rule", "queen"], "--rule needs polygons"),
    "tolerance with k": (lambda p, t, w: ["build", p, t / "o.mtx", "--k", 2, "--tolerance", 1], "--tolerance"),
    "missing weights": (lambda p, t, w: ["audit", t / "none.mtx"], "no such file"),
    "unknown value column": (lambda p, t, w: ["lag", w, p, "--columns", "wealth"], "no column 'wealth'"),
    "id column as value": (lambda p, t, w: ["lag", w, p, "--columns", "code"], "is the id column"),
    "table suffix": (lambda p, t, w: ["lag", w, t / "v.xlsx", "--columns", "x"], "use .csv or .parquet"),
    "one permutation": (lambda p, t, w: ["moran", w, p, "--column", "x", "--permutations", 1], "permutations = 1"),
}


@pytest.mark.parametrize("case", sorted(USER_ERRORS))
def test_user_errors_exit_2_with_one_line(case, towns, k5, tmp_path, capsys):
    path, _ = towns
    argv, named = USER_ERRORS[case]
    code, _, err = run(argv(path, tmp_path, k5), capsys)
    assert code == 2
    lines = err.splitlines()
    assert len(lines) == 1 and lines[0].startswith("vicino: error: ") and named in lines[0], err
    assert "Traceback" not in err


def test_missing_and_extra_ids_are_named(towns, k5, tmp_path, capsys):
    _, frame = towns
    short = _without(frame, tmp_path / "short.csv", "007")
    code, _, err = run(["lag", k5, short, "--columns", "income"], capsys)
    assert code == 2 and len(err.splitlines()) == 1
    assert "1 unit(s) of the weights without a row: '007'" in err
    extra = pd.concat([frame, frame.iloc[[0]].assign(code="999")])
    extra.to_csv(tmp_path / "extra.csv", index=False)
    code, _, err = run(["moran", k5, tmp_path / "extra.csv", "--column", "income"], capsys)
    assert code == 2 and len(err.splitlines()) == 1 and "1 row(s) whose id is not a unit: '999'" in err
    frame.assign(code=frame["code"].where(frame.index != 3, "000")).to_csv(tmp_path / "twice.csv", index=False)
    code, _, err = run(["lag", k5, tmp_path / "twice.csv", "--columns", "income"], capsys)
    assert code == 2 and len(err.splitlines()) == 1 and "'000'" in err and "repeat" in err


def test_text_in_a_value_column_and_missing_values_are_named(towns, k5, tmp_path, capsys):
    _, frame = towns
    frame.assign(income=frame["income"].astype(object).where(frame.index != 2, "about 40")).to_csv(
        tmp_path / "text.csv", index=False
    )
    code, _, err = run(["lag", k5, tmp_path / "text.csv", "--columns", "income"], capsys)
    assert code == 2 and len(err.splitlines()) == 1
    assert "'income'" in err and "not numeric" in err and "'about 40'" in err
    frame.assign(income=frame["income"].where(frame.index != 5)).to_csv(tmp_path / "gap.csv", index=False)
    code, _, err = run(["moran", k5, tmp_path / "gap.csv", "--column", "income"], capsys)
    assert code == 2 and len(err.splitlines()) == 1 and "'005'" in err and "missing" in err


def test_islands_refused_by_row_standardization_point_to_the_option(boxes, tmp_path, capsys):
    path, _ = boxes
    code, _, err = run(
        ["build", path, tmp_path / "q.mtx", "--rule", "queen", "--id", "name", "--standardize", "row"], capsys
    )
    assert code == 2 and len(err.splitlines()) == 1 and "'box-9'" in err and "--islands keep" in err
    assert not (tmp_path / "q.mtx").exists()


def test_points_and_polygons_are_checked_against_the_builder(boxes, tmp_path, capsys):
    path, frame = boxes
    code, _, err = run(["build", path, tmp_path / "k.mtx", "--k", 2], capsys)
    assert code == 2 and "need points, but" in err and "--rule" in err
    points = frame.set_geometry(frame.geometry.centroid).to_crs("EPSG:4326")
    points.to_file(tmp_path / "centres.geojson", driver="GeoJSON")
    code, _, err = run(["build", tmp_path / "centres.geojson", tmp_path / "q.mtx", "--rule", "rook"], capsys)
    assert code == 2 and "--rule needs polygons" in err
    # longitude/latitude with the euclidean metric: built, with one warning line
    code, _, err = run(["build", tmp_path / "centres.geojson", tmp_path / "k.mtx", "--k", 2], capsys)
    assert code == 0 and err.splitlines() == [err.strip()] and "vicino: warning: " in err and "great_circle" in err


def test_exit_codes_and_debug_in_a_subprocess(towns, tmp_path):
    path, _ = towns
    ok = run_process(["build", path, "k.mtx", "--k", 3, "--id", "code", "--quiet"], tmp_path)
    assert ok.returncode == 0 and ok.stderr == "" and ok.stdout == ""
    bad = run_process(["build", path, "k.mtx", "--k", 3, "--id", "zip"], tmp_path)
    assert bad.returncode == 2 and len(bad.stderr.splitlines()) == 1 and "'zip'" in bad.stderr
    debug = run_process(["build", path, "k.mtx", "--k", 3, "--id", "zip", "--debug"], tmp_path)
    assert debug.returncode == 2
    assert debug.stderr.startswith("Traceback") and "IdError" in debug.stderr
    assert debug.stderr.splitlines()[-1] == bad.stderr.strip()
    usage = run_process([], tmp_path)
    assert usage.returncode == 2 and len(usage.stderr.splitlines()) == 1


def test_an_internal_error_exits_1_and_asks_for_a_report(k5, capsys, monkeypatch):
    def broken(self):
        raise RuntimeError("the audit fell over")

    monkeypatch.setattr(vicino.Weights, "audit", broken)
    code, out, err = run(["audit", k5], capsys)
    assert code == 1 and out == ""
    lines = err.splitlines()
    assert len(lines) == 1 and "internal error" in lines[0] and "report" in lines[0]
    assert "RuntimeError: the audit fell over" in lines[0] and "--debug" in lines[0]
    code, _, err = run(["audit", k5, "--debug"], capsys)
    assert code == 1 and "Traceback" in err and 'raise RuntimeError("the audit fell over")' in err


def test_an_internal_error_exits_1_in_a_subprocess(k5, tmp_path):
    code = (
        "import sys, vicino\nfrom vicino import cli\n"
        "def broken(self): raise RuntimeError('boom')\n"
        "vicino.Weights.audit = broken\n"
        f"sys.exit(cli.main(['audit', {str(k5)!r}]))\n"
    )
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 1 and len(done.stderr.splitlines()) == 1 and "internal error" in done.stderr


# ---- progress ---------------------------------------------------------------------------------------------------
class _Terminal(io.StringIO):
    """A stream that says it is a terminal and tells when something was written."""

    def __init__(self):
        super().__init__()
        self.written = threading.Event()

    def isatty(self):
        return True

    def write(self, text):
        self.written.set()
        return super().write(text)


def test_the_ticker_names_the_step_and_its_seconds():
    stream = _Terminal()
    with cli.Progress(True, stream, after=0.0, every=0.01).step("k nearest neighbours"):
        assert stream.written.wait(60)  # the body outlasts the first tick
    text = stream.getvalue()
    assert text.startswith("\rk nearest neighbours ... 0 s") and " done in " in text and text.endswith(" s\n")


def test_no_ticker_when_quiet_or_not_a_terminal(towns, tmp_path, capsys):
    stream = _Terminal()
    with cli.Progress(False, stream, after=0.0, every=0.01).step("silent"):
        pass
    assert stream.getvalue() == ""
    path, _ = towns
    code, _, err = run(["build", path, tmp_path / "k.mtx", "--k", 3], capsys)  # capsys: stderr is no terminal
    assert code == 0 and err == ""


# ---- the README ----------------------------------------------------------------------------------------------------
def test_readme_command_line_examples_run(tmp_path, capsys, monkeypatch):
    import re
    import shlex
    from pathlib import Path

    text = (Path(__file__).resolve().parents[3] / "README.md").read_text()
    block = re.search(r"## The command line\n.*?```bash\n(.*?)```", text, re.S)
    assert block is not None, "the README's command line section moved; update this test"
    lines = [shlex.split(line, comments=True) for line in block.group(1).splitlines() if line.strip()]
    assert [words[1] for words in lines] == ["demo", "build", "audit", "lag", "moran", "convert"]
    monkeypatch.chdir(tmp_path)
    outputs = {}
    for words in lines:
        assert words[0] == "vicino"
        code, out, err = run(words[1:], capsys)
        assert code == 0, (words, err)
        outputs[words[1]] = out
    # reference: k nearest reaches every unit (k < n)  # common practice
    assert json.loads(outputs["audit"])["islands"] == []
    places = pd.read_csv(tmp_path / "demo-out" / "settlements.csv", index_col=0)
    w = mtx(tmp_path / "k6.mtx").toarray()
    w /= w.sum(axis=1, keepdims=True)
    lags = pd.read_csv(tmp_path / "lags.csv")
    for column in ("cistern_share", "population"):
        # reference: numpy, row-standardized W @ x on the matrix scipy.io.mmread reads
        np.testing.assert_allclose(lags[f"{column}_lag"], w @ places[column].to_numpy(), rtol=1e-12)
    z = places["cistern_share"].to_numpy() - places["cistern_share"].mean()
    shown = pd.read_csv(io.StringIO(outputs["moran"]))["I"].iloc[0]
    # reference: Cliff and Ord (1981), I = (n / S0) z'Wz / z'z on the row-standardized matrix
    assert shown == pytest.approx(len(z) / w.sum() * (z @ w @ z) / (z @ z), rel=1e-12)
    # the polygon example in the prose parses
    inline = re.search(r"`(vicino build districts\.gpkg [^`]*)`", text)
    assert inline is not None
    args = cli.build_parser().parse_args(shlex.split(inline.group(1))[1:])
    assert (args.rule, args.id) == ("queen", "name")
