"""The :class:`Weights` type: an immutable spatial weights matrix with ids
and a record of how it was made."""

from __future__ import annotations

import html
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any, Mapping

import numpy as np
import pandas as pd
import scipy.sparse as sp

from . import _core
from ._util import choice, examples, name_positions
from .errors import IdError, InvalidValuesError, InvalidTypeError, InvalidParameterError, VicinoError

STANDARDIZATIONS = ("row", "binary", "max_entry", "max_eigenvalue", "global", "variance_stabilizing", "none")
DENSE_LIMIT = 5_000  # units above which to_dense() needs force=True


@dataclass(frozen=True)
class Step:
    """One step of a recipe: what was done, with which settings."""

    action: str
    params: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self):
        # a read-only copy, so a recipe cannot be rewritten after the fact
        object.__setattr__(self, "params", MappingProxyType(dict(self.params)))

    def __str__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.params.items())
        return f"{self.action}({args})"


def _frozen(a: np.ndarray, dtype) -> np.ndarray:
    """A read-only view (no copy when the dtype and layout already fit)."""
    view = np.ascontiguousarray(a, dtype=dtype).view()
    view.flags.writeable = False
    return view


class Weights:
    """A spatial weights matrix: who neighbours whom, and how strongly.

    Weights are immutable: every operation returns a new object. Build them
    with :func:`vicino.k_nearest`, :func:`vicino.within_distance` or
    :func:`vicino.from_matrix` rather than calling this class.

    Attributes
    ----------
    n : int
        Number of units.
    nnz : int
        Number of links (stored non-zero weights).
    ids : pandas.Index
        Unit ids, in row order.
    recipe : tuple of Step
        How the matrix was built and transformed.
    """

    __slots__ = ("_indptr", "_indices", "_data", "_ids", "_recipe", "_links", "_duplicates", "_units")

    def __init__(self, indptr, indices, data, ids: pd.Index, recipe=(), *, links=None, units=None, duplicates: int = 0):
        put = object.__setattr__
        put(self, "_indptr", _frozen(indptr, np.int64))
        put(self, "_indices", _frozen(indices, np.int64))
        put(self, "_data", _frozen(data, np.float64))
        put(self, "_ids", ids)
        put(self, "_recipe", tuple(recipe))
        # per-link facts from the builder (distance, border_length), aligned with data
        put(self, "_links", MappingProxyType({k: _frozen(v, np.float64) for k, v in (links or {}).items()}))
        # per-unit facts from the builder (perimeter), aligned with ids
        put(self, "_units", MappingProxyType({k: _frozen(v, np.float64) for k, v in (units or {}).items()}))
        put(self, "_duplicates", int(duplicates))
        if len(self._indptr) != len(ids) + 1 or len(self._indices) != len(self._data):
            raise VicinoError("inconsistent buffers for Weights; build weights with the vicino builders")

    def __setattr__(self, name, value):
        raise AttributeError("Weights are immutable; operations return new Weights")

    def __delattr__(self, name):
        raise AttributeError("Weights are immutable; operations return new Weights")

    # ---- basic facts -------------------------------------------------
    @property
    def n(self) -> int:
        return len(self._ids)

    @property
    def nnz(self) -> int:
        return len(self._data)

    @property
    def ids(self) -> pd.Index:
        return self._ids

    @property
    def recipe(self) -> tuple[Step, ...]:
        return self._recipe

    @property
    def counts(self) -> pd.Series:
        """Number of neighbours of each unit, by id."""
        return pd.Series(np.diff(self._indptr), index=self._ids, name="neighbors")

    @property
    def islands(self) -> pd.Index:
        """Ids of units without neighbours."""
        return self._ids[np.diff(self._indptr) == 0]

    @property
    def self_links(self) -> int:
        """Number of units linked to themselves (non-zero diagonal)."""
        rows = np.repeat(np.arange(self.n), np.diff(self._indptr))
        return int((rows == self._indices).sum())

    @property
    def density(self) -> float:
        """Share of all ordered pairs of distinct units that are linked (self-links not counted)."""
        return (self.nnz - self.self_links) / (self.n * (self.n - 1)) if self.n > 1 else 0.0

    @property
    def duplicate_locations(self) -> int:
        """How many units share their location with another (as found by the builder)."""
        return self._duplicates

    @property
    def perimeter(self) -> pd.Series:
        """Perimeter of each unit, by id, for weights built from polygons."""
        if "perimeter" not in self._units:
            raise InvalidParameterError("these weights were not built from polygons, so they know no perimeters")
        return pd.Series(self._units["perimeter"], index=self._ids, name="perimeter")

    def _csr(self):
        return self.n, self._indptr, self._indices, self._data

    def _derive(self, data, step: Step) -> "Weights":
        return Weights(self._indptr, self._indices, data, self._ids, self._recipe + (step,),
                       links=self._links, units=self._units, duplicates=self._duplicates)

    # ---- conversions -------------------------------------------------
    def to_scipy(self) -> sp.csr_array:
        """The matrix as a ``scipy.sparse.csr_array`` sharing vicino's (read-only) buffers."""
        return sp.csr_array((self._data, self._indices, self._indptr), shape=(self.n, self.n), copy=False)

    def to_dense(self, *, force: bool = False) -> np.ndarray:
        """The matrix as a dense NumPy array.

        Refuses above 5,000 units (a dense matrix needs 8 n^2 bytes) unless
        ``force=True``.
        """
        if self.n > DENSE_LIMIT and not force:
            gib = 8 * self.n**2 / 2**30
            raise InvalidParameterError(
                f"a dense {self.n} x {self.n} matrix needs {gib:.1f} GiB; use to_scipy() for a sparse "
                "matrix, or pass force=True if you really want it dense"
            )
        return self.to_scipy().toarray()

    def to_edges(self) -> pd.DataFrame:
        """One row per link: focal id, neighbour id, weight, and what the builder knew of the
        link (``distance`` for point builders, ``border_length`` for polygon builders)."""
        rows = np.repeat(np.arange(self.n), np.diff(self._indptr))
        out = {"focal": self._ids.take(rows), "neighbor": self._ids.take(self._indices), "weight": self._data}
        out.update(self._links)
        return pd.DataFrame(out)

    def neighbors_of(self, unit) -> pd.Series:
        """Weights of the neighbours of one unit, indexed by neighbour id."""
        try:
            pos = self._ids.get_loc(unit)
        except KeyError:
            raise IdError(f"unknown id {unit!r}; ids look like {examples(list(self._ids[:3]))}") from None
        a, b = self._indptr[pos], self._indptr[pos + 1]
        return pd.Series(self._data[a:b], index=self._ids.take(self._indices[a:b]), name=f"weights of {unit!r}")

    # ---- transformations ---------------------------------------------
    def standardize(self, method: str, *, islands: str = "raise") -> "Weights":
        """A standardized copy of the weights.

        Parameters
        ----------
        method : {"row", "binary", "max_entry", "max_eigenvalue", "global", "variance_stabilizing", "none"}
            ``row``: each row sums to 1. ``binary``: every link weighs 1.
            ``max_entry``: divide by the largest weight. ``max_eigenvalue``:
            divide by the spectral radius (found iteratively; works for
            millions of units). ``global``: all weights sum to n.
            ``variance_stabilizing``: rows scaled by their root sum of
            squares, then all weights sum to n (Tiefelsdorf, Griffith and
            Boots 1999). ``none``: unchanged.
        islands : {"raise", "keep"}
            Units without neighbours raise :class:`IslandError` by default;
            ``"keep"`` leaves their rows empty (their lag is 0).
        """
        choice(method, "standardization", STANDARDIZATIONS)
        choice(islands, "islands policy", ("raise", "keep"))
        data = call(_core.standardize, self._csr(), method, islands == "keep", ids=self._ids)
        params = {"method": method} if islands == "raise" else {"method": method, "islands": islands}
        return self._derive(data, Step("standardize", params))

    def spectral_radius(self) -> float:
        """The largest eigenvalue in modulus of the matrix (found iteratively)."""
        value, _, _ = call(_core.spectral_radius, self._csr(), ids=self._ids)
        return value

    def lag(self, values):
        """The spatial lag W x of one or many variables.

        ``values`` may be a 1-D or 2-D array (rows are units in the order of
        ``ids``), a pandas Series or DataFrame, whose index must equal
        ``ids`` (it is never reordered silently). The result has the same
        type, index and columns.
        """
        arr, wrap = self._aligned(values, allow_2d=True)
        if arr.ndim == 1:
            out = call(_core.lag_vector, self._csr(), arr, ids=self._ids)
        else:
            out = call(_core.lag_columns, self._csr(), arr, ids=self._ids)
        return wrap(out)

    def _aligned(self, values, *, allow_2d: bool):
        """Values as a contiguous float64 array in unit order, and a function that wraps results back."""
        if isinstance(values, (pd.Series, pd.DataFrame)):
            check_index(values.index, self._ids)
            if isinstance(values, pd.DataFrame):
                bad = [c for c in values.columns if not (pd.api.types.is_numeric_dtype(values[c]) and not pd.api.types.is_bool_dtype(values[c]))]
                if bad:
                    raise InvalidTypeError(f"columns {examples(bad)} are not numeric; select numeric columns first")
                arr = values.to_numpy(dtype=np.float64)
                def wrap(out, _v=values):
                    return pd.DataFrame(out, index=_v.index, columns=_v.columns)
            else:
                if not pd.api.types.is_numeric_dtype(values) or pd.api.types.is_bool_dtype(values):
                    raise InvalidTypeError(f"values have dtype {values.dtype}; they must be numeric")
                arr = values.to_numpy(dtype=np.float64)
                def wrap(out, _v=values):
                    return pd.Series(out, index=_v.index, name=_v.name)
        else:
            raw = np.asarray(values)
            if raw.dtype.kind not in "iuf":
                raise InvalidTypeError(f"values have dtype {raw.dtype}; they must be numeric (int or float)")
            arr = raw.astype(np.float64, copy=False)
            def wrap(out):
                return out
        if arr.ndim == 0 or arr.ndim > (2 if allow_2d else 1):
            shape = "(n,) or (n, m)" if allow_2d else "(n,)"
            raise InvalidValuesError(f"values must have shape {shape}, got {arr.shape}")
        if arr.shape[0] != self.n:
            raise InvalidValuesError(f"values have {arr.shape[0]} rows but the weights have {self.n} units")
        finite = np.isfinite(arr) if arr.ndim == 1 else np.isfinite(arr).all(axis=1)
        if not finite.all():
            bad = np.flatnonzero(~finite)
            raise InvalidValuesError(
                f"{len(bad)} unit(s) have NaN or infinite values, ids {examples(self._ids[bad])}; "
                "drop or impute them (and subset the weights) first",
                count=len(bad), positions=bad[:10].tolist(), ids=list(self._ids[bad[:10]]),
            )
        return np.ascontiguousarray(arr), wrap

    # ---- display -----------------------------------------------------
    def _summary(self) -> dict:
        counts = np.diff(self._indptr)
        return {
            "units": f"{self.n:,}",
            "links": f"{self.nnz:,}",
            "density": f"{100 * self.density:.3g}%",
            "neighbours (min / mean / max)": (
                f"{counts.min()} / {counts.mean():.2f} / {counts.max()}" if self.n else "-"
            ),
            "islands": f"{int((counts == 0).sum()):,}",
            "recipe": " -> ".join(str(s) for s in self._recipe) or "(given matrix)",
        }

    def __repr__(self) -> str:
        s = self._summary()
        lines = [f"<vicino.Weights: {s['units']} units, {s['links']} links, density {s['density']}"]
        lines.append(f"  neighbours min/mean/max: {s['neighbours (min / mean / max)']}; islands: {s['islands']}")
        lines.append(f"  recipe: {s['recipe']}>")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        rows = "".join(
            f"<tr><th style='text-align:left;padding-right:1em'>{html.escape(k)}</th>"
            f"<td style='text-align:left'>{html.escape(v)}</td></tr>"
            for k, v in self._summary().items()
        )
        return f"<div><strong>vicino.Weights</strong><table>{rows}</table></div>"


def check_index(index: pd.Index, ids: pd.Index) -> None:
    """Require ``index`` to equal ``ids`` element by element, explaining any mismatch."""
    if index.equals(ids):
        return
    if len(index) != len(ids):
        raise IdError(f"values have {len(index)} rows but the weights have {len(ids)} units")
    missing = ids.difference(index)
    extra = index.difference(ids)
    if len(missing) or len(extra):
        parts = []
        if len(missing):
            parts.append(f"ids without values: {examples(missing)}")
        if len(extra):
            parts.append(f"values whose index is not an id: {examples(extra)}")
        raise IdError("the values' index does not match the weights' ids (" + "; ".join(parts) + ")")
    raise IdError(
        "the values' index holds the same ids as the weights but in another order; "
        "reorder them with values.reindex(weights.ids) (vicino never reorders silently)"
    )


def call(fn, *args, ids: pd.Index | None = None):
    """Call the core; errors that name positions are reworded to name ids."""
    try:
        return fn(*args)
    except VicinoError as err:
        if ids is not None and err.positions:
            raise name_positions(err, ids) from None
        raise
