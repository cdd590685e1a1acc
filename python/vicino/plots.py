"""Pictures of the neighbour structure.

matplotlib is an optional extra: ``pip install 'vicino[plot]'``. The look
is vicino's own: muted ink for ordinary links and units, a warm rust for
islands and an ochre for units outside the largest component, so the things
that need attention stand out and everything else recedes.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from .errors import InvalidTypeError

INK = "#2f3e46"  # unit centres
LINK = "#52796f"  # links within the largest component
BORDER = "#b7c4bd"  # polygon boundaries
ISLAND = "#bc4b27"  # units without neighbours
SMALL = "#d6a23a"  # units and links of smaller components
BAR = "#84a98c"  # neighbour count bars


def _pyplot():
    try:
        import matplotlib.pyplot as plt
    except ImportError as exc:
        raise InvalidTypeError("plots need matplotlib: pip install 'vicino[plot]'") from exc
    return plt


def _axes(ax):
    if ax is None:
        plt = _pyplot()
        _, ax = plt.subplots(figsize=(7, 4.5))
    return ax


def plot_counts(counts: np.ndarray, ax: Any = None) -> Any:
    """Bar chart of how many units have each neighbour count.

    The bar of islands (0 neighbours) in rust, the median as a dotted line.
    Returns the Axes.
    """
    _pyplot()
    ax = _axes(ax)
    values, units = np.unique(counts, return_counts=True)
    colours = [ISLAND if v == 0 else BAR for v in values]
    ax.bar(values, units, width=0.8, color=colours, edgecolor="white", linewidth=0.6)
    median = float(np.median(counts))
    ax.axvline(median, color=INK, linestyle=":", linewidth=1.2)
    ax.annotate(
        f"median {median:g}",
        xy=(median, ax.get_ylim()[1]),
        xytext=(4, -12),
        textcoords="offset points",
        color=INK,
        fontsize=9,
    )
    if (values == 0).any():
        islands = int(units[values == 0][0])
        ax.annotate(
            f"{islands} island(s)",
            xy=(0, islands),
            xytext=(0, 4),
            textcoords="offset points",
            ha="center",
            color=ISLAND,
            fontsize=9,
        )
    ax.set_xlabel("neighbours per unit")
    ax.set_ylabel("units")
    ax.set_title(f"Neighbour counts of {len(counts):,} units", loc="left", fontsize=11)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    return ax


def _boundaries(geoms):
    """Boundary lines of polygons as a list of (m, 2) arrays, without a loop over units."""
    import shapely

    parts = shapely.get_parts(shapely.boundary(geoms[~shapely.is_empty(geoms)]))
    parts = parts[~shapely.is_empty(parts)]
    if not len(parts):
        return []
    coords, which = shapely.get_coordinates(parts, return_index=True)
    cuts = np.flatnonzero(np.diff(which)) + 1
    return np.split(coords, cuts)


def plot_links(
    xy: np.ndarray,
    geoms: np.ndarray | None,
    pairs: np.ndarray,
    labels: np.ndarray,
    counts: np.ndarray,
    ax: Any = None,
) -> Any:
    """Links drawn as straight lines between unit centres over the polygon boundaries.

    ``xy`` are the centres (points, or polygon centroids), ``geoms`` the
    polygons (or None), ``pairs`` each linked pair once, ``labels`` the
    component of each unit (0 the largest) and ``counts`` its neighbours.
    Islands are marked with rust rings and units of smaller components in
    ochre. Returns the Axes.
    """
    _pyplot()
    from matplotlib.collections import LineCollection
    from matplotlib.lines import Line2D

    n = len(counts)
    ax = _axes(ax)
    if geoms is not None:
        ax.add_collection(LineCollection(_boundaries(geoms), colors=BORDER, linewidths=0.6, zorder=1))
    located = np.isfinite(xy).all(axis=1)
    pairs = pairs[located[pairs[:, 0]] & located[pairs[:, 1]]]
    segments = np.stack([xy[pairs[:, 0]], xy[pairs[:, 1]]], axis=1) if len(pairs) else np.zeros((0, 2, 2))
    small_link = labels[pairs[:, 0]] != 0
    width = 0.8 if n <= 2000 else 0.3
    ax.add_collection(LineCollection(segments[~small_link], colors=LINK, linewidths=width, alpha=0.8, zorder=2))
    ax.add_collection(LineCollection(segments[small_link], colors=SMALL, linewidths=width * 1.5, zorder=2))
    island = (counts == 0) & located
    small = (labels != 0) & ~island & located
    main = located & ~island & ~small
    size = 10 if n <= 2000 else 2
    ax.scatter(xy[main, 0], xy[main, 1], s=size, color=INK, linewidths=0, zorder=3)
    ax.scatter(xy[small, 0], xy[small, 1], s=size * 1.8, color=SMALL, edgecolors=INK, linewidths=0.4, zorder=3)
    ax.scatter(xy[island, 0], xy[island, 1], s=size * 6, facecolors="none", edgecolors=ISLAND, linewidths=1.6, zorder=4)
    ax.set_aspect("equal", adjustable="datalim")
    ax.autoscale_view()
    handles = [
        Line2D([], [], color=LINK, label="link"),
        Line2D([], [], color=INK, marker="o", linestyle="", markersize=4, label="unit"),
    ]
    if small.any():
        handles.append(
            Line2D(
                [],
                [],
                color=SMALL,
                marker="o",
                linestyle="",
                markersize=5,
                label=f"outside the largest component ({int(small.sum())})",
            )
        )
    if island.any():
        handles.append(
            Line2D(
                [],
                [],
                color=ISLAND,
                marker="o",
                markerfacecolor="none",
                linestyle="",
                markersize=8,
                label=f"island ({int(island.sum())})",
            )
        )
    ax.legend(handles=handles, loc="lower left", frameon=False, fontsize=8)
    ax.set_title(f"{n:,} units, {len(pairs):,} linked pairs", loc="left", fontsize=11)
    ax.set_xticks([])
    ax.set_yticks([])
    for side in ax.spines.values():
        side.set_visible(False)
    return ax
