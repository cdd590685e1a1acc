"""Pictures of the neighbour structure and of local spatial association.

matplotlib is an optional extra: ``pip install 'vicino[plot]'``. The look
is vicino's own: muted ink for ordinary links and units, a warm rust for
islands and an ochre for units outside the largest component, so the things
that need attention stand out and everything else recedes.

The quadrants of the Moran scatterplot and the cluster map take four colours
of the Okabe and Ito (2008) colour-blind-safe set: orange for high-high,
bluish green for low-low, reddish purple for high-low and blue for low-high;
units that are not significant recede in a pale grey, and islands keep the
rust of the other plots.
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
# quadrants: Okabe and Ito (2008), "Color Universal Design", colour-blind-safe set
QUADRANT_COLOURS = {
    "high-high": "#E69F00",  # orange
    "low-low": "#009E73",  # bluish green
    "high-low": "#CC79A7",  # reddish purple
    "low-high": "#0072B2",  # blue
}
SPOT_COLOURS = {"hot spot": QUADRANT_COLOURS["high-high"], "cold spot": QUADRANT_COLOURS["low-low"]}
RECEDE = "#e4e7e5"  # units that are not significant
CAUTION_SHORT = "many tests: some units are significant by chance; significance is not a cause"


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
    from matplotlib.ticker import MaxNLocator

    # counts are whole numbers: whole ticks, and room beside a lone bar so it reads as one count
    ax.xaxis.set_major_locator(MaxNLocator(integer=True))
    lo, hi = (float(values.min()), float(values.max())) if len(values) else (0.0, 0.0)
    ax.set_xlim(lo - max(1.5, 0.05 * (hi - lo)), hi + max(1.5, 0.05 * (hi - lo)))
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


def _compound_path(geoms: np.ndarray):
    """One matplotlib Path of every ring of the polygons, holes kept (no loop over units)."""
    import shapely
    from matplotlib.path import Path

    parts = shapely.get_parts(geoms[~shapely.is_empty(geoms)])
    parts = parts[shapely.get_type_id(parts) == 3]
    if not len(parts):
        return None
    # exteriors counter-clockwise and holes clockwise: holes stay open under either fill rule
    rings = shapely.get_rings(shapely.orient_polygons(parts))
    coords, which = shapely.get_coordinates(rings, return_index=True)
    codes = np.full(len(coords), Path.LINETO, dtype=np.uint8)
    starts = np.r_[0, np.flatnonzero(np.diff(which)) + 1]
    codes[starts] = Path.MOVETO
    codes[np.r_[starts[1:], len(coords)] - 1] = Path.CLOSEPOLY
    return Path(coords, codes)


def _categories(result: Any) -> tuple[np.ndarray, dict[str, str], str]:
    """Each unit's category on the map, the colours of the categories, and the statistic's name."""
    from .local import LocalGetisOrdResult, LocalMoranResult

    if isinstance(result, LocalMoranResult):
        labels, colours, name = result.quadrant, QUADRANT_COLOURS, "Local Moran's I"
    elif isinstance(result, LocalGetisOrdResult):
        labels, colours, name = result.spot, SPOT_COLOURS, "Local G_i*" if result.star else "Local G_i"
    else:
        raise InvalidTypeError(
            f"cluster_map draws the result of local_moran or local_getis_ord, got {type(result).__name__}"
        )
    cat = np.where(result.significant, labels, "not significant").astype(object)
    cat[result.islands_mask] = "island"
    return cat, colours, name


def cluster_map(result: Any, locations: Any, ax: Any = None) -> Any:
    """Map of a local statistic: significant units coloured by quadrant (or hot / cold spot).

    Parameters
    ----------
    result : LocalMoranResult or LocalGetisOrdResult
        The result of :func:`vicino.local_moran` or :func:`vicino.local_getis_ord`.
    locations : polygons or points
        One location per unit, in the order of ``result.ids`` (a pandas
        input's index must equal the ids): polygons are filled, points drawn
        as dots.
    ax : matplotlib Axes, optional
        Where to draw; a new figure when None.

    Returns
    -------
    matplotlib Axes

    Notes
    -----
    Units that are not significant recede in pale grey and islands (not
    tested) are hatched in rust. The colours come from the Okabe and Ito
    (2008) colour-blind-safe set. A footnote repeats the cautions: many
    tests give some significant units by chance, and significance is not a
    cause.
    """
    from .geometry import unit_locations

    _pyplot()
    from matplotlib.patches import Patch, PathPatch

    cat, colours, name = _categories(result)
    xy, geoms = unit_locations(locations, result.ids)
    ax = _axes(ax)
    order = [*colours, "not significant", "island"]
    fill = {**colours, "not significant": RECEDE, "island": RECEDE}
    counts = {c: int((cat == c).sum()) for c in order}
    if geoms is not None:
        for c in order:
            path = _compound_path(geoms[cat == c]) if counts[c] else None
            if path is None:
                continue
            hatch = "////" if c == "island" else None
            edge = ISLAND if c == "island" else "white"
            ax.add_patch(PathPatch(path, facecolor=fill[c], edgecolor=edge, hatch=hatch, linewidth=0.4, zorder=2))
        ax.autoscale_view()
    else:
        size = 18 if len(cat) <= 2000 else 4
        for c in order:
            sel = cat == c
            if c == "island":
                ax.scatter(*xy[sel].T, s=size * 2.5, facecolors="none", edgecolors=ISLAND, linewidths=1.2, zorder=4)
            else:
                ax.scatter(*xy[sel].T, s=size, color=fill[c], linewidths=0, zorder=3 if c in colours else 2)
    handles = []
    for c in order:
        if c == "island" and not counts[c]:
            continue
        island = c == "island"
        handles.append(
            Patch(
                label=f"{c} ({counts[c]})",
                facecolor=fill[c],
                edgecolor=ISLAND if island else "none",
                hatch="////" if island else None,
            )
        )
    ax.legend(handles=handles, loc="upper left", bbox_to_anchor=(1.0, 1.0), frameon=False, fontsize=8)
    adjust = {"none": "no adjustment", "fdr": "FDR adjusted", "bonferroni": "Bonferroni adjusted"}[result.adjust]
    basis = f"{result.permutations} permutations" if result.permutations else "analytic p-values"
    ax.set_title(
        f"{name}: {int(result.significant.sum())} of {result.n:,} units significant "
        f"(alpha {result.alpha:g}, {adjust}, {basis})",
        loc="left",
        fontsize=10,
    )
    ax.annotate(
        CAUTION_SHORT,
        xy=(0, 0),
        xycoords="axes fraction",
        xytext=(0, -12),
        textcoords="offset points",
        fontsize=7,
        color=INK,
        va="top",
    )
    ax.set_aspect("equal", adjustable="datalim")
    ax.set_xticks([])
    ax.set_yticks([])
    for side in ax.spines.values():
        side.set_visible(False)
    return ax


def moran_plot(values: Any, weights: Any, ax: Any = None) -> Any:
    """The Moran scatterplot: standardized values against their spatial lag (Anselin 1996).

    Parameters
    ----------
    values : 1-D array-like or pandas Series
        One value per unit, in the order of ``weights.ids``.
    weights : Weights
        Weights without self-links; row-standardized weights make the slope
        of the fitted line equal to Moran's I.
    ax : matplotlib Axes, optional
        Where to draw; a new figure when None.

    Returns
    -------
    matplotlib Axes

    Notes
    -----
    x is the standardized value (z / sd, population sd) and y its spatial lag
    W x. The least-squares line has slope z'Wz / z'z = I S0 / n, which is
    Moran's I when S0 = n (row-standardized weights without islands); the
    legend gives the slope. The four quadrants are labelled and the points
    take the quadrant colours of :func:`cluster_map`; islands (lag 0) are
    rust rings.
    """
    from . import _gateway as core
    from .weights import Weights, aligned_values, core_matrix, neighbour_counts

    _pyplot()
    if not isinstance(weights, Weights):
        raise InvalidTypeError(f"weights must be vicino.Weights, got {type(weights).__name__}; see vicino.from_matrix")
    x, _ = aligned_values(weights, values, allow_2d=False)
    # the core checks the values (finite, not constant) and standardizes them
    r = core.local_moran(core_matrix(weights), x, 0, 0, "two-sided", weights.ids)
    sx = np.asarray(r.standardized)
    sy = np.asarray(weights.lag(sx))
    island = neighbour_counts(weights) == 0
    slope = float(sx @ sy / (sx @ sx))
    intercept = float(sy.mean() - slope * sx.mean())
    ax = _axes(ax)
    quadrant = np.select([(sx > 0) & (sy > 0), (sx <= 0) & (sy <= 0), (sx > 0) & (sy <= 0)], [0, 1, 2], 3)
    size = 16 if len(sx) <= 2000 else 3
    for k, colour in enumerate(QUADRANT_COLOURS.values()):
        sel = (quadrant == k) & ~island
        ax.scatter(sx[sel], sy[sel], s=size, color=colour, alpha=0.8, linewidths=0, zorder=3)
    if island.any():
        ax.scatter(
            sx[island],
            sy[island],
            s=size * 3,
            facecolors="none",
            edgecolors=ISLAND,
            linewidths=1.2,
            zorder=4,
            label=f"island ({int(island.sum())}), lag 0",
        )
    ax.axhline(0, color=BORDER, linewidth=0.8, zorder=1)
    ax.axvline(0, color=BORDER, linewidth=0.8, zorder=1)
    lo, hi = float(sx.min()), float(sx.max())
    row_sums = np.asarray(weights.lag(np.ones(weights.n)))
    is_i = bool(np.allclose(row_sums, 1.0, rtol=1e-12, atol=0))
    label = f"slope {slope:.4f}" + (" = Moran's I" if is_i else " (= I S0 / n)")
    ax.plot([lo, hi], [intercept + slope * lo, intercept + slope * hi], color=INK, linewidth=1.4, zorder=5, label=label)
    for (fx, fy, ha, va), name in zip(
        [
            (0.98, 0.98, "right", "top"),
            (0.02, 0.02, "left", "bottom"),
            (0.98, 0.02, "right", "bottom"),
            (0.02, 0.98, "left", "top"),
        ],
        QUADRANT_COLOURS,
        strict=True,
    ):
        ax.text(
            fx,
            fy,
            name,
            transform=ax.transAxes,
            ha=ha,
            va=va,
            fontsize=9,
            color=QUADRANT_COLOURS[name],
            fontweight="bold",
        )
    ax.set_xlabel("standardized value")
    ax.set_ylabel("spatial lag of the standardized value")
    ax.set_title(f"Moran scatterplot of {len(sx):,} units", loc="left", fontsize=11)
    ax.legend(loc="lower right", bbox_to_anchor=(1.0, 0.06), frameon=False, fontsize=8)
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    return ax
