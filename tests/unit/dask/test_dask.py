"""The Dask route against the in-memory builders, on a real 2-process LocalCluster.

Each distributed result is compared with vicino's in-memory result on the
same data (itself checked against scipy, shapely and published formulas in
tests/reference), links identical and numbers to 1e-12.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

import vicino

dask = pytest.importorskip("dask")
dd = pytest.importorskip("dask.dataframe")
distributed = pytest.importorskip("distributed")
vd = pytest.importorskip("vicino.dask")

# one pytest-xdist worker runs every Dask test, so the session shares one cluster
pytestmark = pytest.mark.xdist_group("dask")


def quiet(fn, *args, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", vicino.DuplicateLocationWarning)
        warnings.simplefilter("ignore", UserWarning)
        return fn(*args, **kwargs)


def same(table, ref):
    """Links identical (ids, order, weights, facts) and the same units and recipe."""
    w = quiet(table.to_weights)
    assert w.ids.equals(ref.ids)
    assert w.recipe == ref.recipe
    a, b = w.to_edges(), ref.to_edges()
    pd.testing.assert_frame_equal(a[["source", "target"]], b[["source", "target"]])
    np.testing.assert_allclose(a.drop(columns=["source", "target"]), b.drop(columns=["source", "target"]), rtol=1e-12)
    assert list(w.islands) == list(ref.islands)
    return w


def points(n, seed=0):
    rng = np.random.default_rng(seed)
    df = pd.DataFrame({"x": rng.random(n), "y": rng.random(n)}, index=pd.Index(np.arange(n) * 3 + 7, name="unit"))
    df.iloc[20:26, :2] = df.iloc[5, :2].to_numpy()  # duplicate locations
    df.iloc[40] = [5.0, 5.0]  # far from everyone: an island for small radii
    return df


def with_empty(df, sizes):
    """A Dask DataFrame whose partitions have the given sizes (zeros give empty partitions)."""
    cuts = np.concatenate([[0], np.cumsum(sizes)])
    parts = [df.iloc[a:b] for a, b in zip(cuts[:-1], cuts[1:])]
    import dask

    return dd.from_delayed([dask.delayed(p.copy)() for p in parts], meta=df.iloc[:0], verify_meta=False)


def test_k_nearest_equals_in_memory_with_duplicates_and_rounds(dask_client):
    df = points(600)
    # 12 spatial partitions of ~50 units: halos cross partitions, in more than one round
    # (k = 4 on 4 partitions: test_large_exchanges_go_through_a_dask_shuffle_or_hash_buckets)
    table = vd.k_nearest(dd.from_pandas(df, npartitions=3), 9, npartitions=12).persist()
    same(table, quiet(vicino.k_nearest, df, 9))
    assert table.npartitions == 12
    assert sum(table.halo_sizes()) > 0


def test_k_nearest_empty_partitions_and_partitions_smaller_than_k(dask_client):
    df = points(120, seed=1)
    ddf = with_empty(df, [0, 50, 0, 3, 67, 0])  # input partitions kept: empty ones and one with 3 < k units
    table = vd.k_nearest(ddf, 6, partition=False, check_ids=False)
    assert table.npartitions == 6
    same(table, quiet(vicino.k_nearest, df, 6))


def test_k_nearest_ties_on_a_lattice_go_to_the_lower_position(dask_client):
    # a square lattice: every unit has 4 neighbours at one distance, ties broken by position
    g = np.arange(12.0)
    xy = np.array([(a, b) for a in g for b in g])
    df = pd.DataFrame(xy[::-1].copy(), columns=["lon", "lat"])  # reversed order: positions differ from the grid's
    table = vd.k_nearest(dd.from_pandas(df, npartitions=4), 3, npartitions=5, check_ids=False)
    same(table, vicino.k_nearest(df, 3))


def test_k_nearest_great_circle_and_id_column(dask_client):
    rng = np.random.default_rng(3)
    df = pd.DataFrame(
        {
            "code": [f"u{i:03d}" for i in range(300)],
            "lon": rng.uniform(-180, 180, 300),
            "lat": rng.uniform(-89, 89, 300),
        }
    )
    table = vd.k_nearest(
        dd.from_pandas(df, npartitions=3), 5, metric="great_circle", ids="code", npartitions=6, check_ids=False
    )
    ref = vicino.k_nearest(df[["lon", "lat"]], 5, metric="great_circle", ids=df["code"])
    w = quiet(table.to_weights)
    pd.testing.assert_frame_equal(
        w.to_edges().astype({"source": object, "target": object}),
        ref.to_edges().astype({"source": object, "target": object}),
        rtol=1e-12,
    )


def test_within_distance_islands_boundaries_and_empty_partitions(dask_client):
    # a lattice at spacing 0.1 with radius 0.1: every link is exactly at the radius (inclusive), and
    # the spatial cuts fall between lattice rows
    g = np.arange(10) / 10
    df = pd.DataFrame([(a, b) for a in g for b in g], columns=["x", "y"])
    df.loc[len(df)] = [3.0, 3.0]  # an island
    df.loc[len(df)] = [3.0, 3.0]  # and its duplicate (linked to it at distance 0)
    df.loc[len(df)] = [-4.0, 1.0]  # an island
    ref = quiet(vicino.within_distance, df, 0.1)
    same(vd.within_distance(dd.from_pandas(df, npartitions=4), 0.1, npartitions=7, check_ids=False), ref)
    same(vd.within_distance(with_empty(df, [0, 30, 0, 40, len(df) - 70]), 0.1, partition=False, check_ids=False), ref)


def test_contiguity_queen_rook_border_length_tolerance(dask_client):
    shapely = pytest.importorskip("shapely")
    dgpd = pytest.importorskip("dask_geopandas")
    gpd = pytest.importorskip("geopandas")
    cells = [shapely.box(i, j, i + 1, j + 1) for i in range(8) for j in range(6)]
    cells[7] = shapely.box(7 + 0.001, 1, 8, 2)  # a gap of 0.001 at one border: closed by the tolerance
    cells.append(shapely.box(20, 20, 21, 21))  # an island
    cells.append(shapely.Polygon())  # an empty unit (an island, with a warning in memory)
    frame = gpd.GeoDataFrame({"name": [f"c{i}" for i in range(len(cells))]}, geometry=cells)
    ddf = dgpd.from_geopandas(frame, npartitions=3)
    for rule, kw in (("queen", {}), ("rook", {"weight": "border_length"}), ("queen", {"tolerance": 0.01})):
        table = vd.contiguity(ddf, rule, npartitions=5, **kw, check_ids=False)
        w = same(table, quiet(vicino.contiguity, frame, rule, **kw))
        np.testing.assert_allclose(w.perimeter, quiet(vicino.contiguity, frame, rule, **kw).perimeter, rtol=1e-12)


def test_lag_standardize_and_moran_equal_in_memory(dask_client):
    df = points(500, seed=4)
    # persisted, as the docs advise for a table used more than once: each use below
    # would otherwise build the links again
    table = vd.k_nearest(dd.from_pandas(df, npartitions=2), 6, npartitions=6, check_ids=False).persist()
    ref = quiet(vicino.k_nearest, df, 6)
    rng = np.random.default_rng(5)
    v = pd.Series(df["x"].to_numpy() * 3 + rng.normal(size=len(df)), index=df.index, name="price")
    shuffled = dd.from_pandas(v.sample(frac=1.0, random_state=1), npartitions=3)  # any order, any partitions
    row = table.standardize("row").persist()
    same(row, ref.standardize("row"))
    lagged = vd.lag(shuffled, row).compute()
    assert lagged.name == "price"
    np.testing.assert_allclose(lagged.reindex(df.index), ref.standardize("row").lag(v), rtol=1e-12, atol=1e-12)
    both = pd.DataFrame({"a": v, "b": -2 * v})
    lag2 = vd.lag(dd.from_pandas(both, npartitions=2), row).compute().reindex(df.index)
    np.testing.assert_allclose(lag2.to_numpy(), ref.standardize("row").lag(both).to_numpy(), rtol=1e-12, atol=1e-12)
    for w_d, w_m in ((table, ref), (row, ref.standardize("row"))):
        got, want = vd.moran(shuffled, w_d), vicino.moran(v, w_m, permutations=0)
        for name in ("statistic", "expected", "s0", "s1", "s2"):
            assert getattr(got, name) == pytest.approx(getattr(want, name), rel=1e-12, abs=1e-15)
        for inf in ("normality", "randomization"):
            for part in ("variance", "z", "p_value"):
                assert getattr(getattr(got, inf), part) == pytest.approx(getattr(getattr(want, inf), part), rel=1e-10)
    perm = vd.moran(shuffled, table, permutations=99, seed=7)
    want = vicino.moran(v, ref, permutations=99, seed=7)
    assert perm.permutation.p_value == want.permutation.p_value
    np.testing.assert_array_equal(perm.permutation.draws, want.permutation.draws)


def test_large_exchanges_go_through_a_dask_shuffle_or_hash_buckets(dask_client, monkeypatch):
    # exchanges of more than `_DIRECT` pieces run as a Dask join and shuffle, and more than
    # `_BUCKET` units split into hash buckets of the id: both routes equal the in-memory results
    df = points(300, seed=21)
    ref = quiet(vicino.k_nearest, df, 4)
    v = pd.Series(np.cos(df["x"].to_numpy() * 5) + df["y"].to_numpy(), index=df.index)
    given = dd.from_pandas(v.sample(frac=1.0, random_state=3), npartitions=3)
    ids = [dask.delayed(pd.DataFrame)({"_id": np.arange(k, k + 40)}) for k in (0, 100, 39)]  # 39 twice
    monkeypatch.setattr(vd, "_DIRECT", 0)
    table = vd.k_nearest(dd.from_pandas(df, npartitions=2), 4, npartitions=3).persist()  # ids checked
    same(table, ref)
    np.testing.assert_allclose(vd.lag(given, table).compute().reindex(df.index), ref.lag(v), rtol=1e-12, atol=1e-12)
    with pytest.raises(vicino.IdError, match=r"1 id\(s\) repeat: 39"):
        vd._check_unique(ids, 120, np.int64)
    monkeypatch.setattr(vd, "_DIRECT", 4096)
    monkeypatch.setattr(vd, "_BUCKET", 70)
    np.testing.assert_allclose(vd.lag(given, table).compute().reindex(df.index), ref.lag(v), rtol=1e-12, atol=1e-12)
    got, want = vd.moran(given, table), vicino.moran(v, ref, permutations=0)
    assert got.statistic == pytest.approx(want.statistic, rel=1e-12)
    assert got.randomization.variance == pytest.approx(want.randomization.variance, rel=1e-12)
    with pytest.raises(vicino.IdError, match=r"1 id\(s\) repeat: 39"):
        vd._check_unique(ids, 120, np.int64)
    vd._check_unique(ids[:2], 80, np.int64)  # no repeat: no error
    # int32 ids in the values meet int64 unit ids; an id that is no unit is refused
    narrow = v.set_axis(v.index.astype(np.int32))
    np.testing.assert_allclose(
        vd.lag(dd.from_pandas(narrow, npartitions=2), table).compute().reindex(df.index), ref.lag(v), rtol=1e-12
    )
    with pytest.raises(vicino.IdError, match="not an id"):
        vd.lag(dd.from_pandas(pd.concat([v, pd.Series([1.0], index=[-1])]), npartitions=2), table).compute()


def test_moran_on_asymmetric_weights_with_islands(dask_client):
    df = points(300, seed=6)
    v = pd.Series(np.sin(df["x"].to_numpy() * 7) + df["y"].to_numpy(), index=df.index)
    table = vd.within_distance(dd.from_pandas(df, npartitions=3), 0.07, npartitions=4, check_ids=False)
    ref = quiet(vicino.within_distance, df, 0.07)
    assert len(ref.islands)
    got, want = vd.moran(dd.from_pandas(v, npartitions=2), table), vicino.moran(v, ref, permutations=0)
    assert got.statistic == pytest.approx(want.statistic, rel=1e-12)
    assert got.randomization.variance == pytest.approx(want.randomization.variance, rel=1e-12)
    knn = vd.k_nearest(
        dd.from_pandas(df, npartitions=3), 3, npartitions=4, check_ids=False
    )  # asymmetric: S1 needs w_ji across partitions
    got, want = (
        vd.moran(dd.from_pandas(v, npartitions=2), knn),
        vicino.moran(v, quiet(vicino.k_nearest, df, 3), permutations=0),
    )
    for name in ("statistic", "s1", "s2"):
        assert getattr(got, name) == pytest.approx(getattr(want, name), rel=1e-12)
    assert got.normality.variance == pytest.approx(want.normality.variance, rel=1e-12)


def test_edge_table_to_parquet_and_islands_refused_by_row_standardization(dask_client, tmp_path):
    df = points(200, seed=8)
    table = vd.within_distance(dd.from_pandas(df, npartitions=2), 0.05, check_ids=False).persist()
    ref = quiet(vicino.within_distance, df, 0.05)
    table.to_parquet(tmp_path / "links")
    back = pd.read_parquet(tmp_path / "links").sort_values(["source", "target"]).reset_index(drop=True)
    want = ref.to_edges().sort_values(["source", "target"]).reset_index(drop=True)
    pd.testing.assert_frame_equal(back, want, check_dtype=False)
    with pytest.raises(vicino.IslandError, match="no neighbours"):
        table.standardize("row").edges.compute()
    units = table.units.compute()
    assert sorted(units["id"]) == sorted(df.index)  # islands listed too


def test_worker_errors_come_back_as_the_same_vicino_errors(dask_client):
    df = points(100, seed=9)
    bad = df.copy()
    bad.iloc[60, 0] = np.nan
    with pytest.raises(vicino.InvalidInputError) as memory:
        vicino.k_nearest(bad, 3)
    with pytest.raises(vicino.InvalidInputError) as worker:
        vd.k_nearest(dd.from_pandas(bad, npartitions=2), 3)
    assert str(worker.value) == str(memory.value)
    bad.iloc[60, 0] = np.inf
    with pytest.raises(vicino.InvalidInputError) as memory:
        vicino.within_distance(bad, 0.1)
    with pytest.raises(vicino.InvalidInputError) as worker:
        vd.within_distance(dd.from_pandas(bad, npartitions=2), 0.1)
    assert str(worker.value) == str(memory.value)
    small = df.iloc[:4]
    for call in (lambda f: f(small, 4), lambda f: f(small, 0)):
        with pytest.raises(vicino.InvalidParameterError) as memory:
            call(vicino.k_nearest)
        with pytest.raises(vicino.InvalidParameterError) as worker:
            call(lambda d, k: vd.k_nearest(dd.from_pandas(d, npartitions=2), k))
        assert str(worker.value) == str(memory.value)
    with pytest.raises(vicino.InvalidParameterError, match="radius"):
        vd.within_distance(dd.from_pandas(df, npartitions=2), -1.0)
    repeated = df.set_index(pd.Index(np.arange(len(df)) % 60))  # ids repeat across partitions only
    with pytest.raises(vicino.IdError, match="repeat"):
        vd.k_nearest(dd.from_pandas(repeated, npartitions=2, sort=False), 3)
    with pytest.raises(vicino.InvalidTypeError):
        vd.k_nearest(df, 3)
    with pytest.raises(vicino.InvalidInputError, match="no units"):
        vd.k_nearest(dd.from_pandas(df.iloc[:0], npartitions=1), 3)
    with pytest.raises(vicino.IdError, match="name a column"):
        vd.k_nearest(dd.from_pandas(df, npartitions=2), 3, ids="nowhere")
    with pytest.raises(vicino.InvalidParameterError, match="contiguity rule"):
        vd.contiguity(dd.from_pandas(df, npartitions=2), "bishop")
    table = vd.k_nearest(dd.from_pandas(df, npartitions=2), 3).persist()
    v = pd.Series(np.arange(len(df), dtype=float), index=df.index)
    with pytest.raises(vicino.IdError, match="without values"):
        vd.lag(dd.from_pandas(v.iloc[:-3], npartitions=2), table).compute()
    with pytest.raises(vicino.InvalidValuesError, match="constant"):
        vd.moran(dd.from_pandas(v * 0 + 1, npartitions=2), table)
    vicino.set_memory_limit(1000)
    try:
        with pytest.raises(vicino.TooLargeError, match="permutations=0"):
            vd.moran(dd.from_pandas(v, npartitions=2), table, permutations=99)
    finally:
        vicino.set_memory_limit(None)


def test_readme_example_runs_and_equals_in_memory(dask_client, tmp_path, monkeypatch):
    import re
    from pathlib import Path

    text = (Path(__file__).resolve().parents[3] / "README.md").read_text()
    block = re.search(r"## Beyond one machine: `vicino.dask`.*?```python\n(.*?)```", text, re.S)
    assert block is not None, "the README's Dask example moved; update this test"
    code = block.group(1).replace("Client(LocalCluster(n_workers=2, threads_per_worker=1))", "CLIENT")
    monkeypatch.chdir(tmp_path)
    scope: dict = {"CLIENT": dask_client}
    exec(compile(code, "README.md", "exec"), scope)
    ref = vicino.k_nearest(scope["frame"], 8).standardize("row")
    same(scope["links"], ref)
    lagged = pd.read_parquet(tmp_path / "lagged")["lag"]
    values = scope["values"].compute()
    np.testing.assert_allclose(lagged.reindex(ref.ids), ref.lag(values), rtol=1e-12, atol=1e-12)


def test_point_geometries_of_a_dask_geopandas_frame(dask_client):
    dgpd = pytest.importorskip("dask_geopandas")
    gpd = pytest.importorskip("geopandas")
    df = points(150, seed=12)
    frame = gpd.GeoDataFrame(geometry=gpd.points_from_xy(df["x"], df["y"]), index=df.index)
    table = vd.within_distance(dgpd.from_geopandas(frame, npartitions=3), 0.1, partition=False, check_ids=False)
    same(table, quiet(vicino.within_distance, frame, 0.1))
