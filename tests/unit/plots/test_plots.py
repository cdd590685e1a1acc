"""Pictures of the neighbour structure: plot_counts and plot_links.

Drawn with matplotlib's Agg backend (no display). References: numpy and
scipy.sparse (linked pairs, counts, components), matplotlib.image (the saved
file reads back as an image), hand calculation on the small examples.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.sparse.csgraph import connected_components

matplotlib = pytest.importorskip("matplotlib")
matplotlib.use("Agg")
import matplotlib.image as mpimg  # noqa: E402
import matplotlib.pyplot as plt  # noqa: E402
from matplotlib.collections import LineCollection  # noqa: E402
from matplotlib.colors import same_color  # noqa: E402

import vicino  # noqa: E402
from vicino import plots  # noqa: E402


@pytest.fixture(autouse=True)
def close_figures():
    yield
    plt.close("all")


def scattered(n=30, seed=3):
    return np.random.default_rng(seed).random((n, 2)) * 10


def with_islands():
    """Points on two rows with a far-off pair and a lone unit; linked within distance 1.2."""
    xy = np.array(
        [
            [0, 0],
            [1, 0],
            [2, 0],
            [0, 1],
            [1, 1],
            [2, 1],  # a 2 x 3 block
            [8, 8],
            [8.5, 8],  # a pair far away
            [-6, 5],
        ],  # alone
        dtype=float,
    )
    return xy, vicino.within_distance(xy, 1.2)


def linked_pairs(w) -> int:
    """Distinct unordered pairs {i, j}, i != j, linked in either direction (reference: numpy)."""
    m = w.to_scipy().tocoo()
    pairs = np.column_stack([np.minimum(m.row, m.col), np.maximum(m.row, m.col)])
    pairs = pairs[pairs[:, 0] != pairs[:, 1]]
    return len(np.unique(pairs, axis=0))


def link_collections(ax):
    """The line collections that draw links (not polygon borders)."""
    out = []
    for c in ax.collections:
        if isinstance(c, LineCollection):
            colours = c.get_colors()
            if len(colours) and not same_color(colours[0], plots.BORDER):
                out.append(c)
    return out


def drawn_segments(ax) -> int:
    return sum(len(c.get_segments()) for c in link_collections(ax))


def saved_image(ax, tmp_path):
    path = tmp_path / "picture.png"
    ax.figure.savefig(path, dpi=60)
    assert path.stat().st_size > 0
    return mpimg.imread(path)  # reference: matplotlib reads the file back


# ---------------------------------------------------------------------------
# plot_counts
# ---------------------------------------------------------------------------
def test_plot_counts_returns_axes_and_saves_an_image(tmp_path):
    w = vicino.k_nearest(scattered(), 3)
    ax = w.plot_counts()
    assert isinstance(ax, matplotlib.axes.Axes)
    img = saved_image(ax, tmp_path)
    assert img.ndim == 3 and img.shape[0] > 10 and img.shape[1] > 10
    assert img.std() > 0  # not a blank picture


def test_plot_counts_bars_match_numpy_counts():
    xy, w = with_islands()
    ax = w.plot_counts()
    counts = np.count_nonzero(w.to_dense(), axis=1)  # reference: numpy
    values, units = np.unique(counts, return_counts=True)
    bars = sorted((p.get_x() + p.get_width() / 2, p.get_height()) for p in ax.patches)
    np.testing.assert_allclose([b[0] for b in bars], values)
    np.testing.assert_allclose([b[1] for b in bars], units)
    assert sum(b[1] for b in bars) == w.n


def test_plot_counts_islands_bar_has_the_island_colour():
    xy, w = with_islands()
    assert len(w.islands) == 1  # by hand: the lone unit at (-6, 5)
    ax = w.plot_counts()
    by_value = {round(p.get_x() + p.get_width() / 2): p for p in ax.patches}
    assert same_color(by_value[0].get_facecolor(), plots.ISLAND)
    assert by_value[0].get_height() == 1
    others = [p for v, p in by_value.items() if v != 0]
    assert others and all(same_color(p.get_facecolor(), plots.BAR) for p in others)
    assert any("1 island" in t.get_text() for t in ax.texts)


def test_plot_counts_without_islands_has_no_island_bar():
    w = vicino.k_nearest(scattered(), 2)
    ax = w.plot_counts()
    assert not any(same_color(p.get_facecolor(), plots.ISLAND) for p in ax.patches)
    assert not any("island" in t.get_text() for t in ax.texts)


def test_plot_counts_of_one_count_has_whole_ticks_and_a_narrow_bar():
    w = vicino.k_nearest(scattered(), 3)  # every unit has 3 neighbours: one bar
    ax = w.plot_counts()
    ax.figure.canvas.draw()
    ticks = [t for t in ax.get_xticks() if ax.get_xlim()[0] <= t <= ax.get_xlim()[1]]
    assert ticks and all(float(t).is_integer() for t in ticks)  # common practice: counts are whole numbers
    (bar,) = ax.patches
    lo, hi = ax.get_xlim()
    assert bar.get_width() / (hi - lo) < 0.35  # the bar is one count wide, not the whole axis
    assert lo < 3 - 1 and hi > 3 + 1


def test_plot_counts_draws_on_a_given_axes():
    w = vicino.k_nearest(scattered(), 3)
    fig, (left, right) = plt.subplots(1, 2)
    out = w.plot_counts(ax=right)
    assert out is right
    assert len(right.patches) > 0 and len(left.patches) == 0
    assert len(fig.axes) == 2  # no new axes created
    assert len(plt.get_fignums()) == 1  # and no new figure


# ---------------------------------------------------------------------------
# plot_links
# ---------------------------------------------------------------------------
def test_plot_links_points_returns_axes_and_saves_an_image(tmp_path):
    xy = scattered()
    w = vicino.k_nearest(xy, 3)
    ax = w.plot_links(xy)
    assert isinstance(ax, matplotlib.axes.Axes)
    img = saved_image(ax, tmp_path)
    assert img.std() > 0


def test_plot_links_draws_each_linked_pair_once():
    xy = scattered()
    w = vicino.k_nearest(xy, 3)  # asymmetric: some pairs linked both ways, some one way
    m = w.to_dense()
    assert ((m > 0) & (m.T > 0)).any() and ((m > 0) & (m.T == 0)).any()  # both kinds present
    ax = w.plot_links(xy)
    assert drawn_segments(ax) == linked_pairs(w)
    assert f"{linked_pairs(w)} linked pairs" in ax.get_title(loc="left")


def test_plot_links_segments_join_the_linked_units():
    xy = np.array([[0, 0], [3, 0], [3, 4]], dtype=float)
    m = np.zeros((3, 3))
    m[0, 1] = m[1, 0] = m[2, 1] = 1.0
    w = vicino.from_matrix(m)
    ax = w.plot_links(xy)
    drawn = {tuple(sorted(map(tuple, np.round(s, 9).tolist()))) for c in link_collections(ax) for s in c.get_segments()}
    # by hand: the pairs {0, 1} and {1, 2}
    assert drawn == {((0.0, 0.0), (3.0, 0.0)), ((3.0, 0.0), (3.0, 4.0))}


def test_plot_links_skips_self_links():
    xy = np.array([[0, 0], [1, 0], [2, 0]], dtype=float)
    m = np.array([[1, 1, 0], [1, 0, 1], [0, 1, 1]], dtype=float)
    w = vicino.from_matrix(m)
    ax = w.plot_links(xy)
    assert drawn_segments(ax) == linked_pairs(w) == 2  # by hand: {0, 1} and {1, 2}; diagonal not drawn


def test_plot_links_marks_islands_and_small_components():
    xy, w = with_islands()
    ax = w.plot_links(xy)
    assert drawn_segments(ax) == linked_pairs(w)
    m = w.to_dense()
    _, labels = connected_components(m, directed=True, connection="weak")  # reference: scipy csgraph
    largest = np.argmax(np.bincount(labels))
    small_pairs = [
        (i, j) for i in range(w.n) for j in range(i + 1, w.n) if (m[i, j] or m[j, i]) and labels[i] != largest
    ]
    small = [c for c in link_collections(ax) if same_color(c.get_colors()[0], plots.SMALL)]
    assert sum(len(c.get_segments()) for c in small) == len(small_pairs) == 1  # by hand: the far pair
    ringed = [
        c
        for c in ax.collections
        if not isinstance(c, LineCollection) and len(c.get_offsets()) and same_color(c.get_edgecolor()[0], plots.ISLAND)
    ]
    assert len(ringed) == 1
    np.testing.assert_allclose(ringed[0].get_offsets(), xy[w.to_dense().sum(axis=1) == 0])  # by hand: (-6, 5)
    labels_text = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "island (1)" in labels_text
    assert "outside the largest component (2)" in labels_text  # by hand: the far pair


def test_plot_links_draws_on_a_given_axes():
    xy = scattered()
    w = vicino.k_nearest(xy, 2)
    fig, (left, right) = plt.subplots(1, 2)
    out = w.plot_links(xy, ax=left)
    assert out is left
    assert drawn_segments(left) == linked_pairs(w)
    assert len(right.collections) == 0
    assert len(plt.get_fignums()) == 1


def test_plot_links_polygons(tmp_path):
    pytest.importorskip("shapely")
    from vicino import demo

    districts = demo.districts()
    w = vicino.contiguity(districts)
    assert len(w.islands) > 0  # the demo's offshore islets touch nothing
    ax = w.plot_links(districts)
    assert isinstance(ax, matplotlib.axes.Axes)
    assert drawn_segments(ax) == linked_pairs(w)
    borders = [
        c
        for c in ax.collections
        if isinstance(c, LineCollection) and len(c.get_colors()) and same_color(c.get_colors()[0], plots.BORDER)
    ]
    assert len(borders) == 1
    assert len(borders[0].get_segments()) >= w.n  # at least one boundary ring per district
    img = saved_image(ax, tmp_path)
    assert img.std() > 0


def test_plot_links_polygon_locations_are_centroids():
    shapely = pytest.importorskip("shapely")
    boxes = [shapely.box(0, 0, 2, 2), shapely.box(2, 0, 4, 2), shapely.box(0, 2, 2, 6)]
    w = vicino.contiguity(boxes, rule="rook")
    ax = w.plot_links(boxes)
    ends = {tuple(p) for c in link_collections(ax) for s in c.get_segments() for p in np.round(s, 9).tolist()}
    assert ends == {(1.0, 1.0), (3.0, 1.0), (1.0, 4.0)}  # by hand: centres of the boxes
    assert drawn_segments(ax) == linked_pairs(w) == 2  # by hand: the third box touches only the first
