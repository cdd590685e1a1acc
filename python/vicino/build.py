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
    InvalidMatrixError,
    InvalidParameterError,
    InvalidTypeError,
)
from .geometry import as_points, as_polygons
from .weights import Step, Weights, built

Metric = Literal["euclidean", "great_circle"]
METRICS = ("euclidean", "great_circle")
RULES = ("queen", "rook")
CONTIGUITY_WEIGHTS = ("binary", "border_length")
EARTH_RADIUS_KM = core.EARTH_RADIUS_KM


def _from_search(result: tuple[core.Csr, int], ids: pd.Index, step: Step) -> Weights:
    (indptr, indices, distances), duplicates = result
    if duplicates:
        warnings.warn(
            f"{duplicates} units share their location with at least one other unit; they are at "
            "distance 0 of each other and ties are broken by position (lower first)",
            DuplicateLocationWarning,
            stacklevel=3,
        )
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
        shared border, in coordinate units.
    ids : sequence, optional
        Unit ids.

    Notes
    -----
    A unit lying inside another's exterior ring (an enclave in a hole, or
    overlapping it) is its neighbour under both rules, and so are units
    whose boundaries cross. Units with empty geometry become islands, with
    a warning naming them. Contiguity is topological: longitude/latitude
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
    hemisphere). ``tolerance`` is as in :func:`contiguity`.
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
