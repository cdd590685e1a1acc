"""The audit report: each finding's level and message, the neighbour-count
histogram, the displays, and the recipe of repairs and algebra.

Weights are built by hand with vicino.from_matrix from small dense matrices,
so every expected fact can be read off the matrix with NumPy / SciPy.

References: numpy (counts, sums, medians), scipy.sparse.csgraph (weakly
connected components, shortest paths), html.parser (well-formed markup),
hand calculation on the small matrices drawn in the comments.
"""

from __future__ import annotations

import html
import warnings
from html.parser import HTMLParser

import numpy as np
import pytest
from scipy.sparse.csgraph import connected_components, shortest_path

import vicino
from vicino import audit as audit_module

CHECKS = ("islands", "components", "symmetry", "zero columns", "self-links", "density", "uneven counts")


def by_check(report) -> dict:
    """The findings of an audit, keyed by check name."""
    found = {f.check: f for f in report.findings}
    assert len(found) == len(report.findings)  # each check reported once
    return found


def with_counts(counts, ids=None, network=False):
    """Weights whose row i links unit i to the next counts[i] units (cyclically, never itself)."""
    n = len(counts)
    m = np.zeros((n, n))
    for i, c in enumerate(counts):
        assert c <= n - 1
        for step in range(1, c + 1):
            m[i, (i + step) % n] = 1.0
    return m, vicino.from_matrix(m, ids=ids, network=network)


def path_with_islands():
    """a - b - c linked both ways; d and e have no links.

    a - b - c     d     e
    """
    m = np.zeros((5, 5))
    for i, j in [(0, 1), (1, 2)]:
        m[i, j] = m[j, i] = 1.0
    return m, vicino.from_matrix(m, ids=["Ashby", "Brell", "Corrow", "Dunvale", "Eskmoor"])


# ---------------------------------------------------------------------------
# islands and components
# ---------------------------------------------------------------------------
def test_islands_are_a_problem_naming_their_ids():
    m, w = path_with_islands()
    report = w.audit()
    f = by_check(report)["islands"]
    expected = w.ids[m.sum(axis=1) == 0]  # reference: numpy, zero rows of the matrix
    assert list(report.islands) == list(expected) == ["Dunvale", "Eskmoor"]  # by hand: d and e
    assert f.level == "problem"
    assert "2 unit(s)" in f.message  # by hand: two islands
    for name in expected:
        assert repr(name) in f.message
    assert "connect_islands" in f.message and "drop_islands" in f.message  # says what to do
    assert report.problems == (f,)  # by hand: islands are the only problem here


def test_many_islands_are_named_by_example():
    m = np.zeros((9, 9))
    m[0, 1] = m[1, 0] = 1.0
    ids = [f"Holm{i}" for i in range(9)]
    f = by_check(vicino.from_matrix(m, ids=ids).audit())["islands"]
    # by hand: 7 islands (Holm2..Holm8); the first five are named, then "and 2 more"
    for name in ids[2:7]:
        assert repr(name) in f.message
    assert "'Holm7'" not in f.message and "and 2 more" in f.message


def test_no_islands_is_ok():
    m = np.ones((3, 3)) - np.eye(3)
    report = vicino.from_matrix(m).audit()
    assert by_check(report)["islands"].level == "ok"
    assert len(report.islands) == 0  # by hand: a triangle
    assert report.problems == ()


def test_several_components_warn_with_their_sizes():
    m, w = path_with_islands()
    report = w.audit()
    f = by_check(report)["components"]
    count, labels = connected_components(m, directed=True, connection="weak")  # reference: scipy csgraph
    sizes = np.sort(np.bincount(labels))[::-1]
    assert report.components.count == count == 3  # by hand: {a, b, c}, {d}, {e}
    np.testing.assert_array_equal(report.components.sizes, sizes)
    assert f.level == "warning"
    assert f"{count} separate groups" in f.message and "sizes 3, 1, 1" in f.message  # by hand
    assert "connect_components" in f.message
    # label 0 is the largest component (documented), ties go to the first unit's component
    assert list(report.components.labels) == [0, 0, 0, 1, 2]  # by hand


def test_components_follow_links_in_either_direction():
    # a -> b <- c: one group when links count in either direction, three strongly
    m = np.zeros((3, 3))
    m[0, 1] = m[2, 1] = 1.0
    report = vicino.from_matrix(m).audit()
    weak, _ = connected_components(m, directed=True, connection="weak")  # reference: scipy csgraph
    assert report.components.count == weak == 1
    assert by_check(report)["components"].level == "ok"


# ---------------------------------------------------------------------------
# symmetry and zero columns
# ---------------------------------------------------------------------------
def test_one_way_links_are_a_note_naming_the_worst_pair():
    # a <-> b (weights 1 and 1), c -> a (3, one way), d -> b (1, one way)
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 0] = 1.0
    m[2, 0] = 3.0
    m[3, 1] = 1.0
    ids = ["Fenwick", "Garrowby", "Halsted", "Ismere"]
    report = vicino.from_matrix(m, ids=ids).audit()
    f = by_check(report)["symmetry"]
    one_way = int(((m > 0) & (m.T == 0)).sum())  # reference: numpy
    gap = np.abs(m - m.T)
    i, j = np.unravel_index(np.argmax(gap), gap.shape)  # reference: numpy, largest |w_ij - w_ji|
    assert not report.symmetric
    assert report.one_way_links == one_way == 2
    value, a, b = report.max_asymmetry
    assert value == gap[i, j] == 3.0
    assert {a, b} == {ids[i], ids[j]} == {"Fenwick", "Halsted"}
    assert f.level == "note"
    assert "2 link(s) run one way only" in f.message
    assert "'Fenwick'" in f.message and "'Halsted'" in f.message
    assert "symmetrize()" in f.message


def test_two_way_links_with_unequal_weights_are_a_note():
    # a path a - b - c, row standardized: every link runs both ways, w_ab = 1 but w_ba = 1/2
    m = np.zeros((3, 3))
    m[0, 1] = m[1, 0] = m[1, 2] = m[2, 1] = 1.0
    w = vicino.from_matrix(m).standardize("row")
    report = w.audit()
    rows = m / m.sum(axis=1, keepdims=True)  # reference: numpy row standardization
    assert report.one_way_links == 0  # by hand: the pattern is symmetric
    assert report.max_asymmetry[0] == pytest.approx(np.abs(rows - rows.T).max())  # 1 - 1/2
    f = by_check(report)["symmetry"]
    assert f.level == "note" and "every link runs both ways" in f.message


def test_symmetric_weights_are_ok():
    m, w = path_with_islands()
    report = w.audit()
    assert report.symmetric and report.max_asymmetry is None  # by hand: m == m.T
    assert report.one_way_links == 0
    assert by_check(report)["symmetry"].level == "ok"


def test_zero_columns_are_a_note_naming_the_units():
    # a ring a -> b -> c -> a, and d -> a: d has a neighbour but nobody neighbours d
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 2] = m[2, 0] = m[3, 0] = 1.0
    ids = ["Kelby", "Lisford", "Morholm", "Netherby"]
    report = vicino.from_matrix(m, ids=ids).audit()
    zero_col = m.sum(axis=0) == 0  # reference: numpy column sums
    assert list(report.zero_columns) == [ids[i] for i in np.flatnonzero(zero_col)] == ["Netherby"]
    f = by_check(report)["zero columns"]
    assert f.level == "note"
    assert "1 unit(s)" in f.message and "'Netherby'" in f.message
    assert "'Kelby'" not in f.message


def test_islands_are_not_reported_as_zero_columns():
    m, w = path_with_islands()
    report = w.audit()
    # an island's column is zero too (reference: numpy), but the note is about units *with* neighbours
    assert set(report.zero_columns) == set(w.ids[m.sum(axis=0) == 0]) == {"Dunvale", "Eskmoor"}
    assert by_check(report)["zero columns"].level == "ok"


# ---------------------------------------------------------------------------
# self-links, density, uneven counts
# ---------------------------------------------------------------------------
def test_self_links_warn():
    m = np.ones((3, 3)) - np.eye(3)
    m[1, 1] = 2.0
    m[2, 2] = 0.5
    report = vicino.from_matrix(m).audit()
    assert report.self_links == int(np.count_nonzero(np.diag(m))) == 2  # reference: numpy diagonal
    f = by_check(report)["self-links"]
    assert f.level == "warning" and "2 unit(s)" in f.message and "diagonal" in f.message


def test_no_self_links_is_ok():
    m = np.ones((3, 3)) - np.eye(3)
    report = vicino.from_matrix(m).audit()
    assert report.self_links == 0
    assert by_check(report)["self-links"].level == "ok"


@pytest.mark.parametrize("links, level", [(7, "warning"), (6, "ok"), (3, "ok")])
def test_density_above_half_warns(links, level):
    # 4 units have 12 ordered pairs: 7 links is 58% (> 50%), 6 links is exactly 50% (not above)
    n = 4
    pairs = [(i, j) for i in range(n) for j in range(n) if i != j]
    m = np.zeros((n, n))
    for i, j in pairs[:links]:
        m[i, j] = 1.0
    report = vicino.from_matrix(m).audit()
    density = np.count_nonzero(m) / (n * (n - 1))  # reference: numpy, share of ordered pairs
    assert report.density == pytest.approx(density)
    assert (density > audit_module.DENSE_SHARE) == (level == "warning")  # the threshold in audit.py
    f = by_check(report)["density"]
    assert f.level == level
    if level == "warning":
        assert f"{100 * density:.0f}%" in f.message and "fewer neighbours" in f.message


def test_density_does_not_count_self_links():
    # 6 of 12 ordered pairs linked, plus the whole diagonal: density 50%, not above
    m = np.eye(4)
    for i, j in [(0, 1), (1, 0), (1, 2), (2, 1), (2, 3), (3, 2)]:
        m[i, j] = 1.0
    report = vicino.from_matrix(m).audit()
    off = np.count_nonzero(m - np.diag(np.diag(m)))  # reference: numpy, off-diagonal links
    assert report.density == pytest.approx(off / 12) == pytest.approx(0.5)
    assert by_check(report)["density"].level == "ok"


def uneven_cases():
    ratio, gap = audit_module.UNEVEN_RATIO, audit_module.UNEVEN_MIN_GAP
    # the ratio bound: median 2, largest exactly ratio x median (not above) or one more
    top = int(ratio * 2)
    assert top + 1 - 2 >= gap  # the gap condition holds, so only the ratio decides
    yield pytest.param(2, top, "ok", id="ratio-at-bound")
    yield pytest.param(2, top + 1, "warning", id="ratio-above-bound")
    # the gap bound: median 1, largest median + gap - 1 (too close) or median + gap
    assert 1 + gap - 1 > ratio * 1  # the ratio condition holds, so only the gap decides
    yield pytest.param(1, 1 + gap - 1, "ok", id="gap-below-bound")
    yield pytest.param(1, 1 + gap, "warning", id="gap-at-bound")


@pytest.mark.parametrize("usual, top, level", list(uneven_cases()))
def test_very_uneven_counts_warn(usual, top, level):
    n = 12
    counts = [top] + [usual] * (n - 1)
    m, w = with_counts(counts)
    report = w.audit()
    row_counts = np.count_nonzero(m, axis=1)  # reference: numpy
    np.testing.assert_array_equal(report.counts.to_numpy(), row_counts)
    assert np.median(row_counts) == usual and row_counts.max() == top  # by hand
    f = by_check(report)["uneven counts"]
    assert f.level == level
    assert f"from {usual} to {top}" in f.message and f"median {usual}" in f.message


def test_uneven_counts_need_a_positive_median():
    # 4 of 7 units are islands: median 0, so the ratio says nothing
    m, w = with_counts([6, 6, 6, 0, 0, 0, 0])
    assert np.median(np.count_nonzero(m, axis=1)) == 0  # reference: numpy
    assert by_check(w.audit())["uneven counts"].level == "ok"


# ---------------------------------------------------------------------------
# duplicate locations and the network caution
# ---------------------------------------------------------------------------
def test_duplicate_locations_warn():
    # three units at (0, 0), two at (5, 5), one alone: 5 units share their location
    xy = np.array([[0, 0], [0, 0], [0, 0], [5, 5], [5, 5], [9, 0]], dtype=float)
    with pytest.warns(vicino.DuplicateLocationWarning):
        w = vicino.k_nearest(xy, 2)
    _, inverse, seen = np.unique(xy, axis=0, return_inverse=True, return_counts=True)
    shared = int((seen[inverse.ravel()] > 1).sum())  # reference: numpy, rows whose location repeats
    report = w.audit()
    assert report.duplicate_locations == shared == 5
    f = by_check(report)["duplicate locations"]
    assert f.level == "warning" and "5 unit(s)" in f.message and "aggregate" in f.message


def test_duplicate_locations_unknown_after_dropping_units():
    xy = np.array([[0, 0], [0, 0], [1, 0], [2, 0], [3, 1]], dtype=float)
    with pytest.warns(vicino.DuplicateLocationWarning):
        w = vicino.k_nearest(xy, 2)
    report = w.drop([4]).audit()
    assert report.duplicate_locations is None  # documented: unknown once units are dropped
    assert "duplicate locations" not in by_check(report)


def test_network_matrix_warns_and_plain_matrix_notes():
    m = np.ones((3, 3)) - np.eye(3)
    network = by_check(vicino.from_matrix(m, network=True).audit())["network"]
    plain = by_check(vicino.from_matrix(m).audit())["network"]
    assert network.level == "warning" and "exogenous" in network.message
    assert plain.level == "note" and "exogenous" in plain.message
    # the caution follows the weights through later steps (the recipe starts with from_matrix)
    later = vicino.from_matrix(m, network=True).symmetrize().standardize("row").audit()
    assert by_check(later)["network"].level == "warning"


def test_weights_from_locations_carry_no_network_caution():
    xy = np.array([[0, 0], [1, 0], [2, 0], [0, 1], [1, 1], [2, 1]], dtype=float)
    report = vicino.within_distance(xy, 1.0).audit()
    assert "network" not in by_check(report)


def test_clean_weights_are_ok_everywhere():
    # a 3 x 3 grid, rook neighbours at distance 1: symmetric, connected, 2 to 4 neighbours
    g = np.arange(3.0)
    xy = np.array([(x, y) for y in g for x in g])
    report = vicino.within_distance(xy, 1.0).audit()
    found = by_check(report)
    assert set(found) == set(CHECKS)  # no duplicates, no network caution for point builders
    assert {f.level for f in report.findings} == {"ok"}
    assert report.problems == ()
    d = np.hypot(*(xy[:, None, :] - xy[None, :, :]).transpose(2, 0, 1))
    counts = ((d <= 1.0) & (d > 0)).sum(axis=1)  # reference: numpy brute force
    np.testing.assert_array_equal(report.counts.to_numpy(), counts)
    assert report.summary["median"] == np.median(counts)
    assert report.summary["mean"] == pytest.approx(counts.mean())
    assert report.links == counts.sum() == 24  # by hand: 12 grid edges, both ways


# ---------------------------------------------------------------------------
# histogram
# ---------------------------------------------------------------------------
def test_histogram_has_one_row_per_count_when_few():
    counts = [0, 3, 3, 1, 3, 5, 1, 0]  # no unit has 2 or 4 neighbours
    m, w = with_counts(counts)
    hist = w.audit().histogram
    row_counts = np.count_nonzero(m, axis=1)
    assert list(hist.columns) == ["neighbours", "units", "share"]
    assert list(hist["neighbours"]) == [str(v) for v in range(6)]  # by hand: every value from 0 to 5
    np.testing.assert_array_equal(hist["units"], np.bincount(row_counts))  # reference: numpy bincount
    assert hist["units"].sum() == len(counts)
    np.testing.assert_allclose(hist["share"], np.bincount(row_counts) / len(counts))
    assert hist["share"].sum() == pytest.approx(1.0)


def test_histogram_starts_at_the_smallest_count():
    m, w = with_counts([2, 4, 4, 2, 3, 4])
    hist = w.audit().histogram
    assert list(hist["neighbours"]) == ["2", "3", "4"]  # by hand
    assert list(hist["units"]) == [2, 1, 3]  # by hand


def test_histogram_span_at_the_limit_is_not_binned():
    rows = audit_module.HISTOGRAM_ROWS
    counts = list(range(rows))  # counts 0 .. rows - 1: exactly `rows` values
    counts += [1] * (rows + 1 - len(counts))  # enough units that every count fits (count <= n - 1)
    m, w = with_counts(counts)
    hist = w.audit().histogram
    assert len(hist) == rows
    np.testing.assert_array_equal(hist["units"], np.bincount(np.count_nonzero(m, axis=1)))  # reference: numpy


def test_histogram_bins_a_wide_span():
    rows = audit_module.HISTOGRAM_ROWS
    n = 3 * rows
    counts = [i % n for i in range(n)]  # counts 0 .. n - 1: more values than rows
    counts[5] = counts[6] = counts[7] = 1  # uneven bins
    m, w = with_counts(counts)
    hist = w.audit().histogram
    row_counts = np.count_nonzero(m, axis=1)
    assert row_counts.max() - row_counts.min() + 1 > rows
    assert len(hist) <= rows
    assert hist["units"].sum() == n
    assert hist["share"].sum() == pytest.approx(1.0)
    # bins are "a-b", contiguous, cover min..max, and hold the units whose count is in [a, b]
    bounds = [tuple(int(x) for x in label.split("-")) for label in hist["neighbours"]]
    assert bounds[0][0] == row_counts.min() and bounds[-1][1] == row_counts.max()
    for (a, b), (c, _) in zip(bounds, bounds[1:]):
        assert a <= b and c == b + 1
    for (a, b), units in zip(bounds, hist["units"]):
        assert units == int(((row_counts >= a) & (row_counts <= b)).sum())  # reference: numpy count
    edges = [a - 0.5 for a, _ in bounds] + [bounds[-1][1] + 0.5]
    np.testing.assert_array_equal(hist["units"], np.histogram(row_counts, bins=edges)[0])  # reference: numpy


# ---------------------------------------------------------------------------
# table, repr and html
# ---------------------------------------------------------------------------
def test_to_frame_has_one_row_per_finding():
    m, w = path_with_islands()
    report = w.audit()
    table = report.to_frame()
    assert list(table.columns) == ["level", "check", "message"]
    assert len(table) == len(report.findings)
    for row, f in zip(table.itertuples(index=False), report.findings):
        assert (row.level, row.check, row.message) == (f.level, f.check, f.message)
    assert set(table["level"]) <= set(audit_module.LEVELS)


def test_repr_names_every_check_and_level():
    m, w = path_with_islands()
    report = w.audit()
    text = repr(report)
    assert text.startswith("Weights audit: 5 units, 4 links")  # by hand: two links each way
    for f in report.findings:
        line = next(x for x in text.splitlines() if f"{f.check}:" in x)
        assert line.split()[0] == f.level
    # one histogram line per row, after the findings
    tail = text.split("neighbour counts:")[1].strip().splitlines()
    assert len(tail) == len(report.histogram)
    assert str(w.audit().findings[0]) == f"[problem] islands: {report.findings[0].message}"


class _Tags(HTMLParser):
    """Collects text and checks that every opened tag is closed in order."""

    VOID = {"br", "hr", "img", "meta", "input", "col", "wbr"}

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.text, self.errors = [], [], []

    def handle_starttag(self, tag, attrs):
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack.pop() != tag:
            self.errors.append(tag)

    def handle_data(self, data):
        self.text.append(data)


def test_html_is_well_formed_and_escapes_ids():
    m, _ = path_with_islands()
    ids = ["Ashby", "Brell", "Corrow", "<Dun & vale>", "Esk<moor"]
    report = vicino.from_matrix(m, ids=ids).audit()
    markup = report._repr_html_()
    parser = _Tags()
    parser.feed(markup)
    parser.close()
    assert parser.errors == [] and parser.stack == []  # reference: html.parser, tags balanced
    assert "<Dun" not in markup and "Esk<moor" not in markup  # raw '<' of ids would open tags
    assert html.escape("<Dun & vale>") in markup
    text = "".join(parser.text)
    for f in report.findings:
        assert f.message in text  # the messages read back unchanged
        assert f.level in text and f.check in text
    assert "'<Dun & vale>'" in by_check(report)["islands"].message
    for label in report.histogram["neighbours"]:
        assert f"<td>{label}</td>" in markup


# ---------------------------------------------------------------------------
# recipes: repairs and algebra are recorded
# ---------------------------------------------------------------------------
def line_points():
    """Four units on a line: a (0), b (1), c (2.5), d (10)."""
    return np.array([[0, 0], [1, 0], [2.5, 0], [10, 0]], dtype=float)


def test_connect_islands_is_recorded_with_links_added():
    # a - b linked both ways; c and d are islands
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 0] = 1.0
    w = vicino.from_matrix(m, ids=list("abcd"))
    fixed = w.connect_islands(line_points())
    # by hand: c's nearest is b (1.5 away), d's nearest is c (7.5 away); the links are
    # symmetric, so each new link goes both ways: 4 links added
    expected = m.copy()
    for i, j in [(2, 1), (3, 2)]:
        expected[i, j] = expected[j, i] = 1.0
    np.testing.assert_array_equal(fixed.to_dense(), expected)
    step = fixed.recipe[-1]
    assert step.action == "connect_islands"
    assert dict(step.params) == {"k": 1, "metric": "euclidean", "weight": 1.0, "links_added": 4}
    assert fixed.recipe[:-1] == w.recipe  # earlier steps kept
    assert by_check(fixed.audit())["islands"].level == "ok"


def test_connect_islands_on_one_way_links_adds_one_way():
    # a <-> b, c -> b (one way), d an island: the links are not symmetric
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 0] = m[2, 1] = 1.0
    fixed = vicino.from_matrix(m).connect_islands(line_points(), weight=0.5)
    expected = m.copy()
    expected[3, 2] = 0.5  # by hand: d's nearest is c (7.5 away), added d -> c only, weighing 0.5
    np.testing.assert_array_equal(fixed.to_dense(), expected)
    assert fixed.recipe[-1].params["links_added"] == 1
    assert fixed.recipe[-1].params["weight"] == 0.5


def test_connect_components_is_recorded():
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 0] = 1.0
    fixed = vicino.from_matrix(m).connect_components(line_points())
    # by hand: the largest group is {a, b}; c's closest unit in it is b (1.5), d's is b (9)
    expected = m.copy()
    for i in (2, 3):
        expected[i, 1] = expected[1, i] = 1.0
    np.testing.assert_array_equal(fixed.to_dense(), expected)
    assert fixed.recipe[-1].action == "connect_components"
    assert fixed.recipe[-1].params["links_added"] == 4
    n_comp, _ = connected_components(fixed.to_dense(), directed=True, connection="weak")  # reference: scipy
    assert n_comp == 1 and fixed.audit().components.count == 1


def directed_example():
    """a -> b -> c -> d and d -> a is missing; b -> a back. Weights 1, 2, 1, 3."""
    m = np.zeros((4, 4))
    m[0, 1], m[1, 2], m[2, 3], m[1, 0] = 1.0, 2.0, 1.0, 3.0
    return m, vicino.from_matrix(m, ids=list("abcd"))


@pytest.mark.parametrize(
    "how, reference",
    [
        ("union", np.maximum),  # documented: max(w_ij, w_ji)
        ("intersection", np.minimum),  # documented: min(w_ij, w_ji)
        ("mean", lambda a, b: (a + b) / 2),  # documented: (w_ij + w_ji) / 2
    ],
)
def test_symmetrize_is_recorded(how, reference):
    m, w = directed_example()
    s = w.symmetrize(how)
    np.testing.assert_allclose(s.to_dense(), reference(m, m.T))  # reference: numpy
    assert s.recipe[-1].action == "symmetrize" and dict(s.recipe[-1].params) == {"how": how}
    assert len(s.recipe) == len(w.recipe) + 1


@pytest.mark.parametrize("k, cumulative", [(1, False), (2, False), (2, True), (3, True)])
def test_order_is_recorded(k, cumulative):
    m, w = directed_example()
    hops = shortest_path(m > 0, unweighted=True, directed=True)  # reference: scipy csgraph
    np.fill_diagonal(hops, np.inf)  # a unit is never its own k-step neighbour
    expected = ((hops >= 1) & (hops <= k)) if cumulative else (hops == k)
    o = w.order(k, cumulative=cumulative)
    np.testing.assert_array_equal(o.to_dense(), expected.astype(float))
    assert o.recipe[-1].action == "order"
    assert dict(o.recipe[-1].params) == {"k": k, "cumulative": cumulative}


@pytest.mark.parametrize(
    "op, action, reference",
    [
        (lambda a, b: a | b, "union", np.logical_or),
        (lambda a, b: a & b, "intersection", np.logical_and),
        (lambda a, b: a - b, "difference", lambda x, y: x & ~y),
    ],
)
def test_set_operations_are_recorded(op, action, reference):
    m, w = directed_example()
    other = np.zeros((4, 4))
    other[0, 1] = other[3, 2] = 1.0
    v = vicino.from_matrix(other, ids=list("abcd")).symmetrize()  # a <-> b, c <-> d
    both = np.maximum(other, other.T)  # reference: numpy, the symmetrized pattern
    out = op(w, v)
    np.testing.assert_array_equal(out.to_dense(), reference(m > 0, both > 0).astype(float))  # reference: numpy
    step = out.recipe[-1]
    assert step.action == action
    assert step.params["other"] == " -> ".join(str(s) for s in v.recipe)  # the other operand's recipe
    assert out.recipe[:-1] == w.recipe


def test_subset_drop_align_are_recorded():
    m, w = directed_example()
    sub = w.subset(["c", "a", "b"])
    np.testing.assert_array_equal(sub.to_dense(), m[np.ix_([2, 0, 1], [2, 0, 1])])  # reference: numpy indexing
    assert list(sub.ids) == ["c", "a", "b"]
    assert (sub.recipe[-1].action, dict(sub.recipe[-1].params)) == ("subset", {"units": 3})

    dropped = w.drop(["b"])
    np.testing.assert_array_equal(dropped.to_dense(), m[np.ix_([0, 2, 3], [0, 2, 3])])  # reference: numpy
    assert (dropped.recipe[-1].action, dict(dropped.recipe[-1].params)) == ("drop", {"units": 1})

    aligned = w.align(["d", "c", "b", "a"])
    np.testing.assert_array_equal(aligned.to_dense(), m[::-1, ::-1])  # reference: numpy reversal
    assert (aligned.recipe[-1].action, dict(aligned.recipe[-1].params)) == ("align", {"units": 4})


def test_drop_islands_is_recorded():
    m, w = path_with_islands()
    kept = w.drop_islands()
    keep = np.flatnonzero(m.sum(axis=1) > 0)  # reference: numpy, rows with links
    np.testing.assert_array_equal(kept.to_dense(), m[np.ix_(keep, keep)])
    assert list(kept.ids) == ["Ashby", "Brell", "Corrow"]
    assert (kept.recipe[-1].action, dict(kept.recipe[-1].params)) == ("drop_islands", {"units": 2})
    assert by_check(kept.audit())["islands"].level == "ok"


def test_subset_can_make_islands_that_the_audit_reports():
    m, w = path_with_islands()
    sub = w.subset(["Ashby", "Corrow", "Dunvale"])  # the link a - c ran through b
    report = sub.audit()
    assert list(report.islands) == ["Ashby", "Corrow", "Dunvale"]  # by hand: no links left
    assert by_check(report)["islands"].level == "problem"


# ---------------------------------------------------------------------------
# standardized weights and structural changes
# ---------------------------------------------------------------------------
def ring(n=5):
    m = np.zeros((n, n))
    for i in range(n):
        m[i, (i + 1) % n] = m[(i + 1) % n, i] = 1.0
    return m, vicino.from_matrix(m, ids=[f"Vell{i}" for i in range(n)])


@pytest.mark.parametrize(
    "remove", [lambda w: w.subset(["Vell0", "Vell1", "Vell2"]), lambda w: w.drop(["Vell4"])], ids=["subset", "drop"]
)
def test_removing_units_from_row_standardized_weights_warns(remove):
    m, w = ring()
    r = w.standardize("row")
    with pytest.warns(UserWarning, match="standardize again"):
        out = remove(r)
    # the warning is right: some rows no longer sum to 1 (reference: numpy row sums)
    assert not np.allclose(out.to_dense().sum(axis=1), 1.0)


def test_reordering_or_binary_weights_do_not_warn():
    m, w = ring()
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        w.standardize("row").align(list(reversed(w.ids)))  # same units: rows still sum to 1
        w.standardize("binary").subset(["Vell0", "Vell1"])  # binary weights have no scale to lose
        w.standardize("row").order(1).subset(["Vell0", "Vell1"])  # order() is binary again


@pytest.mark.parametrize("repair", ["connect_islands", "connect_components"])
def test_repairing_row_standardized_weights_raises(repair):
    m = np.zeros((4, 4))
    m[0, 1] = m[1, 0] = 1.0
    r = vicino.from_matrix(m).standardize("row", islands="keep")
    with pytest.raises(vicino.InvalidParameterError, match="standardize afterwards") as err:
        getattr(r, repair)(line_points())
    assert isinstance(err.value, ValueError)
    assert "row" in str(err.value)
    # binary weights may be repaired (documented: repair before standardizing)
    fixed = getattr(vicino.from_matrix(m).standardize("binary", islands="keep"), repair)(line_points())
    assert fixed.audit().islands.empty
