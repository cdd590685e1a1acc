"""The one way into the compiled core (:mod:`vicino._core`).

Every call goes through a function here, which

* hands the core private, read-only snapshots of the arrays (contiguous,
  float64 / int64 in native byte order): the core reads them without the
  GIL, so an array another thread could write to is copied first, and the
  result never depends on what other threads do meanwhile;
* marks the arrays the core returns read-only, so weights built from them
  stay immutable;
* turns the positions that core errors carry into ids (:func:`_ids.render`).

Nothing here computes: the core does.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, TypeVar

import numpy as np
import numpy.typing as npt
import pandas as pd

from . import _core
from ._checks import whole_number
from ._ids import render
from .errors import InvalidInputError, VicinoError

R = TypeVar("R")
Ints = npt.NDArray[np.int64]
Floats = npt.NDArray[np.float64]
Csr = tuple[Ints, Ints, Floats]
CoreMatrix = tuple[int, Ints, Ints, Floats]  # (n, indptr, indices, data) of a Weights
Packed = _core.Packed  # a Weights packed for repeated lags
Polygons = tuple[str, Any, Ints]

EARTH_RADIUS_KM: float = _core.EARTH_RADIUS_KM


def _is_frozen(a: Any) -> bool:
    """Whether nobody can write to the memory of ``a``: read-only all the way to its owner."""
    while isinstance(a, np.ndarray):
        if a.flags.writeable:
            return False
        a = a.base
    return a is None or isinstance(a, bytes) or type(a).__name__ == "PySliceContainer"


def frozen(values: Any, dtype: type = np.float64) -> np.ndarray:
    """A C-contiguous, native-order, read-only snapshot of ``values`` that nobody else can write."""
    if isinstance(values, np.ma.MaskedArray):
        raise InvalidInputError("masked arrays must be filled or have their masked rows dropped first")
    arr: np.ndarray = np.ascontiguousarray(values, dtype=dtype)
    if _is_frozen(arr):
        return arr
    shared = isinstance(values, np.ndarray) and np.may_share_memory(arr, values)
    if shared or arr is values:
        arr = arr.copy()
    arr.flags.writeable = False
    return arr


def owned(a: np.ndarray) -> np.ndarray:
    """An array the core returned, made read-only (nobody else holds it)."""
    a.flags.writeable = False
    return a


def _owned_csr(csr: Csr) -> Csr:
    return owned(csr[0]), owned(csr[1]), owned(csr[2])


def _run(fn: Callable[..., R], ids: pd.Index | None, *args: Any, edge_name: Callable[[int], str] | None = None) -> R:
    try:
        return fn(*args)
    except VicinoError as err:
        raise render(err, ids, edge_name) from None


# ---- memory budget ----------------------------------------------------------
def get_memory_limit() -> int:
    """The memory budget of vicino's computations, in bytes."""
    return _core.get_memory_limit()


def set_memory_limit(nbytes: int | None) -> None:
    """Set the memory budget of vicino's computations in bytes.

    Parameters
    ----------
    nbytes : int or None
        At least 1 byte and below 2**64; None restores the default (half
        the physical memory).
    """
    if nbytes is not None:
        nbytes = whole_number(nbytes, "nbytes", minimum=1, maximum=2**64 - 1)
    _core.set_memory_limit(nbytes)


# ---- builders ----------------------------------------------------------------
def k_nearest(xy: Any, k: int, metric: str, ids: pd.Index) -> tuple[Csr, int]:
    """K nearest neighbours: ((indptr, indices, distances), units sharing a location)."""
    csr, dup = _run(_core.k_nearest, ids, frozen(xy).reshape(-1), k, metric)
    return _owned_csr(csr), dup


def within_distance(xy: Any, radius: float, metric: str, ids: pd.Index) -> tuple[Csr, int]:
    """All neighbours within a distance: ((indptr, indices, distances), units sharing a location)."""
    csr, dup = _run(_core.within_distance, ids, frozen(xy).reshape(-1), radius, metric)
    return _owned_csr(csr), dup


def inverse_distance(
    xy: Any, metric: str, power: float, cutoff: tuple[str, float], floor: float | None, coincident: str, ids: pd.Index
) -> tuple[Csr, Floats, int]:
    """Inverse-distance weights: ((indptr, indices, weights), distances, units sharing a location)."""
    csr, dist, dup = _run(_core.inverse_distance, ids, frozen(xy).reshape(-1), metric, power, cutoff, floor, coincident)
    return _owned_csr(csr), owned(dist), dup


def kernel_weights(
    xy: Any, metric: str, kernel: str, bandwidth: tuple[str, float], self_weight: bool, ids: pd.Index
) -> tuple[Csr, Floats, int]:
    """Kernel weights: ((indptr, indices, weights), distances, units sharing a location)."""
    csr, dist, dup = _run(_core.kernel_weights, ids, frozen(xy).reshape(-1), metric, kernel, bandwidth, self_weight)
    return _owned_csr(csr), owned(dist), dup


def validate(n: int, indptr: Any, indices: Any, data: Any, ids: pd.Index | None) -> tuple[Ints, Ints, Floats]:
    """Snapshots of CSR buffers after the full check (canonical, weights finite and positive)."""
    p, i, d = frozen(indptr, np.int64), frozen(indices, np.int64), frozen(data)
    _run(_core.validate, ids, n, p, i, d)
    return p, i, d


def contiguity(polygons: Polygons, rule: str, tolerance: float, ids: pd.Index) -> tuple[Csr, Floats]:
    """Contiguity: ((indptr, indices, shared border lengths), perimeters)."""
    csr, perimeter, _ = _run(_core.contiguity, ids, _frozen_polygons(polygons), rule, tolerance, "euclidean")
    return _owned_csr(csr), owned(perimeter)


def cliff_ord(
    polygons: Polygons, border_power: float, distance_power: float, tolerance: float, metric: str, ids: pd.Index
) -> tuple[Csr, Floats]:
    """Cliff-Ord weights: ((indptr, indices, weights), perimeters)."""
    csr, perimeter, _ = _run(
        _core.cliff_ord, ids, _frozen_polygons(polygons), border_power, distance_power, tolerance, metric
    )
    return _owned_csr(csr), owned(perimeter)


def centroids(polygons: Polygons, ids: pd.Index | None) -> Floats:
    """Area-weighted centroids as an (n, 2) array (NaN rows for empty units)."""
    return owned(_run(_core.centroids, ids, _frozen_polygons(polygons)).reshape(-1, 2))


def _frozen_polygons(polygons: Polygons) -> Polygons:
    kind, values, offsets = polygons
    return kind, frozen(values, np.uint8 if kind == "wkb" else np.float64), frozen(offsets, np.int64)


def from_edges(
    n: int,
    source: np.ndarray,
    target: np.ndarray,
    weight: np.ndarray,
    duplicates: str,
    self_loops: str,
    ids: pd.Index,
    edge_name: Callable[[int], str] | None = None,
) -> tuple[Csr, Ints, int, int]:
    """Weights from edges: (csr, first edge of each entry, self-loops dropped, duplicates merged)."""
    csr, first, dropped, merged = _run(
        _core.from_edges,
        ids,
        n,
        frozen(source, np.int64),
        frozen(target, np.int64),
        frozen(weight),
        duplicates,
        self_loops,
        edge_name=edge_name,
    )
    return _owned_csr(csr), owned(first), dropped, merged


# ---- files --------------------------------------------------------------------------
def read_matrix_market(path: str) -> tuple[int, Csr, str | None, bool, bool]:
    """(n, csr, vicino record, stored as symmetric, pattern) of a Matrix Market file."""
    n, csr, record, symmetric, pattern = _run(_core.read_matrix_market, None, path)
    return n, _owned_csr(csr), record, symmetric, pattern


def write_matrix_market(path: str, w: CoreMatrix, record: str, ids: pd.Index) -> bool:
    """Write a Matrix Market file; whether it was stored as symmetric."""
    return _run(_core.write_matrix_market, ids, path, w, record)


def read_triplet(path: str) -> tuple[int, Csr, str | None, bool, bool]:
    """(n, csr, vicino record, False, False) of a triplet file."""
    n, csr, record, symmetric, pattern = _run(_core.read_triplet, None, path)
    return n, _owned_csr(csr), record, symmetric, pattern  # a triplet file is never stored as symmetric


def write_triplet(path: str, w: CoreMatrix, record: str, ids: pd.Index) -> None:
    """Write a triplet file with the closing ``n n 0`` line."""
    _run(_core.write_triplet, ids, path, w, record)


def write_int_ids(path: str, ids: pd.Index) -> None:
    """Write whole-number ids after the ``id:int64`` header."""
    _run(_core.write_int_ids, None, path, frozen(np.asarray(ids), np.int64))


def read_int_ids(path: str) -> tuple[Ints | None, str | None]:
    """(ids, None) of an ``id:int64`` ids file, or (None, its header)."""
    ids, header = _run(_core.read_int_ids, None, path)
    return (None if ids is None else owned(ids)), header


# ---- using weights -------------------------------------------------------------
def neighbour_counts(w: CoreMatrix, ids: pd.Index) -> Ints:
    """Links of each unit to other units."""
    return owned(_run(_core.neighbour_counts, ids, w))


def standardize(w: CoreMatrix, method: str, keep_islands: bool, ids: pd.Index) -> Floats:
    """New data after standardization."""
    return owned(_run(_core.standardize, ids, w, method, keep_islands))


def spectral_radius(w: CoreMatrix, ids: pd.Index) -> tuple[float, int, str, float]:
    """(spectral radius, iterations, method, error bound)."""
    return _run(_core.spectral_radius, ids, w)


def eigenvalue_bounds(
    w: CoreMatrix, tol: float, ids: pd.Index
) -> tuple[tuple[float, float, str], tuple[float, float, str], int]:
    """((smallest real eigenvalue, error, method), (largest, error, method), products with W)."""
    return _run(_core.eigenvalue_bounds, ids, w, tol)


def lag(w: CoreMatrix | _core.Packed, values: np.ndarray, ids: pd.Index) -> np.ndarray:
    """W x for a vector, W X for an (n, m) array; ``w`` as buffers or packed."""
    x = frozen(values)
    if isinstance(w, _core.Packed):
        return _run(_core.lag_packed_vector if x.ndim == 1 else _core.lag_packed_columns, ids, w, x)
    if x.ndim == 1:
        return _run(_core.lag_vector, ids, w, x)
    return _run(_core.lag_columns, ids, w, x)


def pack(w: CoreMatrix) -> _core.Packed | None:
    """The packed form of a matrix for repeated lags (None when it does not fit 32-bit positions)."""
    return _run(_core.pack, None, w)


def moran(w: CoreMatrix, x: np.ndarray, permutations: int, seed: int, alternative: str, ids: pd.Index) -> Any:
    """Global Moran's I (a `_core.MoranOut`)."""
    return _run(_core.moran, ids, w, frozen(x), permutations, seed, alternative)


def local_moran(w: CoreMatrix, x: np.ndarray, permutations: int, seed: int, alternative: str, ids: pd.Index) -> Any:
    """Local Moran's I of every unit (a `_core.LocalMoranOut`)."""
    return _run(_core.local_moran, ids, w, frozen(x), permutations, seed, alternative)


def local_getis_ord(
    w: CoreMatrix, x: np.ndarray, star: bool, permutations: int, seed: int, alternative: str, ids: pd.Index
) -> Any:
    """Local G_i or G_i* of every unit (a `_core.LocalGetisOrdOut`)."""
    return _run(_core.local_getis_ord, ids, w, frozen(x), star, permutations, seed, alternative)


def adjust_p_values(p: np.ndarray, method: str) -> Floats:
    """P-values adjusted for multiple tests; NaN stays NaN and is not counted."""
    return owned(_run(_core.adjust_p_values, None, frozen(p), method))


def geary(w: CoreMatrix, x: np.ndarray, permutations: int, seed: int, alternative: str, ids: pd.Index) -> Any:
    """Global Geary's C (a `_core.GlobalOut`)."""
    return _run(_core.geary, ids, w, frozen(x), permutations, seed, alternative)


def getis_ord(w: CoreMatrix, x: np.ndarray, permutations: int, seed: int, alternative: str, ids: pd.Index) -> Any:
    """Global Getis-Ord G (a `_core.GlobalOut`; its normality moments are NaN)."""
    return _run(_core.getis_ord, ids, w, frozen(x), permutations, seed, alternative)


def join_counts(w: CoreMatrix, x: np.ndarray, permutations: int, seed: int, alternative: str, ids: pd.Index) -> Any:
    """Join counts of 0 / 1 values: ((s0, s1, s2), units coded 1, [both 1, both 0, unlike])."""
    return _run(_core.join_counts, ids, w, frozen(x), permutations, seed, alternative)


def health(w: CoreMatrix, ids: pd.Index) -> Any:
    """The facts of an audit (a `_core.HealthOut`)."""
    return _run(_core.health, ids, w)


def components(w: CoreMatrix, ids: pd.Index) -> tuple[Ints, list[int]]:
    """Component labels (0 = largest) and sizes, largest first."""
    labels, sizes = _run(_core.components, ids, w)
    return owned(labels), sizes


def undirected_pairs(w: CoreMatrix, ids: pd.Index) -> Ints:
    """Each linked pair once, as an (m, 2) array of positions (lower first)."""
    return owned(_run(_core.undirected_pairs, ids, w))


def order(w: CoreMatrix, k: int, cumulative: bool, ids: pd.Index) -> Csr:
    """Binary k-step neighbours."""
    return _owned_csr(_run(_core.order, ids, w, k, cumulative))


def combine(a: CoreMatrix, b: CoreMatrix, op: str, ids: pd.Index) -> Csr:
    """Binary union, intersection or difference of links."""
    return _owned_csr(_run(_core.combine, ids, a, b, op))


def symmetrize(w: CoreMatrix, how: str, ids: pd.Index) -> Csr:
    """A symmetric matrix from w and its transpose."""
    return _owned_csr(_run(_core.symmetrize, ids, w, how))


def select(w: CoreMatrix, keep: np.ndarray, ids: pd.Index) -> tuple[Csr, Ints]:
    """The weights among the units at ``keep``, and the source entry of each entry."""
    csr, source = _run(_core.select, ids, w, frozen(keep, np.int64))
    return _owned_csr(csr), owned(source)


def connect_islands(
    w: CoreMatrix, xy: np.ndarray, metric: str, k: int, weight: float, ids: pd.Index
) -> tuple[Csr, Ints, list[tuple[int, int, float]]]:
    """Links from each island to its k nearest located units."""
    csr, source, added = _run(_core.connect_islands, ids, w, frozen(xy).reshape(-1), metric, k, weight)
    return _owned_csr(csr), owned(source), added


def connect_components(
    w: CoreMatrix, xy: np.ndarray, metric: str, weight: float, ids: pd.Index
) -> tuple[Csr, Ints, list[tuple[int, int, float]]]:
    """One link from each smaller component to the largest."""
    csr, source, added = _run(_core.connect_components, ids, w, frozen(xy).reshape(-1), metric, weight)
    return _owned_csr(csr), owned(source), added
