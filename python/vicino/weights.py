"""The :class:`Weights` type: an immutable spatial weights matrix with ids and a record of how it was made."""

from __future__ import annotations

import html
import warnings
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import TYPE_CHECKING, Any, Literal

import numpy as np
import numpy.typing as npt
import pandas as pd
import scipy.sparse as sp

from . import _gateway as core
from ._checks import choice, real_number, whole_number
from ._ids import examples, id_differences, is_unit_key, make_ids
from ._values import as_values
from .errors import (
    IdError,
    InvalidMatrixError,
    InvalidParameterError,
    InvalidParameterTypeError,
    InvalidTypeError,
    VicinoError,
)
from .geometry import unit_locations
from .spectrum import EigenvalueBounds, admissible_interval

if TYPE_CHECKING:
    from .audit import Audit

Standardization = Literal["row", "binary", "max_entry", "max_eigenvalue", "global", "variance_stabilizing", "none"]
STANDARDIZATIONS: tuple[str, ...] = (
    "row",
    "binary",
    "max_entry",
    "max_eigenvalue",
    "global",
    "variance_stabilizing",
    "none",
)
DENSE_LIMIT = 5_000  # units above which to_dense() needs force=True


@dataclass(frozen=True)
class Step:
    """One step of a recipe: what was done, with which settings."""

    action: str
    params: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        # a read-only copy, so a recipe cannot be rewritten after the fact
        object.__setattr__(self, "params", MappingProxyType(dict(self.params)))

    def __reduce__(self) -> tuple[Any, ...]:
        return (Step, (self.action, dict(self.params)))

    def __str__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.params.items())
        return f"{self.action}({args})"


def _buffer(values: Any, name: str, kinds: str) -> np.ndarray:
    """A one-dimensional buffer of the given dtype kinds, refused rather than cast when it is not one."""
    try:
        arr = np.asarray(values)
    except (ValueError, TypeError, OverflowError) as exc:
        raise InvalidMatrixError(f"{name} could not be read as an array ({exc})") from None
    if arr.ndim != 1:
        raise InvalidMatrixError(f"{name} must be one-dimensional, got shape {arr.shape}")
    if arr.size == 0:
        return arr.astype(np.int64 if kinds == "iu" else np.float64)  # an empty list has no dtype of its own
    if arr.dtype.kind not in kinds:
        want = "whole numbers" if kinds == "iu" else "real numbers"
        raise InvalidTypeError(f"{name} must hold {want}, got dtype {arr.dtype}")
    if arr.dtype.kind == "u" and arr.size and arr.max() > np.iinfo(np.int64).max:
        raise InvalidMatrixError(f"{name} holds values beyond 64-bit signed integers")
    return arr


def _facts(facts: Mapping[str, Any] | None, size: int, what: str) -> Mapping[str, np.ndarray]:
    """Per-link or per-unit facts as read-only float arrays of the right length."""
    out = {}
    for name, values in (facts or {}).items():
        arr = core.frozen(values)
        if arr.shape != (size,):
            raise InvalidMatrixError(f"the {what} fact {name!r} has shape {arr.shape}; it needs one value per {what}")
        out[name] = arr
    return MappingProxyType(out)


class Weights:
    """A spatial weights matrix: who neighbours whom, and how strongly.

    Weights are immutable: every operation returns a new object. Build them
    with the constructors (:func:`vicino.k_nearest`,
    :func:`vicino.within_distance`, :func:`vicino.contiguity`,
    :func:`vicino.from_matrix`, ...) rather than calling this class; calling
    it checks every buffer (canonical CSR: sorted indices, no repeats,
    weights finite and positive) and copies them.

    A link is a stored entry, and every stored weight is positive; a unit
    without a link to another unit is an island (a self-link alone does not
    make a neighbour).

    Parameters
    ----------
    indptr, indices, data : array-like
        Canonical CSR buffers of a square matrix.
    ids : sequence
        One unique id per unit.
    recipe : iterable of Step, optional
        How the matrix was made.

    Attributes
    ----------
    n : int
        Number of units.
    nnz : int
        Number of links (stored weights).
    ids : pandas.Index
        Unit ids, in row order.
    recipe : tuple of Step
        How the matrix was built and transformed.
    """

    __slots__ = (
        "_counts",
        "_data",
        "_duplicates",
        "_ids",
        "_indices",
        "_indptr",
        "_lags",
        "_links",
        "_packed",
        "_recipe",
        "_units",
    )
    _indptr: npt.NDArray[np.int64]
    _indices: npt.NDArray[np.int64]
    _data: npt.NDArray[np.float64]
    _ids: pd.Index
    _recipe: tuple[Step, ...]
    _links: Mapping[str, np.ndarray]
    _units: Mapping[str, np.ndarray]
    _duplicates: int | None
    _counts: npt.NDArray[np.int64] | None
    _lags: int
    _packed: core.Packed | None

    def __init__(self, indptr: Any, indices: Any, data: Any, ids: Any, recipe: Iterable[Step] = ()) -> None:
        indptr = _buffer(indptr, "indptr", "iu")
        n = len(indptr) - 1
        if n < 1:
            raise InvalidMatrixError("indptr must hold n + 1 row pointers for n >= 1 units")
        units = make_ids(ids, n)
        p, i, d = core.validate(n, indptr, _buffer(indices, "indices", "iu"), _buffer(data, "data", "iuf"), units)
        if isinstance(recipe, (str, bytes)) or not isinstance(recipe, Iterable):
            raise InvalidParameterTypeError("recipe must be a sequence of vicino.Step")
        steps = tuple(recipe)
        if not all(isinstance(s, Step) for s in steps):
            raise InvalidParameterTypeError("recipe must be a sequence of vicino.Step")
        self._init(p, i, d, units, steps, None, None, 0)

    def _init(self, indptr, indices, data, ids, recipe, links, units, duplicates) -> None:
        put = object.__setattr__
        put(self, "_indptr", indptr)
        put(self, "_indices", indices)
        put(self, "_data", data)
        put(self, "_ids", ids)
        put(self, "_recipe", tuple(recipe))
        # per-link facts from the builder (distance, border_length), aligned with data
        put(self, "_links", _facts(links, len(data), "link"))
        # per-unit facts from the builder (perimeter), aligned with ids
        put(self, "_units", _facts(units, len(ids), "unit"))
        # units sharing a location, as the builder found; None once unknown (after dropping units)
        put(self, "_duplicates", None if duplicates is None else int(duplicates))
        put(self, "_counts", None)
        # lags taken so far, and the packed form built for the second one (see lag)
        put(self, "_lags", 0)
        put(self, "_packed", None)

    @classmethod
    def _make(
        cls,
        csr: tuple[Any, Any, Any],
        ids: pd.Index,
        recipe: Iterable[Step],
        *,
        links: Mapping[str, Any] | None = None,
        units: Mapping[str, Any] | None = None,
        duplicates: int | None = 0,
    ) -> Weights:
        """Weights from buffers that vicino's core made (canonical, read-only): no checks, no copies."""
        self = cls.__new__(cls)
        indptr, indices, data = (core.frozen(csr[0], np.int64), core.frozen(csr[1], np.int64), core.frozen(csr[2]))
        if len(indptr) != len(ids) + 1 or len(indices) != len(data):
            raise VicinoError("inconsistent buffers for Weights; build weights with the vicino builders")
        self._init(indptr, indices, data, ids, recipe, links, units, duplicates)
        return self

    def __setattr__(self, name: str, value: Any) -> None:
        raise AttributeError("Weights are immutable; operations return new Weights")

    def __delattr__(self, name: str) -> None:
        raise AttributeError("Weights are immutable; operations return new Weights")

    def __reduce__(self) -> tuple[Any, ...]:
        state = (
            self._indptr,
            self._indices,
            self._data,
            self._ids,
            self._recipe,
            dict(self._links),
            dict(self._units),
            self._duplicates,
        )
        return (_restore, state)

    def __copy__(self) -> Weights:
        return self  # immutable: a copy is the same object

    def __deepcopy__(self, memo: dict) -> Weights:
        return self

    # ---- basic facts -------------------------------------------------
    @property
    def n(self) -> int:
        """Number of units."""
        return len(self._ids)

    @property
    def nnz(self) -> int:
        """Number of links (stored weights, self-links included)."""
        return len(self._data)

    @property
    def ids(self) -> pd.Index:
        """Unit ids, in row order."""
        return self._ids

    @property
    def recipe(self) -> tuple[Step, ...]:
        """How the matrix was built and transformed."""
        return self._recipe

    def _neighbour_counts(self) -> npt.NDArray[np.int64]:
        if self._counts is None:
            object.__setattr__(self, "_counts", core.neighbour_counts(self._core(), self._ids))
        assert self._counts is not None
        return self._counts

    @property
    def counts(self) -> pd.Series:
        """Number of neighbours of each unit (links to other units), by id."""
        return pd.Series(self._neighbour_counts(), index=self._ids, name="neighbors")

    @property
    def islands(self) -> pd.Index:
        """Ids of units without a link to another unit."""
        return self._ids[self._neighbour_counts() == 0]

    @property
    def self_links(self) -> int:
        """Number of units linked to themselves (non-zero diagonal)."""
        return int(np.diff(self._indptr).sum() - self._neighbour_counts().sum())

    @property
    def density(self) -> float:
        """Share of all ordered pairs of distinct units that are linked (self-links not counted)."""
        return float(self._neighbour_counts().sum()) / (self.n * (self.n - 1)) if self.n > 1 else 0.0

    @property
    def duplicate_locations(self) -> int | None:
        """How many units share their location with another.

        As found by the builder; None when unknown (after units were dropped).
        """
        return self._duplicates

    @property
    def perimeter(self) -> pd.Series:
        """Perimeter of each unit, by id, for weights built from polygons."""
        if "perimeter" not in self._units:
            raise InvalidParameterError("these weights were not built from polygons, so they know no perimeters")
        return pd.Series(self._units["perimeter"], index=self._ids, name="perimeter")

    def _core(self) -> core.CoreMatrix:
        return self.n, self._indptr, self._indices, self._data

    def _derive(self, data: np.ndarray, step: Step) -> Weights:
        return Weights._make(
            (self._indptr, self._indices, data),
            self._ids,
            (*self._recipe, step),
            links=self._links,
            units=self._units,
            duplicates=self._duplicates,
        )

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
        """One row per link: source id, target id, weight, and what the builder knew of the link.

        The facts are ``distance`` for point builders and ``border_length``
        for polygon builders.
        """
        rows = np.repeat(np.arange(self.n), np.diff(self._indptr))
        out = {"source": self._ids.take(rows), "target": self._ids.take(self._indices), "weight": self._data}
        out.update(self._links)
        return pd.DataFrame(out)

    def neighbors_of(self, unit: Any) -> pd.Series:
        """Weights of the neighbours of one unit, indexed by neighbour id.

        ``unit`` is one id (for a MultiIndex, the full tuple); a list, a
        slice or part of a key is an error.
        """
        if not is_unit_key(unit):
            raise IdError(
                f"neighbors_of takes one id, got {type(unit).__name__} {unit!r}; "
                "to look at several units use subset(ids) or to_edges()"
            )
        try:
            pos = self._ids.get_loc(unit)
        except (KeyError, TypeError, pd.errors.InvalidIndexError):
            raise IdError(f"unknown id {unit!r}; ids look like {examples(list(self._ids[:3]))}") from None
        if not isinstance(pos, (int, np.integer)):
            raise IdError(
                f"{unit!r} is only part of an id (it matches several units); give the full id, such as {self._ids[0]!r}"
            )
        a, b = self._indptr[pos], self._indptr[pos + 1]
        return pd.Series(self._data[a:b], index=self._ids.take(self._indices[a:b]), name=f"weights of {unit!r}")

    # ---- transformations ---------------------------------------------
    def standardize(self, method: Standardization, *, islands: Literal["raise", "keep"] = "raise") -> Weights:
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
            For ``row`` and ``variance_stabilizing``, which divide each row by
            its own sum (or root sum of squares), units without neighbours
            raise :class:`IslandError` by default; ``"keep"`` leaves their
            rows as they are: empty (their lag is 0), or, for a unit linked
            only to itself, that one link scaled (its lag is its own value
            under row standardization). The other methods need no row sums,
            so islands never make them raise; their rows stay empty.
        """
        choice(method, "standardization", STANDARDIZATIONS)
        choice(islands, "islands policy", ("raise", "keep"))
        data = core.standardize(self._core(), method, islands == "keep", self._ids)
        params = {"method": method} if islands == "raise" else {"method": method, "islands": islands}
        return self._derive(data, Step("standardize", params))

    def spectral_radius(self) -> float:
        """The largest eigenvalue in modulus of the matrix (found iteratively)."""
        value, _, _, _ = core.spectral_radius(self._core(), self._ids)
        return value

    def eigenvalue_bounds(self, *, tol: float = 1e-8) -> EigenvalueBounds:
        """The smallest and largest real eigenvalues, and the interval they imply for rho.

        I - rho W is singular exactly when 1 / rho is an eigenvalue of W, so
        an autoregressive parameter rho keeps I - rho W invertible on
        (1 / lambda_min, 1 / lambda_max) (LeSage and Pace 2009, chapter 4).

        Parameters
        ----------
        tol : float, default 1e-8
            The residual wanted of each iterative eigenvalue, relative to the
            spectral radius; between 1e-14 and 0.1.

        Returns
        -------
        EigenvalueBounds
            Both eigenvalues, the interval, an error bound and the method of
            each, with ``table()`` and an HTML view.

        Notes
        -----
        Up to 300 units (or per strongly connected block of that size) the
        eigenvalues are computed densely (Householder reduction and Francis
        QR). Constant row sums give lambda_max = the row sum exactly. Larger
        symmetric weights, and weights similar to symmetric ones by a
        diagonal scaling (row-standardized symmetric weights: D^-1 A is
        similar to D^-1/2 A D^-1/2), use plain Lanczos (Paige 1980) with the
        Ritz vectors formed in a second pass and checked explicitly, and
        thick-restart Lanczos with full reorthogonalization (Wu and Simon
        2000) when that check fails; other weights are split into strongly
        connected blocks (a directed cycle has a closed form), and each large
        block uses implicitly restarted Arnoldi (Lehoucq and Sorensen 1996)
        for its smallest real eigenvalue and the spectral radius for its
        largest; a block of at most 1,000 units on which Arnoldi does not
        settle is solved densely. Units without links add the eigenvalue 0.
        The memory is about 43 vectors of length n (350 MB at 10^6 units)
        for the restarted methods, six for plain Lanczos.

        Raises
        ------
        ConvergenceError
            When an iteration stops short of ``tol``; the message gives the
            estimate and residual reached.
        InvalidMatrixError
            When the weights have no links.
        """
        t = real_number(tol, "tol")
        if not 1e-14 <= t <= 0.1:
            raise InvalidParameterError(
                f"tol = {tol!r} is out of range: use a value between 1e-14 and 0.1 (1e-8 is usual)"
            )
        (lo, lo_err, lo_how), (hi, hi_err, hi_how), products = core.eigenvalue_bounds(self._core(), t, self._ids)
        return EigenvalueBounds(
            lambda_min=lo,
            lambda_max=hi,
            interval=admissible_interval(lo, hi),
            min_error=lo_err,
            max_error=hi_err,
            min_method=lo_how,
            max_method=hi_how,
            tol=t,
            products=products,
            n=self.n,
            weights=" -> ".join(str(s) for s in self.recipe),
        )

    def lag(self, values: Any) -> Any:
        """The spatial lag W x of one or many variables.

        ``values`` may be a 1-D or 2-D array (rows are units in the order of
        ``ids``), a pandas Series or DataFrame, whose index must equal
        ``ids`` (it is never reordered silently). The result has the same
        type, index and columns.
        """
        arr, wrap = aligned_values(self, values, allow_2d=True)
        return wrap(core.lag(self._lag_form(), arr, self._ids))

    def _lag_form(self) -> core.CoreMatrix | core.Packed:
        """The matrix for a lag: the buffers the first time, then a packed copy kept for the next ones.

        The packed copy (32-bit positions, one weight per row where the rows
        allow it, rows in a locality order) reads less than half the bytes
        of the buffers per product and gives the same numbers bit for bit;
        it costs about a few products to build, so a single lag goes without it.
        """
        if self._packed is None:
            object.__setattr__(self, "_lags", self._lags + 1)
            if self._lags != 2:  # the first lag, or packing gave None (over 32-bit positions)
                return self._core()
            object.__setattr__(self, "_packed", core.pack(self._core()))
        return self._core() if self._packed is None else self._packed

    def to_networkx(self) -> Any:
        """The weights as a ``networkx.DiGraph``: ids as nodes, links as edges.

        Each edge carries its ``weight`` and the builder's per-link facts
        (``distance``, ``border_length``) as attributes; units without links
        are nodes without edges. Needs networkx.
        """
        try:
            import networkx as nx
        except ImportError:
            raise InvalidTypeError("to_networkx needs networkx: pip install networkx") from None
        g = nx.DiGraph()
        g.add_nodes_from(self._ids)
        e = self.to_edges()
        facts = [c for c in e.columns if c not in ("source", "target")]
        g.add_edges_from(
            (s, t, dict(zip(facts, vals, strict=True))) for s, t, *vals in e.itertuples(index=False, name=None)
        )
        return g

    # ---- files ---------------------------------------------------------
    def write(self, path: Any, format: Literal["mtx", "triplet", "npz", "csv", "parquet"] | None = None) -> Any:
        """Write the weights to a file that R, MATLAB / Octave or SciPy read, ids included.

        Parameters
        ----------
        path : str or path-like
            Where to write; the suffix chooses the format unless ``format``
            is given: ``.mtx`` Matrix Market, ``.txt`` 1-based triplets for
            ``spconvert``, ``.npz`` SciPy, ``.csv`` / ``.parquet`` edge tables.
        format : {"mtx", "triplet", "npz", "csv", "parquet"}, optional
            The format, when the suffix does not say it.

        Returns
        -------
        pathlib.Path
            The path written. Text formats also write the ids to
            ``<path>.ids.csv``; see :mod:`vicino.io` for the layouts.
        """
        from .io import write

        return write(self, path, format)

    # ---- health ------------------------------------------------------
    def audit(self) -> Audit:
        """A health report of the weights.

        It covers neighbour counts, islands, components, symmetry, zero
        columns, self-links, density, uneven counts, duplicate locations, and
        the exogeneity caution for weights from a network. Each finding has a
        level (problem, warning, note, ok) and says what to do.
        """
        from .audit import Audit

        return Audit(
            ids=self._ids,
            counts=self._neighbour_counts(),
            stored=np.diff(self._indptr),
            facts=core.health(self._core(), self._ids),
            density=self.density,
            duplicates=self._duplicates,
            origin=self._recipe[0] if self._recipe else None,
        )

    def plot_counts(self, ax: Any = None) -> Any:
        """Bar chart of neighbour counts (islands highlighted); returns the matplotlib Axes."""
        from .plots import plot_counts

        return plot_counts(self._neighbour_counts(), ax=ax)

    def plot_links(self, locations: Any, ax: Any = None) -> Any:
        """Links drawn between unit centres over the polygons or points; returns the matplotlib Axes.

        Islands and units of smaller components are marked.
        """
        from .plots import plot_links

        xy, geoms = unit_locations(locations, self._ids)
        labels, _ = core.components(self._core(), self._ids)
        pairs = core.undirected_pairs(self._core(), self._ids)
        return plot_links(xy, geoms, pairs, labels, self._neighbour_counts(), ax=ax)

    # ---- algebra -------------------------------------------------------
    def _rebuild(
        self,
        csr: core.Csr,
        step: Step,
        *,
        source: np.ndarray | None = None,
        ids: pd.Index | None = None,
        keep: np.ndarray | None = None,
        duplicates: int | Literal["same"] | None = "same",
        new_distances: list[float] | None = None,
    ) -> Weights:
        """New weights from core buffers.

        ``source`` maps each new entry to the entry it came from (-1: new),
        carrying per-link facts (NaN for new entries); without it they are
        dropped. ``new_distances`` (one per new entry, in entry order) fills
        the new entries' ``distance``. ``keep`` (positions) selects the
        per-unit facts.
        """
        links = None
        if source is not None:
            src = np.asarray(source)
            links = {
                k: np.where(src >= 0, v[np.maximum(src, 0)], np.nan) if len(v) else np.full(len(src), np.nan)
                for k, v in self._links.items()
            }
            if new_distances is not None:
                links.setdefault("distance", np.full(len(src), np.nan))[src < 0] = new_distances
        units = self._units if keep is None else {k: v[keep] for k, v in self._units.items()}
        dup = self._duplicates if duplicates == "same" else duplicates
        return Weights._make(
            csr, self._ids if ids is None else ids, (*self._recipe, step), links=links, units=units, duplicates=dup
        )

    def symmetrize(self, how: Literal["union", "intersection", "mean"] = "union") -> Weights:
        """A symmetric copy, from w_ij and w_ji (a missing link weighs 0).

        ``union``: max(w_ij, w_ji), a link in either direction makes a link
        both ways. ``intersection``: min(w_ij, w_ji), only links present in
        both directions remain. ``mean``: (w_ij + w_ji) / 2, so a one-way
        binary link weighs 0.5 both ways. Per-link facts (distance,
        border length) are not carried over.
        """
        choice(how, "symmetrize rule", ("union", "intersection", "mean"))
        out = core.symmetrize(self._core(), how, self._ids)
        return self._rebuild(out, Step("symmetrize", {"how": how}))

    def order(self, k: int, *, cumulative: bool = False) -> Weights:
        """Binary weights of k-step neighbours.

        Units exactly ``k`` links away (shortest path of k links along the
        links' direction), or 1 to ``k`` links away when ``cumulative``. A unit is never its own k-step
        neighbour. ``order(1)`` is the binary form of the weights (less any
        self-links).
        """
        k = whole_number(k, "k", minimum=1)
        if not isinstance(cumulative, (bool, np.bool_)):
            raise InvalidParameterTypeError(f"cumulative must be True or False, got {cumulative!r}")
        out = core.order(self._core(), k, bool(cumulative), self._ids)
        return self._rebuild(out, Step("order", {"k": k, "cumulative": bool(cumulative)}))

    def _combine(self, other: Any, op: str, symbol: str) -> Weights:
        if not isinstance(other, Weights):
            raise InvalidTypeError(
                f"weights combine with {symbol} only with other vicino.Weights, got {type(other).__name__}"
            )
        if not self._ids.equals(other._ids):
            raise IdError(
                f"weights combined with {symbol} must have the same ids in the same order "
                f"({self.n} and {other.n} units here); use other.align(weights.ids) to reorder, or "
                "subset(ids) / drop(ids) on either to keep only the units they share"
            )
        out = core.combine(self._core(), other._core(), op, self._ids)
        step = Step(op, {"other": " -> ".join(str(s) for s in other._recipe) or "(given matrix)"})
        return self._rebuild(out, step)

    def __or__(self, other):
        """Union of links (binary): linked in either."""
        return self._combine(other, "union", "|")

    def __and__(self, other):
        """Intersection of links (binary): linked in both."""
        return self._combine(other, "intersection", "&")

    def __sub__(self, other):
        """Difference of links (binary): linked in the first and not in the second."""
        return self._combine(other, "difference", "-")

    def _positions(self, ids, what: str) -> np.ndarray:
        """Positions of the given ids, in the given order; unknown or repeated ids are an error."""
        if isinstance(ids, (str, bytes)) or np.ndim(ids) != 1:
            raise IdError(f"{what} must be a one-dimensional sequence of ids")
        wanted = ids if isinstance(ids, pd.Index) else pd.Index(list(ids))
        pos = self._ids.get_indexer(wanted)
        unknown = wanted[pos < 0]
        if len(unknown):
            raise IdError(f"{len(unknown)} id(s) in {what} are not among the weights' ids: {examples(unknown)}")
        if not wanted.is_unique:
            dup = wanted[wanted.duplicated()].unique()
            raise IdError(f"{what} names {len(dup)} id(s) more than once: {examples(dup)}; name each unit once")
        return pos.astype(np.int64)

    def _select(self, keep: np.ndarray, step: Step) -> Weights:
        if len(keep) == 0:
            raise IdError("no unit would remain; weights need at least one unit")
        out, source = core.select(self._core(), keep, self._ids)
        scaled = self._scaled_by()
        if scaled and len(keep) < self.n and len(source) < np.diff(self._indptr)[keep].sum():
            warnings.warn(
                f"these weights were standardized ({scaled}) and some kept units lost links to removed "
                "units, so they are no longer standardized: standardize again",
                UserWarning,
                stacklevel=3,
            )
        dup: Literal["same"] | None = "same" if len(keep) == self.n else None
        return self._rebuild(out, step, source=source, ids=self._ids.take(keep), keep=keep, duplicates=dup)

    def subset(self, ids) -> Weights:
        """The weights among the given units only, in the given order.

        Links to other units are dropped (units may become islands: audit() tells).
        """
        keep = self._positions(ids, "subset")
        return self._select(keep, Step("subset", {"units": len(keep)}))

    def drop(self, ids) -> Weights:
        """The weights without the given units (and their links); the others keep their order."""
        gone = self._positions(ids, "drop")
        keep = np.setdiff1d(np.arange(self.n, dtype=np.int64), gone)
        return self._select(keep, Step("drop", {"units": len(gone)}))

    def drop_islands(self) -> Weights:
        """The weights without their islands (units without neighbours)."""
        keep = np.flatnonzero(self._neighbour_counts() > 0).astype(np.int64)
        return self._select(keep, Step("drop_islands", {"units": self.n - len(keep)}))

    def align(self, index) -> Weights:
        """The same weights with units reordered to match ``index``.

        ``index`` is a DataFrame's index, or any sequence of ids. It must
        hold exactly the weights' ids: missing or extra ids are an error that
        lists examples.
        """
        if isinstance(index, (pd.DataFrame, pd.Series)):
            index = index.index
        if isinstance(index, (str, bytes)) or np.ndim(index) != 1:
            raise IdError("align needs an index or a one-dimensional sequence of ids")
        target = index if isinstance(index, pd.Index) else pd.Index(list(index))
        if not target.is_unique:
            dup = target[target.duplicated()].unique()
            raise IdError(f"the index to align to repeats {len(dup)} id(s): {examples(dup)}; ids must be unique")
        parts = id_differences(
            self._ids,
            target,
            missing="id(s) of the weights are not in the index",
            extra="id(s) of the index are not in the weights",
        )
        if parts:
            raise IdError(
                "cannot align: " + "; ".join(parts) + ". Use subset(ids) or drop(ids) to match the data first"
            )
        if target.equals(self._ids):
            return self
        keep = self._ids.get_indexer(target).astype(np.int64)
        return self._select(keep, Step("align", {"units": len(keep)}))

    # ---- repair ----------------------------------------------------------
    def _scaled_by(self) -> str | None:
        """The standardization in force, if it changed the weights' scale (not binary or none)."""
        for step in reversed(self._recipe):
            if step.action == "standardize":
                method = step.params.get("method")
                return None if method in ("binary", "none") else method
            if step.action in ("order", "union", "intersection", "difference"):
                return None  # binary from here on
        return None

    def _repair(self, locations: Any, metric: str, weight: Any, step_name: str, params: dict[str, Any]) -> Weights:
        choice(metric, "metric", ("euclidean", "great_circle"))
        weight = real_number(weight, "weight")
        if not (np.isfinite(weight) and weight > 0):
            raise InvalidParameterError(f"weight must be a finite number > 0, got {weight}")
        scaled = self._scaled_by()
        if scaled:
            raise InvalidParameterError(
                f"these weights were standardized ({scaled}); repair the links first and standardize afterwards, "
                "so that the new links are scaled like the others"
            )
        xy, _ = unit_locations(locations, self._ids)
        if step_name == "connect_islands":
            out, source, added = core.connect_islands(self._core(), xy, metric, params["k"], weight, self._ids)
        else:
            out, source, added = core.connect_components(self._core(), xy, metric, weight, self._ids)
        step = Step(step_name, {**params, "metric": metric, "weight": weight, "links_added": len(added)})
        # the new entries and the core's list of added links are both in (row, column) order
        return self._rebuild(out, step, source=source, new_distances=[d for _, _, d in added])

    def connect_islands(self, locations, k: int = 1, *, metric: str = "euclidean", weight: float = 1.0) -> Weights:
        """Link each island to its ``k`` nearest units by location.

        ``locations``: the units' points (as :func:`vicino.k_nearest` takes
        them) or polygons (located at their area-weighted centroids), in the
        order of ``ids`` (a pandas input's index must equal ``ids``). New
        links weigh ``weight``; when the links are symmetric (j neighbours i
        whenever i neighbours j) each new link is added both ways, so they
        stay symmetric. Ties go to the unit that
        comes first. Repair before standardizing. The step is recorded in
        ``recipe`` with the number of links added. In ``to_edges()`` a new
        link's ``distance`` is the distance between the two locations (in
        the repair's metric: coordinate units, or km for great circle); other
        facts of the builder (such as ``border_length``) are NaN for it, and
        old links without a distance have NaN there.
        """
        k = whole_number(k, "k", minimum=1)
        return self._repair(locations, metric, weight, "connect_islands", {"k": k})

    def connect_components(self, locations, *, metric: str = "euclidean", weight: float = 1.0) -> Weights:
        """Link each smaller connected component to the largest, so that the map is in one piece.

        The link joins the closest pair of units (one in each).

        Locations, weights and symmetry as in :meth:`connect_islands`;
        islands are components of one unit and are linked too.
        """
        return self._repair(locations, metric, weight, "connect_components", {})

    # ---- display -----------------------------------------------------
    def _summary(self) -> dict[str, str]:
        counts = self._neighbour_counts()
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


def _restore(indptr, indices, data, ids, recipe, links, units, duplicates) -> Weights:
    """Unpickle a Weights (the buffers were checked when it was first made)."""
    return Weights._make((indptr, indices, data), ids, recipe, links=links, units=units, duplicates=duplicates)


# ---- the internal interface other modules use -------------------------------------
def built(
    csr: tuple[Any, Any, Any],
    ids: pd.Index,
    recipe: Iterable[Step],
    *,
    links: Mapping[str, Any] | None = None,
    units: Mapping[str, Any] | None = None,
    duplicates: int | None = 0,
) -> Weights:
    """Weights from buffers the core made (canonical, read-only), for the builders: no checks, no copies."""
    return Weights._make(csr, ids, recipe, links=links, units=units, duplicates=duplicates)


def core_matrix(w: Weights) -> core.CoreMatrix:
    """(n, indptr, indices, data) of ``w``, as the core takes a matrix."""
    return w._core()


def link_facts(w: Weights) -> Mapping[str, np.ndarray]:
    """What the builder knew of each link (``distance``, ``border_length``), aligned with the stored weights."""
    return w._links


def unit_facts(w: Weights) -> Mapping[str, np.ndarray]:
    """What the builder knew of each unit (``perimeter``), aligned with the ids."""
    return w._units


def neighbour_counts(w: Weights) -> npt.NDArray[np.int64]:
    """Links of each unit to other units, as an array in unit order."""
    return w._neighbour_counts()


def aligned_values(w: Weights, values: Any, *, allow_2d: bool) -> tuple[np.ndarray, Callable[[np.ndarray], Any]]:
    """Values as a float64 array in the weights' unit order, and a function that wraps results back."""
    return as_values(values, w.ids, allow_2d=allow_2d)
