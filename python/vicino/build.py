"""Constructors of :class:`~vicino.Weights`."""

from __future__ import annotations

import warnings
from typing import Any, Literal, cast

import numpy as np
import pandas as pd
import scipy.sparse as sp

from . import _gateway as core
from ._checks import choice, flag, real_number, whole_number
from ._ids import examples, id_differences, make_ids
from .errors import (
    DuplicateLocationWarning,
    IdError,
    InvalidInputError,
    InvalidMatrixError,
    InvalidParameterError,
    InvalidTypeError,
    InvalidValuesError,
)
from .geometry import as_points, as_polygons
from .weights import Step, Weights, built, core_matrix

Metric = Literal["euclidean", "great_circle"]
METRICS = ("euclidean", "great_circle")
RULES = ("queen", "rook")
CONTIGUITY_WEIGHTS = ("binary", "border_length")
EARTH_RADIUS_KM = core.EARTH_RADIUS_KM


def _warn_duplicates(duplicates: int, stacklevel: int = 4) -> None:
    if duplicates:
        warnings.warn(
            f"{duplicates} units share their location with at least one other unit; they are at "
            "distance 0 of each other and ties are broken by position (lower first)",
            DuplicateLocationWarning,
            stacklevel=stacklevel,
        )


def _from_search(result: tuple[core.Csr, int], ids: pd.Index, step: Step) -> Weights:
    (indptr, indices, distances), duplicates = result
    _warn_duplicates(duplicates)
    ones = np.ones(len(indices))
    return built((indptr, indices, ones), ids, (step,), links={"distance": distances}, duplicates=duplicates)


def k_nearest(points: Any, k: int, *, metric: Metric = "euclidean", ids: Any = None, columns: Any = None) -> Weights:
    """Binary weights linking each unit to its exact k nearest neighbours.

    Parameters
    ----------
    points : array-like (n, 2), DataFrame, or point geometries
        Locations. For ``metric="great_circle"`` give (longitude, latitude)
        in degrees. DataFrame columns are found by name (x/y, lon/lat,
        longitude/latitude, ...) or given with ``columns``.
    k : int
        Neighbours per unit, 1 <= k <= n - 1. The unit itself is never its
        own neighbour.
    metric : {"euclidean", "great_circle"}
        Euclidean distance is in the units of the coordinates; great-circle
        distance is in kilometres on a sphere of radius 6371.0088 km.
    ids : sequence, optional
        Unit ids; by default the index of a pandas input, else 0..n-1.
    columns : pair of column names, optional
        Coordinate columns of a DataFrame.

    Notes
    -----
    The result is asymmetric in general (j may be among i's nearest without
    i being among j's). Ties at the k-th distance go to the unit at the lower
    position; units at identical locations are each other's nearest, at
    distance 0 (a :class:`DuplicateLocationWarning` says how many).
    """
    k = whole_number(k, "k", minimum=1)
    choice(metric, "metric", METRICS)
    xy, units = as_points(points, ids=ids, columns=columns)
    result = core.k_nearest(xy, k, metric, units)
    return _from_search(result, units, Step("k_nearest", {"k": k, "metric": metric}))


def within_distance(
    points: Any, radius: float, *, metric: Metric = "euclidean", ids: Any = None, columns: Any = None
) -> Weights:
    """Binary weights linking every pair of units at distance <= ``radius``.

    The bound is inclusive: a pair at exactly ``radius`` is linked. The
    result is symmetric. Units with no other unit within ``radius`` are
    islands. ``radius`` is in coordinate units for ``"euclidean"`` and in
    kilometres for ``"great_circle"``. Other parameters as in :func:`k_nearest`.
    """
    radius = real_number(radius, "radius")
    choice(metric, "metric", METRICS)
    xy, units = as_points(points, ids=ids, columns=columns)
    result = core.within_distance(xy, radius, metric, units)
    return _from_search(result, units, Step("within_distance", {"radius": radius, "metric": metric}))


def inverse_distance(
    points: Any,
    *,
    power: float = 1.0,
    radius: float | None = None,
    k: int | None = None,
    metric: Metric = "euclidean",
    ids: Any = None,
    columns: Any = None,
    coincident: Literal["error", "drop"] = "error",
    min_distance: float | None = None,
) -> Weights:
    """Inverse-distance weights: w_ij = 1 / d_ij^power.

    Parameters
    ----------
    points : array-like (n, 2), DataFrame, or point geometries
        Locations, as :func:`k_nearest` takes them.
    power : float
        The exponent p >= 0 (1: inverse distance, 2: the gravity form).
    radius : float, optional
        Link only units within this distance (inclusive).
    k : int, optional
        Link each unit to its k nearest. Give at most one of ``radius`` and
        ``k``; with neither every unit is linked to every other, which is
        allowed up to 4,000 units (about 380 MB of links); beyond that the
        call is refused with the memory it would need.
    metric : {"euclidean", "great_circle"}
        As in :func:`k_nearest` (great circle in km).
    ids, columns
        As in :func:`k_nearest`.
    coincident : {"error", "drop"}
        Units at one location (d = 0) have an infinite weight: an error
        naming the pair by default; ``"drop"`` leaves such links out.
    min_distance : float, optional
        A floor: distances below it count as ``min_distance`` in the weight
        (the kept per-link ``distance`` stays the true one). With a floor,
        coincident units are linked with weight ``min_distance**-power``.

    Returns
    -------
    Weights
        Asymmetric with ``k`` in general; ``to_edges()`` lists each link's
        ``distance``.

    Notes
    -----
    The weights are in the units the coordinates imply (1/km for great
    circle); standardize them before comparing candidates. A weight beyond
    the range of floating point (huge powers of tiny distances) is refused.
    """
    power = real_number(power, "power")
    choice(metric, "metric", METRICS)
    choice(coincident, "coincident policy", ("error", "drop"))
    if radius is not None and k is not None:
        raise InvalidParameterError("give a radius or k, not both")
    floor = None if min_distance is None else real_number(min_distance, "min_distance")
    xy, units = as_points(points, ids=ids, columns=columns)
    params: dict[str, Any] = {"power": power, "metric": metric}
    if radius is not None:
        cutoff: tuple[str, float] = ("radius", real_number(radius, "radius"))
        params["radius"] = cutoff[1]
    elif k is not None:
        kk = whole_number(k, "k", minimum=1)
        cutoff = ("k", float(kk))
        params["k"] = kk
    else:
        cutoff = ("all", 0.0)
    if floor is not None:
        params["min_distance"] = floor
    if coincident != "error":
        params["coincident"] = coincident
    (indptr, indices, data), distances, duplicates = core.inverse_distance(
        xy, metric, power, cutoff, floor, coincident, units
    )
    _warn_duplicates(duplicates, stacklevel=3)
    return built(
        (indptr, indices, data),
        units,
        (Step("inverse_distance", params),),
        links={"distance": distances},
        duplicates=duplicates,
    )


KERNELS = ("uniform", "triangular", "epanechnikov", "quartic", "bisquare", "gaussian")


def kernel_weights(
    points: Any,
    *,
    kernel: Literal["uniform", "triangular", "epanechnikov", "quartic", "bisquare", "gaussian"] = "triangular",
    bandwidth: float | None = None,
    k: int | None = None,
    self_weight: bool = True,
    metric: Metric = "euclidean",
    ids: Any = None,
    columns: Any = None,
) -> Weights:
    """Kernel weights: w_ij = K(d_ij / h_i) for d_ij <= h_i.

    Parameters
    ----------
    points : array-like (n, 2), DataFrame, or point geometries
        Locations, as :func:`k_nearest` takes them.
    kernel : {"uniform", "triangular", "epanechnikov", "quartic", "gaussian"}
        With u = d / h on [0, 1] (Silverman 1986, table 3.1, on the unit
        interval): uniform 1/2; triangular 1 - u; Epanechnikov
        3/4 (1 - u^2); quartic (also "bisquare") 15/16 (1 - u^2)^2;
        Gaussian exp(-u^2 / 2) / sqrt(2 pi), truncated at u = 1 (the
        bandwidth is the search radius). Silverman writes the Epanechnikov
        kernel for unit variance, on |t| < sqrt 5 (t = sqrt 5 u).
    bandwidth : float, optional
        A fixed bandwidth h > 0 for every unit (coordinate units, or km).
    k : int, optional
        An adaptive bandwidth: h_i is the distance from unit i to its k-th
        nearest neighbour (Fotheringham, Brunsdon and Charlton 2002), so
        every unit has about k neighbours and the weights are asymmetric.
        Give exactly one of ``bandwidth`` and ``k``.
    self_weight : bool
        Whether each unit also weighs itself, w_ii = K(0) (the usual form
        for smoothing; Moran's I needs ``self_weight=False``).
    metric, ids, columns
        As in :func:`k_nearest`.

    Returns
    -------
    Weights
        ``to_edges()`` lists each link's ``distance`` (0 for the self weight).

    Notes
    -----
    A kernel that vanishes at u = 1 (triangular, Epanechnikov, quartic) gives
    no link to a unit exactly at the bandwidth: a zero weight is no link. A
    unit whose k-th nearest neighbour shares its location has bandwidth 0 and
    weighs only the units at its location.
    """
    choice(kernel, "kernel", KERNELS)
    choice(metric, "metric", METRICS)
    self_weight = flag(self_weight, "self_weight")
    if (bandwidth is None) == (k is None):
        raise InvalidParameterError("give exactly one of bandwidth= (fixed) and k= (adaptive)")
    params: dict[str, Any] = {"kernel": kernel, "metric": metric, "self_weight": self_weight}
    if bandwidth is not None:
        h = real_number(bandwidth, "bandwidth")
        if not (np.isfinite(h) and h > 0):
            raise InvalidParameterError(f"bandwidth must be a finite number > 0, got {h}")
        spec: tuple[str, float] = ("fixed", h)
        params["bandwidth"] = h
    else:
        kk = whole_number(k, "k", minimum=1)
        spec = ("adaptive", float(kk))
        params["k"] = kk
    xy, units = as_points(points, ids=ids, columns=columns)
    (indptr, indices, data), distances, duplicates = core.kernel_weights(xy, metric, kernel, spec, self_weight, units)
    _warn_duplicates(duplicates, stacklevel=3)
    return built(
        (indptr, indices, data),
        units,
        (Step("kernel_weights", params),),
        links={"distance": distances},
        duplicates=duplicates,
    )


def _edge_column(edges: Any, name: Any, what: str) -> np.ndarray:
    if isinstance(edges, pd.DataFrame):
        if name not in edges.columns:
            raise InvalidInputError(
                f"the edge table has no column {name!r} for the {what}; it has {examples(list(edges.columns))} "
                f"(name the column with {what}=...)"
            )
        return edges[name].to_numpy()
    return np.asarray(name)


def from_edges(
    edges: Any,
    *,
    source: Any = "source",
    target: Any = "target",
    weight: Any = None,
    ids: Any = None,
    directed: bool = True,
    duplicates: Literal["sum", "mean", "max", "error"] = "sum",
    self_loops: Literal["drop", "keep", "error"] = "drop",
) -> Weights:
    """Weights from a network: an edge list of (source, target[, weight]).

    For non-spatial ties (trade flows, commuting, migration, friendship or
    contact networks). Each edge i -> j is the link from row i to column j.

    Parameters
    ----------
    edges : pandas.DataFrame or None
        The edge table. With ``edges=None``, ``source``, ``target`` and
        ``weight`` are the columns themselves (arrays).
    source, target : column name or array
        The ids at the two ends of each edge (any hashable type).
    weight : column name or array, optional
        The tie strength (finite, >= 0); by default every edge weighs 1.
        Edges weighing 0 are no links and are left out.
    ids : sequence, optional
        All units, in row order; units without edges become islands, and an
        edge naming an id not listed is an error. By default the ids seen in
        the edges, in order of first appearance.
    directed : bool
        False adds each edge both ways (an undirected network).
    duplicates : {"sum", "mean", "max", "error"}
        How repeated (source, target) edges merge.
    self_loops : {"drop", "keep", "error"}
        Edges from a unit to itself: dropped with a warning (the default),
        kept, or an error.

    Returns
    -------
    Weights
        Marked as built from a network: its audit carries the exogeneity
        caution. The ties must be determined independently of the outcome
        studied (a trade network shaped by the prices you model is not), or
        the spatial effects estimated with it are biased.
    """
    directed = flag(directed, "directed")
    choice(duplicates, "duplicates policy", ("sum", "mean", "max", "error"))
    choice(self_loops, "self-loops policy", ("drop", "keep", "error"))
    if edges is not None and not isinstance(edges, pd.DataFrame):
        raise InvalidTypeError("edges must be a pandas DataFrame, or None with the columns given as arrays")
    src = _edge_column(edges, source, "source")
    dst = _edge_column(edges, target, "target")
    if src.ndim != 1 or dst.shape != src.shape:
        raise InvalidInputError(
            f"source and target must be one-dimensional and of one length, got {src.shape} and {dst.shape}"
        )
    if weight is None:
        w = np.ones(len(src))
    else:
        raw = _edge_column(edges, weight, "weight")
        w = as_edge_weights(raw, len(src))
    if pd.isna(src).any() or pd.isna(dst).any():
        bad = int(np.flatnonzero(pd.isna(src) | pd.isna(dst))[0])
        raise InvalidInputError(f"the edge at row {bad} has a missing source or target; drop it first")
    units = make_ids(ids, len(ids), None) if ids is not None else pd.Index(pd.unique(np.concatenate([src, dst])))
    if len(units) == 0:
        raise InvalidInputError("there are no units: give ids=, or at least one edge")
    rows, cols = units.get_indexer(pd.Index(src)), units.get_indexer(pd.Index(dst))
    unknown = pd.Index(src[rows < 0]).append(pd.Index(dst[cols < 0])).unique()
    if len(unknown):
        raise IdError(
            f"{len(unknown)} id(s) in the edges are not in ids: {examples(unknown)}; "
            "add them to ids or drop those edges"
        )
    keep = w > 0  # a zero weight is no link
    zeros = int((~keep).sum())
    rows, cols, w = rows[keep], cols[keep], w[keep]
    order = np.flatnonzero(keep)
    if not directed:
        rows, cols, w, order = (
            np.concatenate([rows, cols]),
            np.concatenate([cols, rows]),
            np.concatenate([w, w]),
            np.concatenate([order, order]),
        )
    csr, _, dropped, merged = core.from_edges(
        len(units), rows, cols, w, duplicates, self_loops, units, edge_name=lambda e: f"the edge at row {order[e]}"
    )
    if dropped:
        warnings.warn(
            f"{dropped} self-loop(s) (edges from a unit to itself) were dropped; pass self_loops='keep' to keep them",
            UserWarning,
            stacklevel=2,
        )
    params: dict[str, Any] = {"edges": len(src), "directed": directed, "network": True}
    if merged:
        params["duplicates"] = f"{merged} merged ({duplicates})"
    if dropped:
        params["self_loops_dropped"] = dropped
    if zeros:
        params["zero_weights_dropped"] = zeros
    return built(csr, units, (Step("from_edges", params),))


def as_edge_weights(raw: np.ndarray, m: int) -> np.ndarray:
    """Edge weights as float64: finite and >= 0, refused otherwise with the edge named."""
    try:
        w = np.asarray(raw, dtype=np.float64)
    except (TypeError, ValueError):
        raise InvalidTypeError("the edge weights are not all numbers; convert them first (pd.to_numeric)") from None
    if w.shape != (m,):
        raise InvalidInputError(f"the weights must hold one number per edge ({m}), got shape {w.shape}")
    bad = np.flatnonzero(~np.isfinite(w) | (w < 0))
    if len(bad):
        raise InvalidValuesError(
            f"the edge at row {int(bad[0])} weighs {w[bad[0]]}; edge weights must be finite and >= 0 "
            f"({len(bad)} such edge(s))"
        )
    return w


def from_networkx(graph: Any, *, weight: str | None = "weight", ids: Any = None) -> Weights:
    """Weights from a networkx graph: nodes are units (in node order), edges are links.

    An undirected graph gives links both ways. ``weight`` names the edge
    attribute holding tie strength (edges without it weigh 1; None: every edge
    weighs 1). Other options as in :func:`from_edges`, which this calls.
    """
    try:
        import networkx as nx
    except ImportError:
        raise InvalidTypeError("from_networkx needs networkx: pip install networkx") from None
    if not isinstance(graph, nx.Graph):
        raise InvalidTypeError(f"graph must be a networkx graph, got {type(graph).__name__}")
    if graph.is_multigraph():
        raise InvalidInputError("multigraphs are not read: merge parallel edges first (nx.DiGraph(graph))")
    nodes = list(graph.nodes) if ids is None else ids
    pairs = list(graph.edges(data=True))
    src = np.empty(len(pairs), dtype=object)
    dst = np.empty(len(pairs), dtype=object)
    src[:] = [a for a, _, _ in pairs]
    dst[:] = [b for _, b, _ in pairs]
    w = np.array([d.get(weight, 1.0) if weight is not None else 1.0 for _, _, d in pairs], dtype=float)
    out = from_edges(
        None,
        source=src,
        target=dst,
        weight=w,
        ids=nodes,
        directed=graph.is_directed(),
        duplicates="error",
        self_loops="keep",
    )
    _, indptr, indices, data = core_matrix(out)
    step = Step(
        "from_networkx", {"nodes": len(out.ids), "edges": len(pairs), "directed": graph.is_directed(), "network": True}
    )
    return built((indptr, indices, data), out.ids, (step,))


def _frame_matrix(frame: pd.DataFrame) -> tuple[np.ndarray, pd.Index]:
    """A square DataFrame as an array whose columns follow its index (labels must match)."""
    rows, cols = frame.index, frame.columns
    if not cols.is_unique:
        dup = cols[cols.duplicated()].unique()
        raise IdError(f"the matrix's column labels repeat: {examples(dup)}; each unit needs one column")
    if not rows.equals(cols):
        parts = id_differences(
            rows, cols, missing="row label(s) without a column", extra="column label(s) without a row"
        )
        if parts:
            raise IdError(
                "the matrix's column labels must be the same units as its row labels ("
                + "; ".join(parts)
                + "); pass a NumPy array (or .to_numpy()) to use positions instead of labels"
            )
        frame = frame.reindex(columns=rows)  # same units, other order: columns follow the rows
    for c, dtype in zip(frame.columns, frame.dtypes, strict=True):
        if pd.api.types.is_bool_dtype(dtype) or not pd.api.types.is_numeric_dtype(dtype):
            raise InvalidTypeError(f"column {c!r} has dtype {dtype}; weights must be real numbers")
    if frame.isna().to_numpy().any():
        r, c = np.argwhere(frame.isna().to_numpy())[0]
        raise InvalidMatrixError(
            f"the weight from {rows[r]!r} to {frame.columns[c]!r} is missing (NaN / NA); weights must be numbers"
        )
    return frame.to_numpy(dtype=np.float64), rows


def from_matrix(matrix: Any, *, ids: Any = None, network: bool = False) -> Weights:
    """Weights from a square SciPy sparse matrix, a dense array-like or a square DataFrame.

    Parameters
    ----------
    matrix : scipy.sparse matrix or array, numpy array-like, or pandas DataFrame
        Entry (i, j) is the weight of unit j in unit i's lag. Entries must be
        finite and non-negative; explicit zeros are dropped (a zero weight
        is no link) and duplicate entries of sparse input are summed. A
        DataFrame's index gives the ids and its columns must be the same
        units (in any order: they are matched by label).
    ids : sequence, optional
        Unit ids (by default a DataFrame's index, else 0..n-1).
    network : bool
        Set True when the matrix encodes a non-spatial network (trade or
        migration flows, commuting, social contacts): it is recorded in the
        recipe and :meth:`Weights.audit` then cautions that the network must
        be exogenous to the outcome.

    Returns
    -------
    Weights
        A copy: later changes to the input do not affect it.
    """
    network = flag(network, "network")
    index = None
    if isinstance(matrix, pd.DataFrame):
        matrix, index = _frame_matrix(matrix)
    if isinstance(matrix, np.ma.MaskedArray):
        if np.ma.getmaskarray(matrix).any():
            raise InvalidMatrixError("the matrix has masked entries; fill them (0 for no link) first")
        matrix = matrix.data
    if sp.issparse(matrix):
        m = sp.csr_array(cast(Any, matrix), copy=True)
    else:
        try:
            arr = np.asarray(matrix)
        except (ValueError, TypeError) as exc:
            raise InvalidMatrixError(f"the matrix could not be read as an array ({exc}); give a square table") from None
        if arr.dtype.kind not in "iuf":
            raise InvalidTypeError(f"the matrix has dtype {arr.dtype}; weights must be real numbers")
        if arr.ndim != 2:
            raise InvalidMatrixError(f"the matrix must be two-dimensional and square, got shape {arr.shape}")
        m = sp.csr_array(arr.astype(np.float64))
    if m.ndim != 2 or m.shape[0] != m.shape[1]:
        raise InvalidMatrixError(f"the matrix must be square, got shape {m.shape}")
    if m.shape[0] == 0:
        raise InvalidMatrixError("the matrix is empty; weights need at least one unit")
    if m.dtype.kind not in "iuf":
        raise InvalidTypeError(f"the matrix has dtype {m.dtype}; weights must be real numbers")
    m = m.astype(np.float64)
    m.sum_duplicates()
    m.eliminate_zeros()
    m.sort_indices()
    n = m.shape[0]
    units = make_ids(ids, n, index)
    indptr, indices, data = core.validate(n, m.indptr, m.indices, m.data, units)
    params: dict[str, Any] = {"n": n, "network": True} if network else {"n": n}
    return built((indptr, indices, data), units, (Step("from_matrix", params),))


def _warn_empty(empty: np.ndarray, ids: pd.Index) -> None:
    if empty.any():
        warnings.warn(
            f"{int(empty.sum())} unit(s) have empty geometry and become islands: ids {examples(ids[empty])}",
            UserWarning,
            stacklevel=3,
        )


def contiguity(
    polygons: Any,
    rule: Literal["queen", "rook"] = "queen",
    *,
    tolerance: float = 0.0,
    weight: Literal["binary", "border_length"] = "binary",
    ids: Any = None,
) -> Weights:
    """Contiguity weights: units are neighbours when their boundaries meet.

    Parameters
    ----------
    polygons : GeoDataFrame, GeoSeries, shapely array or list of Polygon / MultiPolygon
        One (multi)polygon per unit, holes included. Ids come from the index
        of a pandas input unless ``ids`` is given.
    rule : {"queen", "rook"}
        ``queen``: the boundaries share at least one point. ``rook``: they
        share a stretch of boundary of positive length.
    tolerance : float
        In coordinate units. 0 (the default) is exact: a vertex of one unit
        must lie exactly on the other's boundary, though borders need not
        have matching vertices (a vertex in the middle of the other's edge
        counts). With ``tolerance > 0``, boundaries that come within
        ``tolerance`` of each other touch (queen), and for rook the
        near-coincident stretch must be longer than ``tolerance``; this
        absorbs the gaps and slivers of digitized borders.
    weight : {"binary", "border_length"}
        ``border_length`` (rook only) weighs each link by the length of the
        shared border, in coordinate units (always positive, see Notes).
    ids : sequence, optional
        Unit ids.

    Notes
    -----
    A unit lying inside another's exterior ring (an enclave in a hole, or
    overlapping it) is its neighbour under both rules, and so are units
    whose boundaries cross. Units with empty geometry become islands, with
    a warning naming them.

    The shared border length has one definition, so that every rook link
    has a positive length: the length of each unit's boundary lying within
    the other unit (holes filled), counting their common boundary once,
    ``|bd A & B| + |bd B & A| - |bd A & bd B|``. For units that only touch,
    it is their common border (shapely's
    ``intersection(a.boundary, b.boundary).length``); for units whose
    boundaries cross, the perimeter of their overlap plus any common border
    outside it; for an enclave, its perimeter. (Units whose interiors
    overlap although their boundaries only touch, without crossing, keep
    their common border.)

    Coordinates of any finite size up to 1e150 give the same links, and
    lengths scaled exactly, as the same polygons near unit scale (they are
    rescaled by a power of two, exactly, and the tolerance with them); a
    non-zero coordinate more than 10^138 times smaller than the largest is
    refused with :class:`~vicino.InvalidInputError`. Contiguity is topological: longitude/latitude
    input works unchanged (lengths are then in degrees; use
    :func:`cliff_ord` with ``metric="great_circle"`` for kilometres).
    The result is symmetric; ``to_edges()`` lists each link's
    ``border_length`` and ``perimeter`` gives each unit's perimeter.
    """
    choice(rule, "contiguity rule", RULES)
    choice(weight, "contiguity weight", CONTIGUITY_WEIGHTS)
    tolerance = real_number(tolerance, "tolerance")
    if weight == "border_length" and rule != "rook":
        raise InvalidParameterError(
            'weight="border_length" needs rule="rook": queen links at a single point have no length'
        )
    buffers, units, empty = as_polygons(polygons, ids=ids)
    (indptr, indices, lengths), perimeter = core.contiguity(buffers, rule, tolerance, units)
    _warn_empty(empty, units)
    data = lengths if weight == "border_length" else np.ones(len(indices))
    params: dict[str, Any] = {"rule": rule, "tolerance": tolerance}
    if weight != "binary":
        params["weight"] = weight
    return built(
        (indptr, indices, data),
        units,
        (Step("contiguity", params),),
        links={"border_length": lengths},
        units={"perimeter": perimeter},
    )


def cliff_ord(
    polygons: Any,
    *,
    border_power: float = 1.0,
    distance_power: float = 1.0,
    metric: Metric = "euclidean",
    tolerance: float = 0.0,
    ids: Any = None,
) -> Weights:
    """Cliff-Ord weights: w_ij = b_ij^a / d_ij^b for rook neighbours.

    After Cliff and Ord (1981): b_ij is the share of unit i's perimeter that
    it shares with j, d_ij the distance between the units' centroids
    (area-weighted centroids of the polygons, holes subtracted), a =
    ``border_power`` and b = ``distance_power``; ``distance_power=2`` gives
    the gravity form. The weights are asymmetric in general, since i's share
    of its border with j differs from j's share with i.

    With ``metric="great_circle"`` the polygons are in longitude/latitude:
    border lengths and perimeters are measured along great circles and d_ij
    is the great-circle distance in km between centroids computed in the
    longitude/latitude plane (adequate for units much smaller than a
    hemisphere); longitudes must lie in [-180, 360] and latitudes in
    [-90, 90]. ``tolerance`` and the border lengths are as in
    :func:`contiguity`.

    Parameters
    ----------
    polygons : GeoDataFrame, GeoSeries, shapely array or list of Polygon / MultiPolygon
        One (multi)polygon per unit.
    border_power, distance_power : float
        The powers a and b: finite and >= 0, else
        :class:`~vicino.InvalidParameterError` naming the parameter.
    metric : {"euclidean", "great_circle"}
        How lengths and distances are measured.
    tolerance : float
        As in :func:`contiguity`.
    ids : sequence, optional
        Unit ids.

    Returns
    -------
    Weights
        The weights, with ``perimeter`` per unit. Weights are computed so
        that large powers neither overflow nor underflow on the way (in log
        space when needed); a weight beyond the range of floating point
        (about 1e-308 to 1e308) is refused with
        :class:`~vicino.InvalidMatrixError` rather than stored as 0 or
        infinity. Two neighbours whose centroids coincide are refused
        unless ``distance_power=0``.
    """
    a = real_number(border_power, "border_power")
    b = real_number(distance_power, "distance_power")
    tolerance = real_number(tolerance, "tolerance")
    choice(metric, "metric", METRICS)
    buffers, units, empty = as_polygons(polygons, ids=ids)
    (indptr, indices, data), perimeter = core.cliff_ord(buffers, a, b, tolerance, metric, units)
    _warn_empty(empty, units)
    step = Step(
        "cliff_ord",
        {"border_power": a, "distance_power": b, "metric": metric, "tolerance": tolerance, "symmetric": False},
    )
    return built((indptr, indices, data), units, (step,), units={"perimeter": perimeter})
