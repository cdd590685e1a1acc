"""Bad inputs to geary, getis_ord, join_counts and compare raise vicino errors with useful
messages; islands and odd shapes behave as documented; the results display themselves."""

from __future__ import annotations

import dataclasses

import numpy as np
import pandas as pd
import pytest
import scipy.sparse as sp

import vicino

IDS = [f"tract-{c}" for c in "abcdefghijklmnopqrst"]  # 20 units
GLOBAL = [vicino.geary, vicino.getis_ord]


@pytest.fixture(scope="module")
def w():
    pts = np.random.default_rng(0).uniform(0, 1, size=(20, 2))
    return vicino.k_nearest(pts, 3, ids=IDS)


@pytest.fixture(scope="module")
def x():
    return np.random.default_rng(1).exponential(size=20)


@pytest.fixture(scope="module")
def b():
    return np.array(["wet", "dry"] * 10)


# ---------------------------------------------------------------- values
@pytest.mark.parametrize("fn", GLOBAL)
@pytest.mark.parametrize("bad", [np.nan, np.inf])
def test_non_finite_values_name_ids(w, x, fn, bad):
    y = x.copy()
    y[[2, 11]] = bad
    with pytest.raises(vicino.InvalidValuesError) as info:
        fn(y, w)
    assert isinstance(info.value, ValueError)
    assert info.value.ids == ["tract-c", "tract-l"] and info.value.count == 2


@pytest.mark.parametrize("fn", GLOBAL)
@pytest.mark.parametrize("value", [0.0, 7.25])
def test_constant_values(w, fn, value):
    with pytest.raises(vicino.InvalidValuesError, match=r"constant|positive values"):
        fn(np.full(20, value), w)


@pytest.mark.parametrize("fn", GLOBAL)
def test_wrong_length_and_shape(w, fn):
    with pytest.raises(vicino.InvalidValuesError, match="19"):
        fn(np.arange(19, dtype=float), w)
    with pytest.raises(vicino.InvalidValuesError, match="shape"):
        fn(np.ones((20, 2)), w)
    with pytest.raises(vicino.InvalidTypeError):
        fn(np.array(list("abcdefghijklmnopqrst")), w)


@pytest.mark.parametrize("fn", [vicino.geary, vicino.getis_ord, vicino.join_counts])
def test_misaligned_series_is_refused(w, x, fn):
    values = pd.Series(x > 1 if fn is vicino.join_counts else x, index=IDS[::-1])
    with pytest.raises(vicino.IdError, match="another order"):
        fn(values, w)
    values = pd.Series(x, index=[f"other-{i}" for i in range(20)])
    with pytest.raises(vicino.IdError, match="index does not match"):
        fn(values, w)


def test_getis_ord_refuses_negative_values_by_id(w, x):
    y = x.copy()
    y[4] = -0.5
    with pytest.raises(vicino.InvalidValuesError, match="negative") as info:
        vicino.getis_ord(y, w)
    assert info.value.ids == ["tract-e"]
    assert "non-negative" in str(info.value)


def test_getis_ord_needs_two_positive_values(w):
    y = np.zeros(20)
    with pytest.raises(vicino.InvalidValuesError, match="at least two units with positive values, got 0"):
        vicino.getis_ord(y, w)
    y[3] = 2.0
    with pytest.raises(vicino.InvalidValuesError, match="got 1"):
        vicino.getis_ord(y, w)


def test_join_counts_labels(w, b):
    r = vicino.join_counts(b, w, permutations=0)
    assert r.labels == ("dry", "wet") and r.label_counts == (10, 10)
    assert r.like_of("wet").join == "both wet" and r.like_of("dry").join == "both dry"
    with pytest.raises(vicino.InvalidParameterError, match="not one of the labels"):
        r.like_of("damp")
    # booleans and 0 / 1 give the same counts (True is the second label, like 1)
    flags = b == "wet"
    rb = vicino.join_counts(flags, w, permutations=0)
    ri = vicino.join_counts(flags.astype(int), w, permutations=0)
    assert rb.labels == (False, True)
    assert [j.count for j in rb.joins] == [j.count for j in ri.joins] == [j.count for j in r.joins]


def test_join_counts_refuse_more_or_fewer_than_two_labels(w, b):
    three = b.copy()
    three[5] = "damp"
    with pytest.raises(vicino.InvalidValuesError, match="3 distinct labels"):
        vicino.join_counts(three, w)
    with pytest.raises(vicino.InvalidValuesError, match="same label"):
        vicino.join_counts(np.ones(20), w)
    with pytest.raises(vicino.InvalidValuesError, match="3 distinct"):
        vicino.join_counts(np.arange(20) % 3, w)


def test_join_counts_refuse_missing_labels(w, b):
    s = pd.Series(b, index=IDS, dtype=object)
    s.iloc[7] = None
    with pytest.raises(vicino.InvalidValuesError, match="tract-h") as info:
        vicino.join_counts(s, w)
    assert info.value.ids == ["tract-h"]
    with pytest.raises(vicino.InvalidValuesError, match="shape"):
        vicino.join_counts(np.ones((20, 2)), w)
    with pytest.raises(vicino.InvalidValuesError, match="19 rows"):
        vicino.join_counts(b[:19], w)


# ---------------------------------------------------------------- weights and parameters
@pytest.mark.parametrize("fn", [vicino.geary, vicino.getis_ord, vicino.join_counts])
def test_weights_and_parameters(w, x, fn):
    y = x > 1 if fn is vicino.join_counts else x
    with pytest.raises(vicino.InvalidTypeError, match=r"vicino\.Weights"):
        fn(y, w.to_scipy())
    with pytest.raises(vicino.InvalidParameterError, match="permutations = 1"):
        fn(y, w, permutations=1)
    with pytest.raises(vicino.InvalidParameterError, match="alternative"):
        fn(y, w, alternative="bigger")
    with pytest.raises(vicino.InvalidParameterError):
        fn(y, w, seed=-1)


@pytest.mark.parametrize("fn", [vicino.geary, vicino.getis_ord, vicino.join_counts])
def test_self_links_and_tiny_weights_are_refused(fn):
    a = sp.csr_array(np.array([[1.0, 1, 0, 0], [1, 0, 1, 0], [0, 1, 0, 1], [0, 0, 1, 0]]))
    y = np.array([1.0, 0.0, 1.0, 0.0]) if fn is vicino.join_counts else np.array([1.0, 2.0, 3.0, 5.0])
    with pytest.raises(vicino.InvalidMatrixError, match="linked to themselves"):
        fn(y, vicino.from_matrix(a))
    one = vicino.from_matrix(sp.csr_array((1, 1)))
    if fn is not vicino.join_counts:  # one unit carries one label, refused before
        with pytest.raises(vicino.InvalidParameterError, match="at least 4 units, got 1"):
            fn(np.array([1.0]), one)
    three = vicino.from_matrix(sp.csr_array(np.array([[0.0, 1, 0], [1, 0, 1], [0, 1, 0]])))
    with pytest.raises(vicino.InvalidParameterError, match="at least 4 units, got 3"):
        fn(np.array([1.0, 0.0, 1.0]) if fn is vicino.join_counts else np.array([1.0, 2.0, 4.0]), three)
    empty = vicino.from_matrix(sp.csr_array((5, 5)))
    with pytest.raises(vicino.InvalidMatrixError, match="no links"):
        fn(np.array([1.0, 0.0, 1.0, 0.0, 1.0]), empty)


@pytest.mark.parametrize("fn", [vicino.geary, vicino.getis_ord, vicino.join_counts])
def test_islands_stay_in_n_without_links(fn):
    # units 4 and 5 have no neighbours: they count in n and in the values' moments, with no links
    a = np.zeros((6, 6))
    for i, j in ((0, 1), (1, 2), (2, 3), (3, 0)):
        a[i, j] = a[j, i] = 1.0
    w = vicino.from_matrix(sp.csr_array(a))
    assert list(w.islands) == [4, 5]
    y = np.array([1.0, 0.0, 1.0, 1.0, 0.0, 1.0]) if fn is vicino.join_counts else np.array([1.0, 2, 4, 3, 9, 6])
    r = fn(y, w, permutations=0)
    assert r.n == 6
    if fn is vicino.geary:
        z = y - y.mean()
        c = 5 * (a * (y[:, None] - y[None, :]) ** 2).sum() / (2 * a.sum() * (z @ z))  # Geary (1954)
        assert r.statistic == pytest.approx(c, rel=1e-12)
    elif fn is vicino.getis_ord:
        g = (y @ a @ y) / (y.sum() ** 2 - (y**2).sum())  # Getis and Ord (1992)
        assert r.statistic == pytest.approx(g, rel=1e-12)
    else:
        assert r.like_of(1.0).count == 0.5 * y @ a @ y  # Cliff and Ord (1981), half sum
        assert r.unlike.count == 2.0  # links 0-1 and 1-2 join unlike labels (by hand)


# ---------------------------------------------------------------- results
def test_results_are_frozen_and_display(w, x, b):
    for r, word in (
        (vicino.geary(x, w, permutations=19, seed=1), "Geary's C"),
        (vicino.getis_ord(x, w, permutations=19, seed=1), "Getis-Ord G"),
        (vicino.join_counts(b, w, permutations=19, seed=1), "Join counts"),
    ):
        with pytest.raises(dataclasses.FrozenInstanceError):
            r.n = 3  # type: ignore[misc]
        assert word in str(r) and word in r._repr_html_()
        assert "k_nearest" in str(r)  # the weights' recipe
        t = r.table()
        assert t["p_value"].between(0, 1).all()
    g = vicino.getis_ord(x, w, permutations=0)
    assert list(g.table().index) == ["randomization"]  # no normality row for G
    c = vicino.geary(x, w, permutations=9, seed=2)
    assert list(c.table().index) == ["normality", "randomization", "permutation (R=9)"]
    assert "C < 1" in str(c)
    j = vicino.join_counts(b, w, permutations=9, seed=2)
    assert len(j.table()) == 9  # three joins, three assumptions


def test_random_seed_is_reported_and_reproduces(w, x):
    a = vicino.geary(x, w, permutations=29)
    c = vicino.geary(x, w, permutations=29, seed=a.permutation.seed)
    assert a.permutation.draws.tobytes() == c.permutation.draws.tobytes()
    assert not a.permutation.draws.flags.writeable


# ---------------------------------------------------------------- compare
@pytest.fixture(scope="module")
def candidates(w):
    pts = np.random.default_rng(0).uniform(0, 1, size=(20, 2))
    return {
        "3 nearest": w,
        "5 nearest, row": vicino.k_nearest(pts, 5, ids=IDS).standardize("row"),
        "within 0.2": vicino.within_distance(pts, 0.2, ids=IDS),
    }


@pytest.mark.parametrize("statistic", ["moran", "geary", "getis_ord"])
def test_compare_rows_equal_the_single_calls(candidates, x, statistic):
    t = vicino.compare(x, candidates, statistic, permutations=49, seed=5)
    fn = {"moran": vicino.moran, "geary": vicino.geary, "getis_ord": vicino.getis_ord}[statistic]
    symbol = {"moran": "I", "geary": "C", "getis_ord": "G"}[statistic]
    assert list(t.index) == list(candidates)
    assert t.attrs["seed"] == 5 and t.attrs["statistic"] == statistic and "modelling assumption" in t.attrs["caution"]
    for name, wc in candidates.items():
        r = fn(x, wc, permutations=49, seed=5)
        row = t.loc[name]
        assert row[symbol] == r.statistic and row[f"E[{symbol}]"] == r.expected
        assert row["z, randomization"] == r.randomization.z and row["p, randomization"] == r.randomization.p_value
        assert row["p, permutation"] == r.permutation.p_value and row["z, permutation"] == r.permutation.z
        if r.normality is None:
            assert np.isnan(row["z, normality"]) and np.isnan(row["p, normality"])
        else:
            assert row["p, normality"] == r.normality.p_value
        # reference: neighbour counts from the scipy matrix (stored entries per row, no self-links here)
        counts = np.diff(wc.to_scipy().indptr)
        assert (row["neighbours, min"], row["neighbours, max"]) == (counts.min(), counts.max())
        assert row["neighbours, median"] == np.median(counts) and row["neighbours, mean"] == counts.mean()
        assert row["islands"] == (counts == 0).sum()
    assert t.loc["within 0.2", "islands"] > 0  # this candidate leaves some units out


def test_compare_without_permutations_has_nan_permutation_columns(candidates, x):
    t = vicino.compare(pd.Series(x, index=IDS), candidates, permutations=0)
    assert t["p, permutation"].isna().all() and t["z, permutation"].isna().all()
    assert t["p, randomization"].notna().all()


def test_compare_refuses_bad_candidates(candidates, x):
    with pytest.raises(vicino.InvalidParameterError, match="statistic"):
        vicino.compare(x, candidates, "local_moran")
    with pytest.raises(vicino.InvalidParameterError, match="empty"):
        vicino.compare(x, {})
    with pytest.raises(vicino.InvalidTypeError, match="mapping"):
        vicino.compare(x, list(candidates.values()))
    with pytest.raises(vicino.InvalidTypeError, match="'bad'"):
        vicino.compare(x, {**candidates, "bad": np.eye(20)})
    other = vicino.k_nearest(np.random.default_rng(3).uniform(size=(20, 2)), 3, ids=IDS[::-1])
    with pytest.raises(vicino.IdError, match="'reversed'"):
        vicino.compare(x, {**candidates, "reversed": other})
    with pytest.raises(vicino.InvalidValuesError, match="negative"):
        vicino.compare(x - 1, candidates, "getis_ord", permutations=0)


# ---------------------------------------------------------------- README
def test_readme_autocorrelation_section_runs():
    import re
    from pathlib import Path

    text = (Path(__file__).resolve().parents[3] / "README.md").read_text()
    session = re.search(r"## A short session\n\n```python\n(.*?)```", text, re.S)
    block = re.search(r"## Spatial autocorrelation\n.*?```python\n(.*?)```", text, re.S)
    assert session is not None and block is not None, "the README's sections moved; update this test"
    scope: dict = {}
    exec(compile(session.group(1) + block.group(1), "README.md", "exec"), scope)
    table, towns, joins = scope["table"], scope["towns"], scope["joins"]
    assert list(table.index) == ["8 nearest", "within 6"]
    # reference: the README's I agrees with vicino.moran called alone (the same seed and weights)
    assert table.loc["8 nearest", "I"] == vicino.moran(towns["income"], scope["wr"], seed=1).statistic
    # reference: numpy, the like joins of True under binary k-nearest weights as a half sum
    a = scope["w"].to_dense()
    b = (towns["income"] > 15).to_numpy().astype(float)
    assert joins.like_of(True).count == pytest.approx(0.5 * b @ a @ b, rel=1e-12)
