"""A worked example on an invented region, generated in code (no downloads).

The Brannock Vale is a fictional river basin with a few hundred settlements,
and far off its coast lie the Tarrow Skerries, a handful of small fishing
villages spread thinly over open sea. The invented indicator is the share of
households with a working rain-water cistern, which follows the valley's
rainfall gradient, with a cluster of well-served villages around the market
town of Ostmere. Every name and number here is made up.

Each settlement of the vale also has a district: the Voronoi cell of the
settlement, clipped to an invented coastline and with its borders surveyed to
a 100 m grid (so a few short borders shrink to a corner where four districts
meet). Each settlement of the skerries stands on its own small islet, which
touches nothing.

Every candidate matrix is audited; the islets, islands under contiguity, are
then linked in by assumption (a ferry to the coast) and the repaired weights
join the comparison of Moran's I. The weights of every candidate are written
in the formats of :mod:`vicino.io`, with the lines that load them in R and
Octave.
"""

from __future__ import annotations

import os
import textwrap
import warnings
from pathlib import Path

import numpy as np
import pandas as pd
import shapely

from .audit import LEVELS
from .autocorrelation import compare
from .build import cliff_ord, contiguity, from_edges, inverse_distance, k_nearest, kernel_weights, within_distance
from .local import local_moran

_FIRST = [
    "Ost",
    "Bran",
    "Hal",
    "Wend",
    "Kel",
    "Mor",
    "Tav",
    "Lis",
    "Dun",
    "Fen",
    "Gar",
    "Rook",
    "Sel",
    "Thir",
    "Ush",
    "Vell",
]
_MIDDLE = ["", "an", "el", "or"]
_LAST = [
    "mere",
    "ford",
    "wick",
    "holm",
    "stead",
    "by",
    "ness",
    "combe",
    "thorpe",
    "ley",
    "brook",
    "garth",
    "wold",
    "haven",
]

CAUTIONS = (
    "Cautions: a small p-value says the pattern is unlikely under random placement of the values "
    "for this weights matrix; it is not evidence of a cause. Testing many candidate matrices or "
    "variables inflates false discoveries, so report every test you ran. The choice of weights is a "
    "modelling assumption: compare candidates, as here, rather than trusting one. Weights built from "
    "a network (trade, commuting, contacts) must not themselves depend on the outcome studied."
)
DISTRICT_CAUTION = (
    "The districts are drawn around the settlements themselves, so their contiguity is one more "
    "view of nearness, not independent information about who neighbours whom."
)
REPAIR_CAUTION = (
    "A repair adds links by assumption, not from the data: nothing in the districts says that the "
    "skerries neighbour the vale. The links to the islets stand for a ferry route, a modelling choice "
    "like any other weights; they change Moran's I (section\xa06), so report the unrepaired result beside "
    "it, or study the skerries on their own (drop_islands() removes them)."
)
NO_MATPLOTLIB = "Pictures skipped: they need matplotlib (pip install 'vicino[plot]')."
WEIGHTS_DIR = "weights"  # the subfolder of the output folder for the weights files
FORMATS = ("mtx", "txt", "npz", "csv")  # Matrix Market, 1-based triplets, SciPy, edge table

SURVEY_GRID_KM = 0.1  # district borders are surveyed to this grid
ISLET_RADIUS_KM = 1.5  # each settlement of the skerries stands on an islet this wide (radius)


def settlements(seed: int = 7) -> pd.DataFrame:
    """The invented settlements: name, x and y in km, population, cistern share (%)."""
    rng = np.random.default_rng(seed)
    n_main, n_skerries = 320, 6
    # the vale: a long basin, denser along the river (y ~ 0.35 x)
    x = rng.uniform(0, 120, n_main)
    y = 0.35 * x + rng.normal(0, 14, n_main)
    # the skerries: far offshore, each more than 25 km from the next
    angle = np.linspace(0, 2 * np.pi, n_skerries, endpoint=False)
    sx = 230 + 40 * np.cos(angle)
    sy = 60 + 40 * np.sin(angle)
    xs, ys = np.concatenate([x, sx]), np.concatenate([y, sy])
    pool = [a + m + b for a in _FIRST for m in _MIDDLE for b in _LAST]
    names = [pool[i] for i in rng.choice(len(pool), size=len(xs), replace=False)]
    # the settlement nearest the hub is Ostmere (swapping names if another one drew it)
    hub_at = int(np.argmin((xs - 70) ** 2 + (ys - 25) ** 2))
    if "Ostmere" in names:
        names[names.index("Ostmere")] = names[hub_at]
    names[hub_at] = "Ostmere"
    region = np.where(np.arange(len(xs)) < n_main, "Brannock Vale", "Tarrow Skerries")
    # rainfall gradient along the vale plus a well-served cluster near Ostmere
    hub = np.exp(-((xs - 70) ** 2 + (ys - 25) ** 2) / (2 * 12.0**2))
    share = 35 + 0.25 * xs + 30 * hub + rng.normal(0, 5, len(xs))
    population = np.round(rng.lognormal(7, 0.8, len(xs))).astype(int)
    return pd.DataFrame(
        {
            "region": region,
            "x": xs.round(3),
            "y": ys.round(3),
            "population": population,
            "cistern_share": share.clip(0, 100).round(2),
        },
        index=pd.Index(names, name="settlement"),
    )


def coastline(seed: int = 7, places: pd.DataFrame | None = None):
    """The invented coast of the Brannock Vale: a smooth wobbly closed curve (a shapely Polygon).

    A wobbly ellipse along the valley, scaled so that every settlement of
    the vale lies inside with a margin; the skerries lie far outside.
    """
    if places is None:
        places = settlements(seed)
    vale = places.loc[places["region"] == "Brannock Vale", ["x", "y"]].to_numpy()
    centre, angle = np.array([60.0, 21.0]), np.arctan(0.35)
    axes = np.array([[np.cos(angle), np.sin(angle)], [-np.sin(angle), np.cos(angle)]])
    phase = np.random.default_rng([seed, 1]).uniform(0, 2 * np.pi, 3)

    def reach(theta):  # distance from the centre to the coast, before scaling
        ellipse = 1 / np.hypot(np.cos(theta) / 70.0, np.sin(theta) / 44.0)
        wobble = 0.08 * np.sin(3 * theta + phase[0]) + 0.05 * np.sin(5 * theta + phase[1])
        return ellipse * (1 + wobble + 0.025 * np.sin(11 * theta + phase[2]))

    local = (vale - centre) @ axes.T
    scale = 1.04 * float(np.max(np.hypot(local[:, 0], local[:, 1]) / reach(np.arctan2(local[:, 1], local[:, 0]))))
    theta = np.linspace(0, 2 * np.pi, 360, endpoint=False)
    r = scale * reach(theta)
    return shapely.Polygon(np.column_stack([r * np.cos(theta), r * np.sin(theta)]) @ axes + centre)


def _polygonal(geoms: np.ndarray) -> np.ndarray:
    """Each geometry as a Polygon, or a MultiPolygon when it has several pieces
    (an overlay may return a one-piece MultiPolygon, or stray lines and points)."""
    for i in np.flatnonzero(shapely.get_type_id(geoms) != 3):
        parts = shapely.get_parts(geoms[i])
        parts = parts[shapely.get_type_id(parts) == 3]
        geoms[i] = parts[0] if len(parts) == 1 else shapely.multipolygons(parts)
    return geoms


def districts(seed: int = 7, places: pd.DataFrame | None = None) -> pd.Series:
    """The invented districts, one per settlement, as a pandas Series of shapely geometries.

    The index holds the settlement names, in the order of :func:`settlements`.
    A settlement of the vale gets its Voronoi cell clipped to
    :func:`coastline`; each settlement of the skerries gets a small round
    islet of radius ``ISLET_RADIUS_KM``. Borders are snapped to a grid of
    ``SURVEY_GRID_KM``.
    """
    if places is None:
        places = settlements(seed)
    coast = coastline(seed, places)
    points = shapely.points(places[["x", "y"]].to_numpy())
    vale = (places["region"] == "Brannock Vale").to_numpy()
    cells = shapely.get_parts(shapely.voronoi_polygons(shapely.multipoints(points[vale]), extend_to=coast.buffer(10.0)))
    # the cells come in no set order: match each settlement to the cell it lies in
    settlement, cell = shapely.STRtree(cells).query(points[vale], predicate="within")
    order = np.empty(int(vale.sum()), dtype=np.int64)
    order[settlement] = cell
    shapes = np.empty(len(places), dtype=object)
    # borders on the survey grid: the cells' corners are rounded first (a corner shared
    # by several cells is rounded alike in each), then clipped in grid precision
    grid = SURVEY_GRID_KM
    shapes[vale] = shapely.intersection(
        shapely.set_precision(cells[order], grid), shapely.set_precision(coast, grid), grid_size=grid
    )
    shapes[~vale] = shapely.set_precision(shapely.buffer(points[~vale], ISLET_RADIUS_KM, quad_segs=8), grid)
    shapes = _polygonal(shapes)
    return pd.Series(shapes, index=places.index, name="district")


def _counts_summary(weights: dict) -> pd.DataFrame:
    return pd.DataFrame(
        [
            {
                "weights": name,
                "links": w.nnz,
                "min": int(w.counts.min()),
                "mean": round(float(w.counts.mean()), 2),
                "max": int(w.counts.max()),
                "islands": len(w.islands),
            }
            for name, w in weights.items()
        ]
    ).set_index("weights")


def _fill(text: str, width: int = 78) -> str:
    """Wrap text; a no-break space (\\xa0) keeps two words on one line."""
    return textwrap.fill(text, width=width, break_on_hyphens=False).replace("\xa0", " ")


def _names(names, width: int = 78) -> str:
    return textwrap.fill(", ".join(map(str, names)), width=width, initial_indent="  ", subsequent_indent="  ")


def _district_section(places: pd.DataFrame, seed: int):
    """Contiguity of the districts: printed report, weights, and tables."""
    shapes = districts(seed, places)
    built = {"queen": contiguity(shapes, "queen"), "rook": contiguity(shapes, "rook")}
    counts = pd.DataFrame(
        {
            "region": places["region"],
            "queen": built["queen"].counts,
            "rook": built["rook"].counts,
            "area_km2": shapely.area(shapes.to_numpy()).round(2),
        },
        index=places.index,
    )
    summary = _counts_summary(built)
    in_vale = int(places["region"].eq("Brannock Vale").sum())
    print(
        _fill(
            f"Districts of the vale: {in_vale} Voronoi cells of the settlements, clipped to the coast, "
            f"borders on a {SURVEY_GRID_KM * 1000:.0f}\xa0m survey grid. Islets of the skerries: "
            f"{len(places) - in_vale} discs of {ISLET_RADIUS_KM:g}\xa0km radius. Queen: districts sharing a "
            "point of border; rook: sharing a stretch of border."
        )
    )
    print()
    print(summary.to_string())
    corner = (built["queen"] - built["rook"]).nnz // 2  # links of queen that rook lacks, each pair both ways
    if corner:
        print(f"\nQueen adds {corner} pairs of districts that meet only at a corner.")
    else:
        print("\nQueen and rook agree: no two districts meet only at a corner.")
    same = built["queen"].islands.equals(built["rook"].islands)
    for rule in ("queen",) if same else ("queen", "rook"):
        islands = built[rule].islands
        where = places.loc[islands, "region"].value_counts()
        parts = ", ".join(f"{count} in {region}" for region, count in where.items())
        under = "queen and rook" if same else rule
        print()
        print(
            _fill(f"{len(islands)} districts touch no other, islands under {under} ({parts.replace(' ', chr(0xA0))}):")
        )
        print(_names(islands))
        print("  Their rows stay empty and their lag is 0.")
    print()
    print(_fill(DISTRICT_CAUTION))
    built["Cliff-Ord"] = cliff_ord(shapes)  # border shares over centroid distances, rook links
    return built, summary, counts, shapes


def _audit_table(audits: dict) -> pd.DataFrame:
    """One row per candidate: islands, groups, and the checks at each level (ok ones counted)."""
    rows = []
    for name, report in audits.items():
        row = {"weights": name, "islands": len(report.islands), "groups": report.components.count}
        for level in LEVELS[:-1]:
            row[level] = ", ".join(f.check for f in report.findings if f.level == level) or "-"
        row["ok"] = f"{sum(f.level == 'ok' for f in report.findings)}/{len(report.findings)}"
        rows.append(row)
    return pd.DataFrame(rows).set_index("weights")


def _findings(audits: dict) -> pd.DataFrame:
    """Every finding of every audit, one row each (the audit.csv table)."""
    return pd.concat({name: report.to_frame() for name, report in audits.items()}, names=["weights", "finding"])


def repair_islets(queen, shapes: pd.Series):
    """Link the islets of the skerries into queen contiguity of the districts.

    First each island gets a link to the district with the nearest centroid
    (``connect_islands``), then each group still apart gets a link to the
    largest through its closest pair of districts (``connect_components``).
    Returns the weights after each of the two steps.
    """
    linked = queen.connect_islands(shapes, k=1)
    return linked, linked.connect_components(shapes)


def _added_pairs(before, after, step: str) -> pd.DataFrame:
    """The pairs of districts that a repair step linked, each pair once (a district outside the
    largest group first), with the distance between their centroids (as the repair found it)."""
    edges = (after - before).to_edges()  # the links of `after` that `before` lacks
    edges = edges.merge(after.to_edges()[["source", "target", "distance"]], on=["source", "target"])
    outside = before.audit().components.labels.ne(0)  # group 0 is the largest
    ahead = outside[edges["source"]].to_numpy(), outside[edges["target"]].to_numpy()
    at = after.ids.get_indexer
    first = at(edges["source"]) < at(edges["target"])
    edges = edges[(ahead[0] & ~ahead[1]) | ((ahead[0] == ahead[1]) & first)]
    return pd.DataFrame(
        {
            "step": step,
            "district": edges["source"].to_numpy(),
            "linked_to": edges["target"].to_numpy(),
            "distance_km": edges["distance"].to_numpy().round(1),
        }
    )


def _pairs_text(pairs: pd.DataFrame) -> str:
    if pairs.empty:
        return "  (none)"
    width = max(len(f"{a} - {b}") for a, b in zip(pairs["district"], pairs["linked_to"], strict=True))
    return "\n".join(
        f"  {f'{a} - {b}':<{width}}  {d:5.1f} km"
        for a, b, d in zip(pairs["district"], pairs["linked_to"], pairs["distance_km"], strict=True)
    )


def _sizes(report) -> str:
    return ", ".join(str(s) for s in report.components.sizes)


def _repair_section(places: pd.DataFrame, queen, shapes: pd.Series):
    """Audit queen contiguity, link the islets in, audit again: printed report, weights, table."""
    skerries = set(places.index[places["region"] == "Tarrow Skerries"])
    before = queen.audit()
    alone = set(before.islands)
    which = (
        "exactly the islets of the Tarrow\xa0Skerries"
        if alone == skerries
        else f"{len(alone & skerries)} of them islets of the Tarrow\xa0Skerries"
    )
    print(
        _fill(
            f"Queen contiguity leaves {len(before.islands)} islands ({which}) and splits the region into "
            f"{before.components.count} groups (sizes {_sizes(before)}). Its audit in full:"
        )
    )
    print()
    print(before)
    linked, repaired = repair_islets(queen, shapes)
    first = _added_pairs(queen, linked, "connect_islands")
    second = _added_pairs(linked, repaired, "connect_components")
    middle = linked.audit()
    print()
    print(
        _fill(
            f"connect_islands(districts, k=1) links each island to the district with the nearest centroid "
            f"({len(first)} pairs):"
        )
    )
    print(_pairs_text(first))
    among = first["district"].isin(skerries) & first["linked_to"].isin(skerries)
    note = (
        " The nearest district of an islet is another islet, so the skerries still stand apart."
        if among.all() and middle.components.count > 1
        else ""
    )
    print(
        _fill(
            f"Islands left: {len(middle.islands)}; groups: {middle.components.count} (sizes {_sizes(middle)})." + note
        )
    )
    if len(second):
        print()
        print(
            _fill(
                "connect_components(districts) then links each smaller group to the largest through its "
                f"closest pair of districts ({len(second)} pairs, a ferry to the coast):"
            )
        )
        print(_pairs_text(second))
    after = repaired.audit()
    print()
    print(
        _fill(
            f"Islands left: {len(after.islands)}; groups: {after.components.count}. "
            "The audit of the repaired queen weights:"
        )
    )
    print()
    print(after)
    print()
    print(_fill(REPAIR_CAUTION))
    return repaired, after, pd.concat([first, second], ignore_index=True)


def trade_flows(places: pd.DataFrame, seed: int = 7) -> pd.DataFrame:
    """Invented yearly cart loads between settlements: each trades with its 4 nearest market towns.

    The flows follow population and distance only (a gravity rule), never the cistern share, so
    weights built from them are exogenous to the outcome studied here.
    """
    rng = np.random.default_rng(seed + 1)
    xy = places[["x", "y"]].to_numpy()
    pop = places["population"].to_numpy(dtype=float)
    markets = np.argsort(-pop)[:40]  # the 40 largest settlements hold markets
    rows = []
    for i in range(len(places)):
        d = np.hypot(*(xy[markets] - xy[i]).T)
        for j in markets[np.argsort(d)[:4]]:
            if j != i:
                dist = max(float(np.hypot(*(xy[j] - xy[i]))), 1.0)
                loads = pop[i] * pop[j] / dist**2 / 1e4 * rng.uniform(0.8, 1.2)
                rows.append((places.index[i], places.index[j], round(max(loads, 0.01), 3)))
    return pd.DataFrame(rows, columns=["origin", "destination", "loads"])


def _more_section(places: pd.DataFrame, base: dict, seed: int, permutations: int):
    """Inverse distance, kernels and a trade network beside the point candidates; their intervals."""
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        more = {
            "inverse distance, 6 nearest": inverse_distance(places, power=1.0, k=6),
            "triangular kernel, adaptive 10": kernel_weights(places, kernel="triangular", k=10, self_weight=False),
        }
    flows = trade_flows(places, seed)
    trade = from_edges(flows, source="origin", target="destination", weight="loads", ids=places.index)
    more["trade flows"] = trade
    print(
        _fill(
            f"An invented network of {len(flows)} trade links (cart loads to the 4 nearest market towns) gives "
            "weights with vicino.from_edges. Its audit says:"
        )
    )
    for f in trade.audit().findings:
        if f.level != "ok" and "exogenous" in f.message:
            print(_fill(f"  {f.level}: {f.message}"))
    candidates = {**base, **more}
    standardized = {name: w.standardize("row", islands="keep") for name, w in candidates.items()}
    table = compare(places["cistern_share"], standardized, "moran", permutations=permutations, seed=seed)
    rows = []
    for name, w in standardized.items():
        b = w.eigenvalue_bounds()
        rows.append(
            {
                "candidate": name,
                "lambda_min": b.lambda_min,
                "lambda_max": b.lambda_max,
                "rho from": b.interval[0],
                "rho to": b.interval[1],
            }
        )
    bounds = pd.DataFrame(rows).set_index("candidate")
    both = table[["I", "p, permutation"]].join(bounds[["rho from", "rho to"]])
    print()
    print(both.to_string(float_format=lambda v: f"{v:.4g}"))
    print()
    print(
        _fill(
            "rho from / rho to: the interval (1/lambda_min, 1/lambda_max) of the eigenvalues of each "
            "row-standardized W, where an autoregressive parameter keeps I - rho W invertible. The "
            "conclusion holds under every candidate here; where candidates disagree, the choice of weights "
            "is a modelling assumption to argue, not a detail."
        )
    )
    local = local_moran(
        places["cistern_share"], standardized["6 nearest"], permutations=permutations, seed=seed, adjust="fdr"
    )
    shown = pd.Series(local.quadrant[local.significant]).value_counts()
    print()
    print(
        _fill(
            "Local Moran under '6 nearest' (conditional permutations, Benjamini-Hochberg at 5%): "
            + (", ".join(f"{c} {q}" for q, c in shown.items()) or "no")
            + " significant settlements. Each settlement is its own test; a cluster is a pattern to explain, "
            "not a cause."
        )
    )
    return table.join(bounds), standardized["6 nearest"], local


def _save_plots(out: Path, queen, repaired, shapes: pd.Series) -> list[str]:
    """PNG pictures of the queen weights before and after repair; none without matplotlib."""
    try:
        from matplotlib.figure import Figure
    except ImportError:
        return []
    drawn = {
        "queen_counts.png": lambda ax: queen.plot_counts(ax=ax),
        "queen_links.png": lambda ax: queen.plot_links(shapes, ax=ax),
        "queen_repaired_links.png": lambda ax: repaired.plot_links(shapes, ax=ax),
    }
    for name, draw in drawn.items():
        fig = Figure(figsize=(8, 4.5))  # no pyplot: nothing opens a window or keeps the figure
        draw(fig.subplots())
        fig.savefig(out / name, dpi=110, bbox_inches="tight")
    return list(drawn)


def _save_local_plots(out: Path, places: pd.DataFrame, weights, local) -> list[str]:
    """The Moran scatterplot and the cluster map as PNG; none without matplotlib."""
    try:
        from matplotlib.figure import Figure
    except ImportError:
        return []
    from .plots import cluster_map, moran_plot

    drawn = {
        "moran_scatterplot.png": lambda ax: moran_plot(places["cistern_share"], weights, ax=ax),
        "local_moran_clusters.png": lambda ax: cluster_map(local, places[["x", "y"]], ax=ax),
    }
    for name, draw in drawn.items():
        fig = Figure(figsize=(8, 5))
        draw(fig.subplots())
        fig.savefig(out / name, dpi=110, bbox_inches="tight")
    return list(drawn)


def file_stem(name: str) -> str:
    """The file name of a candidate's weights: ``"queen, repaired"`` -> ``"queen_repaired"``."""
    return "_".join("".join(c if c.isalnum() else " " for c in name.lower()).split())


def _hand_over(out: Path, weights: dict) -> None:
    """Write each candidate's weights in the formats of vicino.io and print how R and Octave load them."""
    folder = out / WEIGHTS_DIR
    folder.mkdir(exist_ok=True)
    for name, w in weights.items():
        for suffix in FORMATS:
            w.write(folder / f"{file_stem(name)}.{suffix}")
    print(f"Weights as used above (row-standardized), in the subfolder {WEIGHTS_DIR}/:")
    print(_names(file_stem(name) for name in weights))
    print(
        _fill(
            "each as .mtx (Matrix Market) and .txt (1-based triplets), with their ids beside them in .mtx.ids.csv "
            "and .txt.ids.csv, as .npz (SciPy, ids inside) and as .csv (an edge table, ids in .csv.ids.csv)."
        )
    )
    stem = file_stem("queen, repaired")
    print(f"\nTo load the repaired queen weights, from the folder {WEIGHTS_DIR}/:")
    print("  in R:")
    print(f'    library(Matrix); W <- readMM("{stem}.mtx")')
    print(f'    ids <- read.csv("{stem}.mtx.ids.csv", colClasses = "character")[[1]]')
    print("  in Octave or MATLAB:")
    print(f'    W = spconvert(load("{stem}.txt"));')
    print("  in Python:")
    print(f'    W = vicino.read("{stem}.npz")')


def _rule(title: str) -> str:
    return f"\n{title}\n{'-' * len(title)}"


def run(out_dir: str | os.PathLike | None = None, *, seed: int = 7, permutations: int = 999) -> dict[str, pd.DataFrame]:
    """Run the demo, print its report and write its tables, pictures and weights to ``out_dir``.

    ``out_dir`` receives the tables as CSV, the pictures of the queen weights
    before and after repair as PNG (with matplotlib; without it they are
    skipped with a message), and in its subfolder ``weights`` the
    row-standardized weights of every candidate as ``.mtx``, ``.txt``,
    ``.npz`` and ``.csv`` (ids in ``.ids.csv`` sidecars). Nothing is written
    when ``out_dir`` is None.
    """
    places = settlements(seed)
    print("vicino demo: the Brannock Vale and the Tarrow Skerries (an invented region)")
    print(f"{len(places)} settlements, coordinates in km")
    print("indicator: share of households with a cistern (%)")

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        candidates = {
            "6 nearest": k_nearest(places, 6),
            "10 nearest": k_nearest(places, 10),
            "within 15 km": within_distance(places, 15.0),
        }

    print(_rule("1. Candidate weights from points and their neighbour counts"))
    counts = pd.DataFrame({name: w.counts for name, w in candidates.items()})
    summary = _counts_summary(candidates)
    print(summary.to_string())
    for name, w in candidates.items():
        if len(w.islands):
            where = places.loc[w.islands, "region"].value_counts()
            parts = ", ".join(f"{count} in {region}" for region, count in where.items())
            print(f"\n'{name}' leaves {len(w.islands)} settlements without neighbours")
            print(f"({parts}):")
            print(_names(w.islands))
            print("  Their rows stay empty and their lag is 0; a k-nearest candidate reaches them.")

    print(_rule("2. Districts: queen and rook contiguity"))
    built, contiguity_summary, district_counts, shapes = _district_section(places, seed)
    candidates.update(built)
    tables = {
        "settlements": places,
        "neighbour_counts": counts,
        "candidates": summary,
        "contiguity": contiguity_summary,
        "district_counts": district_counts,
    }

    print(_rule("3. Audit of every candidate"))
    audits = {name: w.audit() for name, w in candidates.items()}
    print(
        _fill(
            "w.audit() checks islands, connected groups, symmetry, zero columns, self-links, density and "
            "uneven counts; each finding is a problem (fix it before use), a warning, a note (check that it "
            "is intended) or ok. The findings of each candidate:"
        )
    )
    print()
    print(_audit_table(audits).to_string())
    print()
    print(
        _fill(
            "k-nearest links need not run both ways (one settlement may be among another's nearest but not "
            "the reverse), hence their notes; Cliff-Ord weights are asymmetric by construction. Every "
            "finding in full is in audit.csv; the queen weights are audited in full below."
        )
    )

    print(_rule("4. Repairing the islets of the skerries"))
    repaired, audits["queen, repaired"], repairs = _repair_section(places, built["queen"], shapes)
    candidates["queen, repaired"] = repaired
    tables["repairs"] = repairs
    tables["audit"] = _findings(audits)

    print(_rule("5. Row-standardized weights and spatial lags"))
    standardized = {name: w.standardize("row", islands="keep") for name, w in candidates.items()}
    lags = pd.DataFrame({"cistern_share": places["cistern_share"]})
    for name, w in standardized.items():
        lags[f"lag, {name}"] = w.lag(places["cistern_share"])
    shown = [c for c in lags.columns if c in ("cistern_share", "lag, 6 nearest", "lag, within 15 km", "lag, queen")]
    print(lags[shown].head(8).round(2).to_string())
    print(f"(first 8 settlements; all {len(standardized)} lags are in lags.csv)")

    print(_rule("6. Moran's I of the cistern share under each candidate"))
    # one row per candidate, every inference and the neighbour counts; a few columns are shown here
    table = compare(places["cistern_share"], standardized, "moran", permutations=permutations, seed=seed)
    shown = ["I", "z, randomization", "p, randomization", "p, permutation"]
    print(table[shown].to_string(float_format=lambda v: f"{v:.4g}"))
    print()
    print(f"E[I] = -1/(n - 1) = {-1 / (len(places) - 1):.4g} under every candidate.")
    print(
        _fill(
            "z, randomization: the z-score of I under random assignment of the observed values to the "
            "units; p, randomization: its two-sided normal p-value; p, permutation: the share of "
            f"{permutations}\xa0random permutations at least as extreme (the smallest possible is "
            f"{1 / (permutations + 1):.4g}). moran.csv has every column of vicino.compare: the normality "
            "inference and the neighbour counts of each candidate as well."
        )
    )
    print("queen, rook and Cliff-Ord: the districts, row-standardized, islands kept")
    print(
        _fill(
            "queen, repaired: queen with the islets linked in by assumption (section\xa04), "
            "row-standardized, no islands left"
        )
    )

    print(_rule("7. Inverse distance, kernels, a trade network; the interval of rho"))
    base = {name: candidates[name] for name in ("6 nearest", "10 nearest", "within 15 km")}
    more_table, six, local = _more_section(places, base, seed, permutations)

    print(_rule("Reading the results"))
    print(_fill(CAUTIONS))

    tables.update({"lags": lags, "moran": table, "more_candidates": more_table, "local_moran": local.table()})
    if out_dir is not None:
        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        for name, df in tables.items():
            df.to_csv(out / f"{name}.csv")
        print(f"\nTables written to {out.resolve()}:")
        print(_names(f"{n}.csv" for n in tables))
        plots = _save_plots(out, built["queen"], repaired, shapes)
        if plots:
            print("Pictures of the queen weights (counts; links before and after repair):")
            print(_names(plots))
        else:
            print(NO_MATPLOTLIB)
        pictures = _save_local_plots(out, places, six, local)
        if pictures:
            print("The Moran scatterplot and the cluster map under '6 nearest':")
            print(_names(pictures))
        _hand_over(out, standardized)
    return tables
