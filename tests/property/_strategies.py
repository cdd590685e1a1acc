"""Shared hypothesis strategies and the outcome check of the property tests.

Every call into vicino goes through :func:`attempt`: it returns the result,
or the ``vicino.VicinoError`` the call raised after checking that the error
is a proper refusal (a ``VicinoError`` that is not ``InternalError``, with a
message). Any other exception (a bare ``ValueError`` / ``TypeError`` /
``OverflowError``, a panic) propagates and fails the test.

Inputs come in three kinds: valid (a result is required and checked against
an oracle), invalid (a refusal is required) and borderline (either is fine,
but a result is still checked).
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd
import scipy.sparse as sp
import shapely
from hypothesis import currently_in_test_context, event
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

import vicino

INT64_MAX = 2**63 - 1


# ---------------------------------------------------------------------------
# outcomes
# ---------------------------------------------------------------------------
@dataclass(frozen=True)
class Outcome:
    """What a call did: a value, or a proper vicino refusal."""

    value: Any = None
    error: vicino.VicinoError | None = None

    @property
    def ok(self) -> bool:
        return self.error is None


def check_refusal(err: BaseException) -> None:
    """A refusal must be a VicinoError (not a panic) that says something."""
    assert isinstance(err, vicino.VicinoError), f"not a VicinoError: {type(err).__name__}: {err}"
    assert not isinstance(err, vicino.InternalError), f"a panic in vicino's core: {err}"
    assert str(err).strip(), f"{type(err).__name__} raised without a message"
    # the hierarchy of vicino.errors: each class also derives from a built-in class
    assert isinstance(err, (ValueError, TypeError, MemoryError)), type(err).__mro__


def attempt(fn, *args, **kwargs) -> Outcome:
    """Call ``fn``; a VicinoError is returned (after :func:`check_refusal`), anything else propagates."""
    with warnings.catch_warnings():
        # duplicate locations, empty geometries, subsets of standardized weights
        warnings.simplefilter("ignore", UserWarning)
        try:
            value = fn(*args, **kwargs)
        except vicino.VicinoError as err:
            check_refusal(err)
            _record(fn, type(err).__name__)
            return Outcome(error=err)
    _record(fn, "result")
    return Outcome(value=value)


def _record(fn, what: str) -> None:
    """Count outcomes in hypothesis' statistics (pytest --hypothesis-show-statistics)."""
    if currently_in_test_context():
        event(f"{getattr(fn, '__name__', 'call')}: {what}")


def succeeded(out: Outcome, what: str = "") -> Any:
    """The value of an outcome that had to succeed."""
    assert out.ok, (
        f"a valid input was refused{' (' + what + ')' if what else ''}: {type(out.error).__name__}: {out.error}"
    )
    return out.value


def refused(out: Outcome, *classes: type, what: str = "") -> vicino.VicinoError:
    """The error of an outcome that had to fail (optionally of one of ``classes``)."""
    assert not out.ok, f"an invalid input was accepted{' (' + what + ')' if what else ''}: got {out.value!r}"
    if classes:
        assert isinstance(out.error, classes), f"expected one of {classes}, got {type(out.error).__name__}"
    return out.error


def open_bug(name: str) -> bool:
    """Whether to hold back the part of a property that a known, open vicino bug breaks.

    Each name matches an ``xfail(strict=True)`` regression test that shows the
    bug on a minimal input. ``VICINO_PROPERTY_STRICT=1`` runs the held-back
    parts too (they fail until the bug is fixed).
    """
    return name in OPEN_BUGS and os.environ.get("VICINO_PROPERTY_STRICT") != "1"


OPEN_BUGS: set[str] = set()  # every polygon bug listed here has been fixed


# ---------------------------------------------------------------------------
# scalars
# ---------------------------------------------------------------------------
def beyond_64_bits() -> st.SearchStrategy[int]:
    """Integers beyond the signed 64-bit range (2^63 and up, below -2^63), up to 400 digits."""
    return st.one_of(
        st.integers(2**63, 2**200),
        st.integers(-(2**200), -(2**63) - 1),
        st.sampled_from([2**63, 2**64, 2**100, -(2**64), 10**400]),
    )


def not_numbers() -> st.SearchStrategy[Any]:
    """Objects that are not real numbers at all."""
    return st.sampled_from(
        [None, "3", "", b"2", [2], (2,), {"k": 2}, 1 + 2j, np.complex128(2), object(), np.datetime64("2020-01-01")]
    )


def bools() -> st.SearchStrategy[Any]:
    return st.sampled_from([True, False, np.bool_(True), np.bool_(False)])


def bad_floats() -> st.SearchStrategy[float]:
    """Negative, NaN or infinite numbers."""
    return st.one_of(
        st.sampled_from([float("nan"), float("inf"), -float("inf"), -1.0, -1e-300, -1e300, np.float64("nan")]),
        st.floats(max_value=-1e-300, allow_nan=False, allow_infinity=False),
    )


def bad_whole_numbers(n: int) -> st.SearchStrategy[Any]:
    """Values that are not a usable count 1 <= k <= n - 1 (for k, order, ...)."""
    return st.one_of(
        st.integers(max_value=0),
        st.integers(min_value=max(n, 1), max_value=INT64_MAX),
        beyond_64_bits(),
        st.sampled_from([np.uint64(2**64 - 1), np.int64(-1), np.int8(-3)]),
        st.floats(allow_nan=True),
        st.sampled_from([np.float64(1.0), np.float32(2.0), 2.0]),
        bools(),
        not_numbers(),
    )


def unknown_options(valid: tuple[str, ...]) -> st.SearchStrategy[Any]:
    """Strings that are not among ``valid`` (case and spacing variants too), and non-strings."""
    variants = [v.upper() for v in valid] + [v + " " for v in valid] + [v.replace("_", "-") for v in valid]
    return st.one_of(
        st.sampled_from([v for v in variants if v not in valid] + ["", "default", "none!", "\x00"]),
        st.text(max_size=8).filter(lambda s: s not in valid),
        st.sampled_from([None, 0, 1.5, True, b"row", ["row"], ("queen",)]),
    )


# ---------------------------------------------------------------------------
# points
# ---------------------------------------------------------------------------
# exponents e of exact scalings by 2^e: tiny (even subnormal) and large magnitudes
SCALES = (0, 0, 0, 0, 3, -7, -560, -1000, -1070, 300, 470)


@dataclass(frozen=True)
class GridPoints:
    """Integer coordinates scaled by 2^exp: every distance comparison is exact in integers."""

    ints: np.ndarray
    exp: int

    @property
    def xy(self) -> np.ndarray:
        return np.ldexp(self.ints.astype(np.float64), self.exp)

    @property
    def n(self) -> int:
        return len(self.ints)


@st.composite
def grid_points(draw, min_n: int = 2, max_n: int = 60, scales=SCALES) -> GridPoints:
    n = draw(st.integers(min_n, max_n))
    span = draw(st.sampled_from([1, 3, 10, 1000]))  # a small span gives ties and duplicate locations
    ints = draw(hnp.arrays(np.int64, (n, 2), elements=st.integers(-span, span)))
    return GridPoints(ints, draw(st.sampled_from(scales)))


def float_points(min_n: int = 2, max_n: int = 40) -> st.SearchStrategy[np.ndarray]:
    """Any finite coordinates up to 1e6 (hypothesis mixes in tiny and subnormal values)."""
    return hnp.arrays(
        np.float64,
        st.tuples(st.integers(min_n, max_n), st.just(2)),
        elements=st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False),
    )


LON = st.one_of(st.floats(-180, 360), st.sampled_from([-180.0, 0.0, 179.999, 180.0, 190.0, -170.0, 360.0]))
LAT = st.one_of(st.floats(-90, 90), st.sampled_from([-90.0, 90.0, 0.0, 89.9999999]))


@st.composite
def lonlat_points(draw, min_n: int = 2, max_n: int = 40) -> np.ndarray:
    """Longitude in [-180, 360] and latitude in [-90, 90], with poles and repeated places."""
    pts = draw(st.lists(st.tuples(LON, LAT), min_size=min_n, max_size=max_n))
    arr = np.array(pts, dtype=np.float64).reshape(-1, 2)
    if draw(st.booleans()) and len(arr) > 2:
        # the same place again, sometimes spelled another way (lon + 360)
        i, j = draw(st.integers(0, len(arr) - 1)), draw(st.integers(0, len(arr) - 1))
        arr[j] = arr[i]
        if arr[j, 0] < 0 and draw(st.booleans()):
            arr[j, 0] += 360.0
    return arr


POINT_FORMS = (
    "array",
    "geodataframe",
    "list",
    "frame",
    "frame_lonlat",
    "frame_columns",
    "shapely",
    "geoseries",
    "big_endian",
    "strided",
    "readonly",
    "int64",
    "masked_clear",
    "nullable",
)


@dataclass
class PointInput:
    """A points argument, its keyword arguments, and the ids the weights must have."""

    obj: Any
    kwargs: dict = field(default_factory=dict)
    ids: pd.Index = None


def point_input(xy: np.ndarray, form: str, ids: pd.Index | None, ints: np.ndarray | None = None) -> PointInput:
    """The same coordinates in one of the forms users hold them in."""
    n = len(xy)
    index = ids if ids is not None else pd.RangeIndex(n)
    kw = {} if ids is None else {"ids": ids}
    if form == "list":
        return PointInput(xy.tolist(), kw, index)
    if form in ("frame", "frame_lonlat", "frame_columns", "nullable"):
        names = {"frame": ("x", "y"), "frame_lonlat": ("Longitude", "LATITUDE"), "nullable": ("lon", "lat")}
        if form == "frame_columns":
            df = pd.DataFrame({"a": xy[:, 0], "b": np.arange(n), "c": xy[:, 1]}, index=index)
            return PointInput(df, {"columns": ("a", "c")}, index)
        a, b = names[form]
        if form == "nullable":
            df = pd.DataFrame({a: pd.array(xy[:, 0], dtype="Float64"), b: pd.array(xy[:, 1], dtype="Float64")})
        else:
            df = pd.DataFrame({a: xy[:, 0], b: xy[:, 1]})
        df.index = index
        return PointInput(df, {}, index)
    if form == "shapely":
        return PointInput(list(shapely.points(xy)), kw, index)
    if form in ("geoseries", "geodataframe"):
        import geopandas

        geoms = geopandas.GeoSeries(shapely.points(xy), index=index)
        if form == "geoseries":
            return PointInput(geoms, {}, index)
        return PointInput(geopandas.GeoDataFrame({"v": np.arange(n)}, geometry=geoms, index=index), {}, index)
    if form == "big_endian":
        return PointInput(xy.astype(">f8"), kw, index)
    if form == "strided":
        wide = np.zeros((n, 5))
        wide[:, 1], wide[:, 3] = xy[:, 0], xy[:, 1]
        return PointInput(wide[:, 1::2], kw, index)
    if form == "readonly":
        ro = xy.copy()
        ro.flags.writeable = False
        return PointInput(ro, kw, index)
    if form == "int64" and ints is not None:
        return PointInput(ints.copy(), kw, index)
    if form == "masked_clear":
        return PointInput(np.ma.masked_array(xy, mask=np.zeros_like(xy, dtype=bool)), kw, index)
    return PointInput(xy.copy(), kw, index)


def id_choices(n: int) -> st.SearchStrategy[pd.Index | None]:
    """No ids, string ids, shuffled integers, floats or dates."""
    return st.one_of(
        st.none(),
        st.just(pd.Index([f"u{i}" for i in range(n)])),
        st.permutations(range(1000, 1000 + n)).map(pd.Index),
        st.just(pd.Index(np.arange(n) + 0.5)),
        st.just(pd.date_range("2001-01-01", periods=n, freq="D")),
    )


@dataclass
class BadPoints:
    """A points argument that is invalid (``must_fail``) or borderline (``must_fail`` False)."""

    obj: Any
    reason: str
    must_fail: bool = True
    bug: str | None = None


def _with(xy: np.ndarray, i: int, j: int, value: Any) -> np.ndarray:
    out = xy.astype(object) if not isinstance(value, float) else xy.copy()
    out[i, j] = value
    return out


@st.composite
def bad_points(draw) -> BadPoints:
    """Invalid coordinates of every kind the brief of the suite lists."""
    n = draw(st.integers(2, 12))
    xy = np.random.default_rng(draw(st.integers(0, 2**32 - 1))).uniform(-5, 5, (n, 2))
    i, j = draw(st.integers(0, n - 1)), draw(st.integers(0, 1))
    kind = draw(
        st.sampled_from(
            [
                "empty",
                "nan",
                "inf",
                "huge",
                "beyond_1e150",
                "tiny_beside_large",
                "wrong_shape",
                "ragged",
                "bool",
                "complex",
                "datetime",
                "timedelta",
                "str",
                "bytes",
                "object_mixed",
                "object_none",
                "python_int_overflow",
                "masked",
                "nullable_na",
                "int_na",
                "frame_text",
                "frame_unnamed",
                "frame_duplicate_columns",
                "series_numbers",
                "non_points",
                "none_geometry",
                "empty_point",
                "scalar",
                "dict",
            ]
        )
    )
    if kind == "empty":
        obj = draw(
            st.sampled_from(
                [np.empty((0, 2)), [], np.empty((0,)), pd.DataFrame({"x": [], "y": []}), np.empty((0, 2), dtype=int)]
            )
        )
        return BadPoints(obj, kind)
    if kind in ("nan", "inf", "huge", "beyond_1e150"):
        value = {"nan": np.nan, "inf": draw(st.sampled_from([np.inf, -np.inf])), "huge": 1e300, "beyond_1e150": -2e150}
        return BadPoints(_with(xy, i, j, value[kind]), kind)
    if kind == "tiny_beside_large":
        out = xy.copy()
        out[i, j] = draw(st.sampled_from([1e-300, -1e-170, 5e-324, 1e-200]))
        out[(i + 1) % n, 1 - j] = draw(st.sampled_from([1.0, 1e10, 1e100]))
        return BadPoints(out, kind)
    if kind == "wrong_shape":
        shape = draw(st.sampled_from([(n, 3), (n, 1), (n,), (n, 2, 1), (2, n, 2), (1, 2 * n)]))
        if shape == (1, 2 * n) and n == 1:
            shape = (n, 3)
        return BadPoints(np.zeros(shape), f"shape {shape}")
    if kind == "ragged":
        rows = xy.tolist()
        rows[i] = rows[i][:1] if draw(st.booleans()) else [*rows[i], 0.0]
        return BadPoints(rows, kind)
    if kind == "bool":
        return BadPoints(xy > 0, kind)
    if kind == "complex":
        return BadPoints(xy.astype(complex), kind)
    if kind == "datetime":
        return BadPoints(np.full((n, 2), np.datetime64("2020-01-01")), kind)
    if kind == "timedelta":
        return BadPoints(np.arange(2 * n).reshape(n, 2).astype("timedelta64[s]"), kind)
    if kind == "str":
        return BadPoints(xy.astype(str), kind)
    if kind == "bytes":
        return BadPoints(xy.astype("S8"), kind)
    if kind == "object_mixed":
        return BadPoints(_with(xy, i, j, draw(st.sampled_from(["1.5", "x", b"1", [1.0], object()]))), kind)
    if kind == "object_none":
        return BadPoints(_with(xy, i, j, None), kind)
    if kind == "python_int_overflow":
        rows = xy.tolist()
        rows[i][j] = draw(st.sampled_from([2**1024, 10**400, -(2**2000)]))
        return BadPoints(rows, kind, bug="overflowing-python-ints")
    if kind == "masked":
        mask = np.zeros_like(xy, dtype=bool)
        mask[i, j] = True
        return BadPoints(np.ma.masked_array(xy, mask=mask), kind)
    if kind in ("nullable_na", "int_na"):
        dtype = "Float64" if kind == "nullable_na" else "Int64"
        col = pd.array(np.round(xy[:, j]) if dtype == "Int64" else xy[:, j], dtype=dtype)
        col[i] = pd.NA
        other = xy[:, 1 - j]
        df = pd.DataFrame({"x": col, "y": other} if j == 0 else {"x": other, "y": col})
        return BadPoints(df, kind)
    if kind == "frame_text":
        return BadPoints(pd.DataFrame({"x": xy[:, 0].astype(str), "y": xy[:, 1]}), kind)
    if kind == "frame_unnamed":
        return BadPoints(pd.DataFrame({"a": xy[:, 0], "b": xy[:, 1], "c": xy[:, 0]}), kind)
    if kind == "frame_duplicate_columns":
        return BadPoints(pd.DataFrame(np.column_stack([xy, xy[:, :1]]), columns=["x", "y", "x"]), kind)
    if kind == "series_numbers":
        return BadPoints(pd.Series(xy[:, 0]), kind)
    if kind == "non_points":
        geoms = list(shapely.points(xy))
        geoms[i] = draw(
            st.sampled_from(
                [
                    shapely.box(0, 0, 1, 1),
                    shapely.LineString([(0, 0), (1, 1)]),
                    shapely.GeometryCollection([shapely.Point(0, 0)]),
                    shapely.MultiPoint([(0, 0), (1, 1)]),
                ]
            )
        )
        return BadPoints(geoms, kind)
    if kind == "none_geometry":
        geoms = list(shapely.points(xy))
        geoms[i] = None
        return BadPoints(pd.Series(geoms), kind)
    if kind == "empty_point":
        geoms = list(shapely.points(xy))
        geoms[i] = shapely.Point()
        return BadPoints(geoms, kind)
    if kind == "scalar":
        return BadPoints(draw(st.sampled_from([3.0, np.float64(2), "points", None])), kind)
    return BadPoints({"x": xy[:, 0].tolist(), "y": xy[:, 1].tolist()}, kind)


# ---------------------------------------------------------------------------
# weights matrices
# ---------------------------------------------------------------------------
WEIGHT_STYLES = ("binary", "integers", "uniform", "wide", "huge", "tiny")
MODERATE_STYLES = ("binary", "integers", "uniform")


def _weights(style: str, rng: np.random.Generator, shape: tuple[int, int]) -> np.ndarray:
    if style == "binary":
        return np.ones(shape)
    if style == "integers":
        return rng.integers(1, 6, shape).astype(np.float64)
    if style == "uniform":
        return rng.uniform(0.01, 10.0, shape)
    if style == "wide":
        return 10.0 ** rng.uniform(-300, 300, shape)
    if style == "huge":
        return 10.0 ** rng.uniform(300, 308, shape)
    # tiny, down to subnormal
    return rng.choice([1e-300, 3e-305, 2.2250738585072014e-308, 1e-310, 4e-320, 5e-324], shape)


@dataclass
class Matrix:
    """A weights matrix as the oracle holds it (dense), and how vicino is given it."""

    dense: np.ndarray
    style: str
    ids: pd.Index

    @property
    def n(self) -> int:
        return len(self.dense)


@st.composite
def matrices(
    draw,
    min_n: int = 1,
    max_n: int = 30,
    styles=WEIGHT_STYLES,
    shape: str | None = None,
    self_links: bool | None = False,
    ids: bool = True,
) -> Matrix:
    """Random sparse non-negative matrices.

    ``shape``: "any" (asymmetric in general), "pattern" (links both ways,
    weights differ) or "symmetric"; drawn when None. ``self_links``: allow a
    non-zero diagonal (drawn when None).
    """
    n = draw(st.integers(min_n, max_n))
    density = draw(st.sampled_from([0.0, 0.03, 0.08, 0.15, 0.3, 0.6, 1.0]))
    style = draw(st.sampled_from(styles))
    shape = shape or draw(st.sampled_from(["any", "pattern", "symmetric"]))
    diagonal = draw(st.booleans()) if self_links is None else self_links
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    mask = rng.random((n, n)) < density
    if shape != "any":
        mask = np.triu(mask) | np.triu(mask).T
    if not diagonal:
        np.fill_diagonal(mask, False)
    values = _weights(style, rng, (n, n))
    if shape == "symmetric":
        values = np.triu(values) + np.triu(values, 1).T
    dense = np.where(mask, values, 0.0)
    index = draw(id_choices(n)) if ids else None
    return Matrix(dense, style, index if index is not None else pd.RangeIndex(n))


MATRIX_FORMS = ("dense", "list", "csr", "csc", "coo_explicit_zeros", "frame", "frame_shuffled", "int", "masked_clear")


def matrix_input(m: Matrix, form: str, rng_seed: int = 0) -> tuple[Any, dict]:
    """The matrix in one of the forms from_matrix takes, and the keyword arguments."""
    kw = {"ids": m.ids}
    d = m.dense
    if form == "list":
        return d.tolist(), kw
    if form == "csr":
        return sp.csr_array(d), kw
    if form == "csc":
        return sp.csc_matrix(d), kw
    if form == "coo_explicit_zeros":
        r, c = np.nonzero(d)
        zr = np.random.default_rng(rng_seed).integers(0, m.n, 3)
        # every weight once more as an explicit zero (summed in), and a few zeros elsewhere
        rows = np.concatenate([r, r, zr])
        cols = np.concatenate([c, c, zr[::-1]])
        vals = np.concatenate([d[r, c], np.zeros(len(r) + 3)])
        return sp.coo_array((vals, (rows, cols)), shape=d.shape), kw
    if form in ("frame", "frame_shuffled"):
        df = pd.DataFrame(d, index=m.ids, columns=m.ids)
        if form == "frame_shuffled":
            order = np.random.default_rng(rng_seed).permutation(m.n)
            df = df.iloc[:, order]  # from_matrix matches columns to rows by label
        return df, {}
    if form == "int" and np.array_equal(d, np.round(d)) and d.max(initial=0) < 2**31:
        return d.astype(np.int64), kw
    if form == "masked_clear":
        return np.ma.masked_array(d, mask=np.zeros_like(d, dtype=bool)), kw
    return d.copy(), kw


def weights_of(m: Matrix, form: str = "csr") -> vicino.Weights:
    """Weights from a generated matrix (which is valid, so from_matrix must accept it)."""
    obj, kw = matrix_input(m, form)
    return succeeded(attempt(vicino.from_matrix, obj, **kw), "from_matrix of a valid matrix")


# ---------------------------------------------------------------------------
# variable values
# ---------------------------------------------------------------------------
VALUE_STYLES = ("uniform", "integers", "binary", "offset", "huge", "tiny", "wide")


def values_of(style: str, rng: np.random.Generator, shape: tuple[int, ...]) -> np.ndarray:
    if style == "integers":
        return rng.integers(-20, 21, shape).astype(np.float64)
    if style == "binary":
        return rng.integers(0, 2, shape).astype(np.float64)
    if style == "offset":
        # small integer variation on a large common offset (exact: below 2^53)
        return 1e15 + rng.integers(-50, 51, shape)
    if style == "huge":
        return rng.uniform(-1, 1, shape) * 1e300
    if style == "tiny":
        return rng.uniform(-1, 1, shape) * 1e-300
    if style == "wide":
        return rng.choice([-1.0, 1.0], shape) * 10.0 ** rng.uniform(-150, 150, shape)
    return rng.uniform(-10, 10, shape)


@st.composite
def bad_values(draw, n: int, ids: pd.Index):
    """(values, reason, bug): values that must be refused for weights of n units with ``ids``."""
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    x = rng.uniform(-5, 5, n)
    i = draw(st.integers(0, n - 1))
    kind = draw(
        st.sampled_from(
            [
                "nan",
                "inf",
                "short",
                "long",
                "three_d",
                "scalar",
                "ragged",
                "no_columns",
                "bool",
                "complex",
                "datetime",
                "timedelta",
                "text",
                "object_text",
                "object_none",
                "masked",
                "nullable_na",
                "int_na",
                "series_misaligned",
                "series_reordered",
                "frame_repeated_columns",
                "categorical",
                "python_int_overflow",
                "none",
            ]
        )
    )
    if kind in ("nan", "inf"):
        y = x.copy()
        y[i] = np.nan if kind == "nan" else -np.inf
        return y, kind, None
    if kind == "short":
        return x[:-1], kind, None
    if kind == "long":
        return np.append(x, 1.0), kind, None
    if kind == "three_d":
        return np.zeros((n, 2, 2)), kind, None
    if kind == "scalar":
        return draw(st.sampled_from([1.0, np.float64(2), 3])), kind, None
    if kind == "ragged":
        rows = [[1.0, 2.0]] * max(n, 2)
        rows[i] = [1.0]
        return rows, kind, None
    if kind == "no_columns":
        return np.zeros((n, 0)), kind, None
    if kind == "bool":
        return x > 0, kind, None
    if kind == "complex":
        return x.astype(complex), kind, None
    if kind == "datetime":
        return np.full(n, np.datetime64("2021-06-01")), kind, None
    if kind == "timedelta":
        return np.arange(n).astype("timedelta64[D]"), kind, None
    if kind == "text":
        return x.astype(str), kind, None
    if kind in ("object_text", "object_none"):
        y = x.astype(object)
        y[i] = "a" if kind == "object_text" else None
        return y, kind, None
    if kind == "masked":
        mask = np.zeros(n, dtype=bool)
        mask[i] = True
        return np.ma.masked_array(x, mask=mask), kind, None
    if kind in ("nullable_na", "int_na"):
        arr = pd.array(np.round(x) if kind == "int_na" else x, dtype="Int64" if kind == "int_na" else "Float64")
        arr[i] = pd.NA
        return pd.Series(arr, index=ids), kind, None
    if kind == "series_misaligned":
        return pd.Series(x, index=[f"other{k}" for k in range(n)]), kind, None
    if kind == "series_reordered":
        if n < 2:
            return pd.Series(x, index=["zz"]), kind, None
        return pd.Series(x[::-1], index=ids[::-1]), kind, None
    if kind == "frame_repeated_columns":
        return pd.DataFrame(np.column_stack([x, x]), index=ids, columns=["a", "a"]), kind, None
    if kind == "categorical":
        return pd.Series(pd.Categorical(np.round(x)), index=ids), kind, None
    if kind == "python_int_overflow":
        y = x.tolist()
        y[i] = 2**1024
        return y, kind, "overflowing-python-ints"
    return None, kind, None


# ---------------------------------------------------------------------------
# polygons: rectangle partitions with exact integer coordinates
# ---------------------------------------------------------------------------
@dataclass
class Tiling:
    """Units made of axis-aligned rectangles with integer corners (a unit may hold several)."""

    rects: list[list[tuple[int, int, int, int]]]
    exp: int = 0
    offset: int = 0
    vertices: str = "plain"  # "plain", "midpoints" (extra vertices on edges), "reversed"
    empty: tuple[int, ...] = ()

    def shapes(self, scaled: bool = True) -> np.ndarray:
        """The units as shapely geometries; unscaled ones are the oracle's (exact) copy."""
        out = np.empty(len(self.rects), dtype=object)
        for u, parts in enumerate(self.rects):
            if u in self.empty:
                out[u] = shapely.Polygon()
                continue
            polys = [self._polygon(r, scaled) for r in parts]
            out[u] = polys[0] if len(polys) == 1 else shapely.MultiPolygon(polys)
        return out

    def _polygon(self, r: tuple[int, int, int, int], scaled: bool) -> shapely.Polygon:
        x0, y0, x1, y1 = r
        ring = [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]
        if self.vertices == "midpoints":
            # extra vertices halfway along each edge: collinear points, T-junction-like meetings
            pairs = zip(ring, ring[1:] + ring[:1], strict=True)
            ring = [p for a, b in pairs for p in (a, ((a[0] + b[0]) / 2, (a[1] + b[1]) / 2))]
        if self.vertices == "reversed":
            ring = ring[::-1][1:] + ring[::-1][:1]
        xy = np.asarray(ring, dtype=np.float64)
        if scaled:
            xy = np.ldexp(xy + self.offset, self.exp)
        return shapely.Polygon(xy)

    @property
    def n(self) -> int:
        return len(self.rects)


@st.composite
def tilings(draw, max_units: int = 14, scales=(0, 0, 0, -4, 5), multipart: bool = True) -> Tiling:
    """A random guillotine partition of an integer box, with some units removed or merged."""
    width, height = draw(st.integers(1, 9)), draw(st.integers(1, 9))
    target = draw(st.integers(1, max_units))
    rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
    rects = [(0, 0, width, height)]
    while len(rects) < target:
        splittable = [k for k, r in enumerate(rects) if r[2] - r[0] > 1 or r[3] - r[1] > 1]
        if not splittable:
            break
        x0, y0, x1, y1 = rects.pop(int(rng.choice(splittable)))
        vertical = (x1 - x0 > 1) and (y1 - y0 <= 1 or rng.random() < 0.5)
        if vertical:
            cut = int(rng.integers(x0 + 1, x1))
            rects += [(x0, y0, cut, y1), (cut, y0, x1, y1)]
        else:
            cut = int(rng.integers(y0 + 1, y1))
            rects += [(x0, y0, x1, cut), (x0, cut, x1, y1)]
    rng.shuffle(rects)
    # remove some rectangles: holes in the map, islands
    keep = [r for r in rects if rng.random() > draw(st.sampled_from([0.0, 0.2, 0.5]))] or rects[:1]
    units: list[list[tuple[int, int, int, int]]] = [[r] for r in keep]
    if multipart and len(units) > 2 and draw(st.booleans()):
        # merge two rectangles that do not touch into one multi-part unit
        a, b = units[0][0], units[-1][0]
        apart = a[2] < b[0] or b[2] < a[0] or a[3] < b[1] or b[3] < a[1]
        if apart:
            units = [[a, b], *units[1:-1]]
    empty = (
        tuple(sorted(set(draw(st.lists(st.integers(0, len(units) - 1), max_size=2))))) if draw(st.booleans()) else ()
    )
    return Tiling(
        units,
        exp=draw(st.sampled_from(scales)),
        offset=draw(st.sampled_from([0, 0, 1000, -(2**20)])),
        vertices=draw(st.sampled_from(["plain", "plain", "midpoints", "reversed"])),
        empty=empty,
    )
