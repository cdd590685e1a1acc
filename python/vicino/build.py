"""Constructors of :class:`~vicino.Weights`."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import scipy.sparse as sp

from . import _core
from ._util import choice, make_ids, real_number, whole_number
from .errors import DuplicateLocationWarning, InvalidMatrixError, InvalidTypeError
from .geometry import as_points
from .weights import Step, Weights, call

METRICS = ("euclidean", "great_circle")
EARTH_RADIUS_KM = _core.EARTH_RADIUS_KM


def _from_search(result, ids: pd.Index, step: Step) -> Weights:
    (indptr, indices, distances), duplicates = result
    if duplicates:
        warnings.warn(
            f"{duplicates} units share their location with at least one other unit; they are at "
            "distance 0 of each other and ties are broken by position (lower first)",
            DuplicateLocationWarning,
            stacklevel=3,
        )
    ones = np.ones(len(indices))
    return Weights(indptr, indices, ones, ids, (step,), distances=distances, duplicates=duplicates)


def k_nearest(points, k: int, *, metric: str = "euclidean", ids=None, columns=None) -> Weights:
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
    result = call(_core.k_nearest, xy.reshape(-1), k, metric, ids=units)
    return _from_search(result, units, Step("k_nearest", {"k": k, "metric": metric}))


def within_distance(points, radius: float, *, metric: str = "euclidean", ids=None, columns=None) -> Weights:
    """Binary weights linking every pair of units at distance <= ``radius``.

    The bound is inclusive: a pair at exactly ``radius`` is linked. The
    result is symmetric. Units with no other unit within ``radius`` are
    islands. ``radius`` is in coordinate units for ``"euclidean"`` and in
    kilometres for ``"great_circle"``. Other parameters as in :func:`k_nearest`.
    """
    radius = real_number(radius, "radius")
    choice(metric, "metric", METRICS)
    xy, units = as_points(points, ids=ids, columns=columns)
    result = call(_core.within_distance, xy.reshape(-1), radius, metric, ids=units)
    return _from_search(result, units, Step("within_distance", {"radius": radius, "metric": metric}))


def from_matrix(matrix, *, ids=None) -> Weights:
    """Weights from a square SciPy sparse matrix or a dense array-like.

    Entries must be finite and non-negative. Explicit zeros are dropped
    (a zero weight is no link) and duplicate entries of sparse input are
    summed. The input is copied; later changes to it do not affect the
    weights.
    """
    index = getattr(matrix, "index", None) if isinstance(matrix, pd.DataFrame) else None
    if sp.issparse(matrix):
        m = sp.csr_array(matrix, copy=True)
    else:
        arr = np.asarray(matrix)
        if arr.dtype.kind not in "iufb":
            raise InvalidTypeError(f"the matrix has dtype {arr.dtype}; weights must be numeric")
        if arr.ndim != 2:
            raise InvalidMatrixError(f"the matrix must be two-dimensional and square, got shape {arr.shape}")
        m = sp.csr_array(arr.astype(np.float64))
    if m.ndim != 2 or m.shape[0] != m.shape[1]:
        raise InvalidMatrixError(f"the matrix must be square, got shape {m.shape}")
    if m.shape[0] == 0:
        raise InvalidMatrixError("the matrix is empty; weights need at least one unit")
    if m.dtype.kind not in "iufb":
        raise InvalidTypeError(f"the matrix has dtype {m.dtype}; weights must be real numbers")
    m = m.astype(np.float64)
    m.sum_duplicates()
    if not np.isfinite(m.data).all():
        bad = np.flatnonzero(~np.isfinite(m.data))[0]
        row = int(np.searchsorted(m.indptr, bad, side="right") - 1)
        raise InvalidMatrixError(
            f"weight at row {row}, column {int(m.indices[bad])} is {m.data[bad]}; weights must be finite"
        )
    m.eliminate_zeros()
    m.sort_indices()
    n = m.shape[0]
    units = make_ids(ids, n, index)
    indptr = m.indptr.astype(np.int64)
    indices = m.indices.astype(np.int64)
    call(_core.validate, n, indptr, indices, m.data, ids=units)
    return Weights(indptr, indices, m.data, units, (Step("from_matrix", {"n": n}),))
