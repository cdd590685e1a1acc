"""The scale-out route: weights, spatial lags and Moran's I on Dask collections.

Builders take a Dask DataFrame of points (coordinate columns found as
:func:`vicino.k_nearest` finds them) or a dask-geopandas GeoDataFrame of
points or polygons, with ids from the index or a column, and return an
:class:`EdgeTable`: a distributed edge table with the same links and weights
as the in-memory builder on the same data.

How (Hilbert-curve partitioning with halos, as in distributed k-d and
domain-decomposition methods):

1. Each input partition is checked and read into coordinates (or bounding
   boxes and Well-Known Binary for polygons) and numbered by global
   position (partition order, then row order: the position the unit has in
   ``ddf.compute()``).
2. A Hilbert key of 16 bits per axis orders the units; cut points drawn from
   a sample balance the partitions, and one shuffle (``set_index`` on the
   partition number, with known divisions) moves each unit to its spatial
   partition. ``partition=False`` keeps the input partitions as they are
   (already spatial, e.g. after dask-geopandas' ``spatial_shuffle``).
3. Each partition receives a halo: the units of other partitions that can
   reach its own units. For ``within_distance``, units within the radius of
   the partition's bounding box; for ``k_nearest``, within the largest k-th
   neighbour distance of a local search, then again, for the units whose
   k-th distance exceeds the halo radius, with the k-th distance found,
   until every unit is certified; for ``contiguity``, units whose boxes,
   grown by the tolerance, meet the partition's box.
4. Each partition calls the in-memory builder (the Rust core) on its units
   and halo, in global position order (so ties at the k-th distance go to
   the lower global position, as in memory), and keeps its own units' rows.

The small passes (partition sizes, extents, key sample, the rounds of k
nearest) run when the builder is called and leave their data persisted on
the cluster; the edge table itself is a lazy Dask DataFrame. Watch progress
with ``distributed.progress(table.persist().edges)`` or the dashboard
(``client.dashboard_link``).
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace
from typing import Any, Literal, cast

import numpy as np
import pandas as pd

try:
    import dask
    import dask.dataframe as dd
except ImportError as exc:  # pragma: no cover - the extra is missing
    raise ImportError("vicino.dask needs Dask: pip install 'vicino[dask]'") from exc

from . import _gateway as core
from ._checks import choice, flag, whole_number
from ._ids import examples
from .build import METRICS, Metric
from .build import contiguity as _contiguity
from .build import k_nearest as _k_nearest
from .build import within_distance as _within_distance
from .errors import (
    DuplicateLocationWarning,
    IdError,
    InternalError,
    InvalidInputError,
    InvalidTypeError,
    InvalidValuesError,
    IslandError,
    TooLargeError,
    VicinoError,
)
from .geometry import _pick_columns, as_points, as_polygons
from .stats import ALTERNATIVES, AnalyticInference, MoranResult, normal_p
from .stats import moran as _moran
from .weights import Step, Weights, built

__all__ = ["EdgeTable", "contiguity", "k_nearest", "lag", "moran", "within_distance"]

BITS = 16  # Hilbert key bits per axis: 2^32 cells, far finer than any partition
SLACK = 1e-9  # relative slack of halo radii, so that rounding never drops a unit that can reach
SAMPLE = 4096  # keys sampled to place the cuts between spatial partitions
Delayed = Any  # dask.delayed.Delayed (untyped)


# ---- small numeric helpers (vectorized) -------------------------------------------
# exchanges of data between partitions: sources x destinations pieces up to _DIRECT (few tasks,
# no shuffle machinery), Dask's shuffle beyond; hash buckets of about _BUCKET units (tens of MB each)
_DIRECT = 4096
_BUCKET = 2_000_000


def _hilbert(x: np.ndarray, y: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Hilbert-curve index of each point on a 2^BITS grid over the box [lo, hi].

    The quadrant-by-quadrant conversion with rotations (Hilbert 1891; as in Warren, Hacker's Delight,
    ch. 16; from memory). Only locality matters here: the results never depend on the key.
    """
    side = 1 << BITS
    span = np.where(hi > lo, hi - lo, 1.0)
    ix = np.clip(((x - lo[0]) / span[0] * (side - 1)).astype(np.int64), 0, side - 1)
    iy = np.clip(((y - lo[1]) / span[1] * (side - 1)).astype(np.int64), 0, side - 1)
    d = np.zeros(len(ix), dtype=np.int64)
    s = side >> 1
    while s > 0:
        rx = (ix & s) > 0
        ry = (iy & s) > 0
        d += s * s * ((3 * rx.astype(np.int64)) ^ ry.astype(np.int64))
        flip = ~ry & rx
        ix = np.where(flip, side - 1 - ix, ix)
        iy = np.where(flip, side - 1 - iy, iy)
        swap = ~ry
        ix, iy = np.where(swap, iy, ix), np.where(swap, ix, iy)
        s >>= 1
    return d


def _search(x: np.ndarray, y: np.ndarray, metric: str) -> np.ndarray:
    """Coordinates in which straight-line distance orders the metric: the plane, or unit vectors on the sphere."""
    if metric == "euclidean":
        return np.column_stack([x, y])
    lon, lat = np.radians(x), np.radians(y)
    return np.column_stack([np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)])


def _search_radius(d: float, metric: str) -> float:
    """A distance in the public metric as a radius in search coordinates, with slack (never smaller)."""
    if not math.isfinite(d):
        return math.inf
    if metric == "great_circle":
        d = 2.0 * math.sin(min(d / core.EARTH_RADIUS_KM, math.pi) / 2.0)
    return d * (1 + SLACK) + 1e-300


def _box_distance(pts: np.ndarray, lo: np.ndarray, hi: np.ndarray) -> np.ndarray:
    """Distance from each point (rows) to the box [lo, hi]."""
    gap = np.maximum(np.maximum(lo - pts, pts - hi), 0.0)
    return np.sqrt((gap * gap).sum(axis=1))


def _boxes_apart(lo_a: np.ndarray, hi_a: np.ndarray, lo_b: np.ndarray, hi_b: np.ndarray) -> float:
    gap = np.maximum(np.maximum(lo_a - hi_b, lo_b - hi_a), 0.0)
    return float(np.sqrt((gap * gap).sum()))


# ---- the per-partition work (runs on the workers) ---------------------------------
def _empty_units(id_dtype: Any, polygons: bool) -> pd.DataFrame:
    cols: dict[str, Any] = {"_id": pd.Series([], dtype=id_dtype), "_pos": np.zeros(0, np.int64)}
    if polygons:
        cols.update({"_wkb": pd.Series([], dtype=str), **{c: np.zeros(0) for c in ("minx", "miny", "maxx", "maxy")}})
    else:
        cols.update({"x": np.zeros(0), "y": np.zeros(0)})
    return pd.DataFrame(cols)


def _read_points(pdf: pd.DataFrame, id_column: Any, columns: Any, metric: str, id_dtype: Any) -> pd.DataFrame:
    """One input partition as (_id, x, y), checked as the in-memory builders check points."""
    if len(pdf) == 0:
        return _empty_units(id_dtype, False).drop(columns="_pos")
    ids = pdf.index if id_column is None else pd.Index(pdf[id_column])
    data = pdf if id_column is None else pdf.drop(columns=[id_column])
    xy, units = as_points(data, ids=ids, columns=columns)
    bad = ~np.isfinite(xy).all(axis=1)
    if metric == "great_circle":
        bad |= np.abs(xy[:, 1]) > 90
    if bad.any():
        # the core's own check names the unit and the coordinate, as in memory
        _within_distance(xy, 0.0, metric=cast(Metric, metric), ids=units)
        raise InvalidInputError(f"coordinates of ids {examples(units[bad])} are not usable locations")
    return pd.DataFrame({"_id": units, "x": xy[:, 0], "y": xy[:, 1]}).reset_index(drop=True)


def _read_polygons(pdf: pd.DataFrame, id_column: Any, id_dtype: Any) -> pd.DataFrame:
    """One input partition as (_id, _wkb, box), checked as the in-memory builders check polygons."""
    import shapely

    if len(pdf) == 0:
        return _empty_units(id_dtype, True).drop(columns="_pos")
    ids = pdf.index if id_column is None else pd.Index(pdf[id_column])
    geoms = np.asarray(pdf.geometry if hasattr(pdf, "geometry") else pdf["geometry"], dtype=object)
    _, units, _ = as_polygons(geoms, ids=ids)
    box = shapely.bounds(geoms)
    out = pd.DataFrame({"_id": units, "_wkb": shapely.to_wkb(geoms, hex=True)})  # text crosses shuffles intact
    for c, name in enumerate(("minx", "miny", "maxx", "maxy")):
        out[name] = box[:, c]
    return out


def _centres(frame: pd.DataFrame) -> tuple[np.ndarray, np.ndarray]:
    if "x" in frame.columns:
        return frame["x"].to_numpy(), frame["y"].to_numpy()
    cx = (frame["minx"].to_numpy() + frame["maxx"].to_numpy()) / 2
    cy = (frame["miny"].to_numpy() + frame["maxy"].to_numpy()) / 2
    return np.nan_to_num(cx), np.nan_to_num(cy)  # empty polygons: anywhere, they have no neighbours


def _extent(frame: pd.DataFrame) -> tuple[int, np.ndarray, np.ndarray]:
    x, y = _centres(frame)
    if len(x) == 0:
        return 0, np.full(2, np.inf), np.full(2, -np.inf)
    return len(x), np.array([x.min(), y.min()]), np.array([x.max(), y.max()])


def _key_sample(frame: pd.DataFrame, lo: np.ndarray, hi: np.ndarray, m: int) -> np.ndarray:
    if len(frame) == 0 or m == 0:
        return np.zeros(0, np.int64)
    keys = np.sort(_hilbert(*_centres(frame), lo, hi))
    return keys[np.linspace(0, len(keys) - 1, m).astype(np.int64)]


def _numbered(frame: pd.DataFrame, offset: int, lo: Any, hi: Any, cuts: Any) -> pd.DataFrame:
    out = frame.copy()
    out.insert(1, "_pos", np.arange(offset, offset + len(frame), dtype=np.int64))
    if cuts is not None:
        out["_part"] = np.searchsorted(cuts, _hilbert(*_centres(frame), lo, hi), side="right").astype(np.int64)
    return out


def _cut(frame: pd.DataFrame, labels: np.ndarray, n: int) -> tuple[pd.DataFrame, ...]:
    """The rows of ``frame`` split by ``labels`` (0 .. n-1), each piece in its original row order."""
    order = np.argsort(labels, kind="stable")
    cuts = np.searchsorted(labels[order], np.arange(n + 1))
    return tuple(frame.iloc[order[cuts[q] : cuts[q + 1]]] for q in range(n))


def _by_part(frame: pd.DataFrame, n: int) -> tuple[pd.DataFrame, ...]:
    return _cut(frame, frame["_part"].to_numpy(), n)


def _exchange(sources: Sequence[Any], split: Callable[..., tuple[pd.DataFrame, ...]], n: int, *args: Any) -> list[Any]:
    """All-to-all exchange: ``split(source, *args)`` gives n pieces; destination q gets the q-th of every source."""
    pieces = [dask.delayed(split)(source, *args) for source in sources]
    return [[piece[q] for piece in pieces] for q in range(n)]


def _direct(sources: int, destinations: int) -> bool:
    """Whether an exchange is small enough to run as sources x destinations pieces (else a Dask shuffle)."""
    return sources * destinations <= _DIRECT


def _settled(given: pd.DataFrame | Sequence[pd.DataFrame], p: int) -> pd.DataFrame:
    """A spatial partition's own units (one frame, or the pieces sent to it), in global position order."""
    frame = given if isinstance(given, pd.DataFrame) else pd.concat(list(given), ignore_index=True)
    if "_part" in frame.columns or frame.index.name == "_part":
        parts = frame.index.to_numpy() if frame.index.name == "_part" else frame["_part"].to_numpy()
        if len(parts) and not (parts == p).all():
            raise InternalError(f"spatial partition {p} received units of another partition; please report this")
        frame = frame.reset_index(drop=frame.index.name != "_part")
        frame = frame.drop(columns=[c for c in ("_part",) if c in frame.columns])
    return frame.sort_values("_pos", kind="stable").reset_index(drop=True)


def _box(frame: pd.DataFrame, metric: str) -> tuple[int, np.ndarray, np.ndarray]:
    """Size and bounding box of a partition, in search coordinates (or of the polygons' boxes)."""
    if "x" in frame.columns:
        pts = _search(frame["x"].to_numpy(), frame["y"].to_numpy(), metric)
        if len(pts) == 0:
            d = pts.shape[1]
            return 0, np.full(d, np.inf), np.full(d, -np.inf)
        return len(pts), pts.min(axis=0), pts.max(axis=0)
    lo = frame[["minx", "miny"]].to_numpy()
    hi = frame[["maxx", "maxy"]].to_numpy()
    if len(frame) == 0 or np.isnan(lo).all():
        return len(frame), np.full(2, np.inf), np.full(2, -np.inf)
    return len(frame), np.nanmin(lo, axis=0), np.nanmax(hi, axis=0)


def _halo(frame: pd.DataFrame, lo: np.ndarray, hi: np.ndarray, radius: float, metric: str) -> pd.DataFrame:
    """The units of ``frame`` that can reach the box [lo, hi] within ``radius`` (search coordinates)."""
    if len(frame) == 0:
        return frame
    if "x" in frame.columns:
        if math.isinf(radius):
            return frame
        pts = _search(frame["x"].to_numpy(), frame["y"].to_numpy(), metric)
        return frame[_box_distance(pts, lo, hi) <= radius]
    blo = frame[["minx", "miny"]].to_numpy() - radius
    bhi = frame[["maxx", "maxy"]].to_numpy() + radius
    meets = (blo <= hi).all(axis=1) & (bhi >= lo).all(axis=1)  # NaN boxes (empty units) meet nothing
    return frame[meets]


def _local(own: pd.DataFrame, halo: Sequence[tuple[int, pd.DataFrame]], p: int) -> pd.DataFrame:
    """Own units and halo in global position order, each with its home partition."""
    pieces = [own.assign(_home=p)] + [h.assign(_home=q) for q, h in halo if len(h)]
    local = pd.concat(pieces, ignore_index=True) if len(pieces) > 1 else pieces[0]
    return local.sort_values("_pos", kind="stable").reset_index(drop=True)


def _in_global_positions(err: VicinoError, positions: np.ndarray) -> VicinoError:
    """A worker's error with the local positions it names turned into global positions."""
    err.positions = [int(positions[q]) if 0 <= q < len(positions) else q for q in err.positions]
    return err


def _rows(w: Weights, local: pd.DataFrame, mine: np.ndarray, id_dtype: Any) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The links of the units marked ``mine`` (rows of ``local``), and those units' facts."""
    indptr, indices, data = w._indptr, w._indices, w._data
    counts = np.diff(indptr)
    rows = np.repeat(np.arange(len(local)), counts)
    keep = mine[rows]
    rows, cols = rows[keep], indices[keep]
    pos, home, ids = local["_pos"].to_numpy(), local["_home"].to_numpy(), local["_id"]
    out = {
        "source": ids.take(rows).to_numpy(),
        "target": ids.take(cols).to_numpy(),
        "weight": data[keep],
    }
    for name, values in w._links.items():
        out[name] = values[keep]
    out.update({"_spos": pos[rows], "_tpos": pos[cols], "_tpart": home[cols]})
    edges = pd.DataFrame(out)
    edges["source"] = edges["source"].astype(id_dtype)
    edges["target"] = edges["target"].astype(id_dtype)
    units = {"_id": ids[mine].to_numpy(), "_pos": pos[mine]}
    for name, values in w._units.items():
        units[name] = values[mine]
    unit_frame = pd.DataFrame(units)
    unit_frame["_id"] = unit_frame["_id"].astype(id_dtype)
    return edges, unit_frame


def _duplicates(local: pd.DataFrame, mine: np.ndarray) -> int:
    """Own units sharing their location with another unit of the partition or its halo."""
    if "x" not in local.columns or len(local) == 0:
        return 0
    shared = local.duplicated(subset=["x", "y"], keep=False).to_numpy()
    return int((shared & mine).sum())


@dataclass(frozen=True)
class _Spec:
    """What a partition's build needs to know: the builder and its parameters."""

    kind: str  # "k_nearest", "within_distance", "contiguity"
    params: dict[str, Any]
    metric: str
    id_dtype: Any


def _empty_edges(spec: _Spec) -> pd.DataFrame:
    fact = "border_length" if spec.kind == "contiguity" else "distance"
    return pd.DataFrame(
        {
            "source": pd.Series([], dtype=spec.id_dtype),
            "target": pd.Series([], dtype=spec.id_dtype),
            "weight": np.zeros(0),
            fact: np.zeros(0),
            "_spos": np.zeros(0, np.int64),
            "_tpos": np.zeros(0, np.int64),
            "_tpart": np.zeros(0, np.int64),
        }
    )


def _empty_unit_facts(spec: _Spec) -> pd.DataFrame:
    cols: dict[str, Any] = {"_id": pd.Series([], dtype=spec.id_dtype), "_pos": np.zeros(0, np.int64)}
    if spec.kind == "contiguity":
        cols["perimeter"] = np.zeros(0)
    return pd.DataFrame(cols)


def _build(spec: _Spec, p: int, own: pd.DataFrame, pending: Any, *halo: tuple[int, pd.DataFrame]) -> dict[str, Any]:
    """One partition's build: the in-memory builder on own units + halo, own (pending) rows kept.

    For k nearest also returns which pending units could not be certified
    (their k-th distance exceeds the halo radius) and the radius that will
    certify them.
    """
    mine_pos = own["_pos"].to_numpy() if pending is None else np.asarray(pending, dtype=np.int64)
    result: dict[str, Any] = {"edges": _empty_edges(spec), "units": _empty_unit_facts(spec), "duplicates": 0}
    result.update({"pending": np.zeros(0, np.int64), "radius": 0.0, "halo": 0})
    if len(mine_pos) == 0:
        return result
    local = _local(own, halo, p)
    result["halo"] = len(local) - len(own)
    mine = np.isin(local["_pos"].to_numpy(), mine_pos)
    if spec.kind == "k_nearest" and len(local) <= spec.params["k"]:
        result["pending"], result["radius"] = mine_pos, math.inf  # too few units in reach: take more
        result["box"] = _box(local[mine], spec.metric)[1:]
        return result
    ids = pd.Index(local["_id"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DuplicateLocationWarning)
        warnings.simplefilter("ignore", UserWarning)
        try:
            if spec.kind == "contiguity":
                import shapely

                w = _contiguity(shapely.from_wkb(local["_wkb"].to_numpy()), ids=ids, **spec.params)
            else:
                xy = local[["x", "y"]].to_numpy()
                make = _k_nearest if spec.kind == "k_nearest" else _within_distance
                w = make(xy, ids=ids, metric=cast(Metric, spec.metric), **_strip(spec.params))
        except VicinoError as err:
            raise _in_global_positions(err, local["_pos"].to_numpy()) from None
    if spec.kind == "k_nearest":
        kth = _kth(w, spec.params["k"])
        certified = kth <= spec.params["_radius"]
        late = mine & ~certified
        result["pending"] = local["_pos"].to_numpy()[late]
        result["radius"] = float(kth[late].max()) if late.any() else 0.0
        result["box"] = _box(local[late], spec.metric)[1:]
        mine = mine & certified
    result["edges"], result["units"] = _rows(w, local, mine, spec.id_dtype)
    result["duplicates"] = _duplicates(local, mine)
    return result


def _kth(w: Weights, k: int) -> np.ndarray:
    """Each unit's k-th neighbour distance (rows hold k links, sorted by position, not distance)."""
    return w._links["distance"].reshape(-1, k).max(axis=1)


def _local_kth(own: pd.DataFrame, k: int, metric: str) -> float:
    """The largest k-th neighbour distance among a partition's own units (inf when it has k or fewer)."""
    if len(own) <= k:
        return math.inf
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DuplicateLocationWarning)
        w = _k_nearest(own[["x", "y"]].to_numpy(), k, metric=cast(Metric, metric), ids=pd.Index(own["_pos"]))
    return float(_kth(w, k).max())


def _pick(result: dict[str, Any], name: str) -> Any:
    return result[name]


def _concat(frames: Sequence[pd.DataFrame], by: Sequence[str]) -> pd.DataFrame:
    out = pd.concat(list(frames), ignore_index=True) if len(frames) > 1 else frames[0]
    return out.sort_values(list(by), kind="stable").reset_index(drop=True)


def _public(edges: pd.DataFrame) -> pd.DataFrame:
    return edges.drop(columns=["_spos", "_tpos", "_tpart"])


def _unit_ids(units: pd.DataFrame) -> pd.DataFrame:
    return units.rename(columns={"_id": "id"}).drop(columns="_pos")


# ---- the driver -------------------------------------------------------------------
@dataclass(frozen=True)
class _Units:
    """Units spread over spatial partitions (persisted), with their sizes and boxes."""

    parts: list[Delayed]
    sizes: list[int]
    lo: list[np.ndarray]
    hi: list[np.ndarray]
    n: int
    id_dtype: Any


def _client_persist(*objs: Any) -> list[Any]:
    return list(dask.persist(*objs))


def _ids_and_dtype(ddf: Any, ids: Any) -> tuple[Any, Any]:
    if ids is None:
        return None, ddf.index.dtype
    if isinstance(ids, (str, int)) and ids in ddf.columns:
        return ids, ddf[ids].dtype
    raise IdError(
        f"ids must name a column of the Dask DataFrame (it has {examples(list(ddf.columns))}), "
        "or be None to use its index"
    )


def _check_frame(ddf: Any) -> None:
    if not isinstance(ddf, dd.DataFrame):
        raise InvalidTypeError(
            f"vicino.dask builders take a Dask DataFrame or dask-geopandas GeoDataFrame, got {type(ddf).__name__}; "
            "for data in memory use the builders of vicino itself"
        )


def _spread(
    ddf: Any,
    read: Callable[..., pd.DataFrame],
    args: tuple[Any, ...],
    id_dtype: Any,
    metric: str,
    *,
    partition: bool,
    npartitions: int | None,
    check_ids: bool,
) -> _Units:
    """Read, number, partition spatially and persist the units; sizes and boxes come back to the driver."""
    read_parts = [dask.delayed(read)(part, *args) for part in ddf.to_delayed()]
    read_parts = _client_persist(*read_parts)
    extents = dask.compute(*[dask.delayed(_extent)(r) for r in read_parts])
    sizes = [int(e[0]) for e in extents]
    n = sum(sizes)
    if n == 0:
        raise InvalidInputError("no units were given; the Dask DataFrame has no rows")
    offsets = np.concatenate([[0], np.cumsum(sizes)[:-1]]).astype(np.int64)
    lo = np.min([e[1] for e in extents], axis=0)
    hi = np.max([e[2] for e in extents], axis=0)
    if partition:
        parts_out = whole_number(npartitions, "npartitions", minimum=1) if npartitions is not None else len(sizes)
        m = [math.ceil(SAMPLE * s / n) for s in sizes]
        sample = np.concatenate(
            dask.compute(*[dask.delayed(_key_sample)(r, lo, hi, mi) for r, mi in zip(read_parts, m, strict=True)])
        )
        cuts = (
            np.quantile(np.sort(sample), np.arange(1, parts_out) / parts_out, method="lower")
            if parts_out > 1
            else np.zeros(0)
        )
        numbered = [dask.delayed(_numbered)(r, int(o), lo, hi, cuts) for r, o in zip(read_parts, offsets, strict=True)]
        if _direct(len(numbered), parts_out):
            pieces = _exchange(numbered, _by_part, parts_out, parts_out)
        else:
            meta = _numbered(_empty_units(id_dtype, read is _read_polygons).drop(columns="_pos"), 0, lo, hi, cuts)
            spatial = dd.from_delayed(numbered, meta=meta, verify_meta=False).set_index(
                "_part", divisions=tuple(range(parts_out + 1))
            )
            pieces = spatial.to_delayed()
            if len(pieces) != parts_out:
                raise InternalError(
                    f"the spatial shuffle gave {len(pieces)} partitions for {parts_out}; please report this"
                )
        units = [dask.delayed(_settled)(piece, p) for p, piece in enumerate(pieces)]
    else:
        units = [dask.delayed(_numbered)(r, int(o), None, None, None) for r, o in zip(read_parts, offsets, strict=True)]
    units = _client_persist(*units)
    del read_parts
    boxes = dask.compute(*[dask.delayed(_box)(u, metric) for u in units])
    if check_ids:
        _check_unique(units, n, id_dtype)
    return _Units(units, [int(b[0]) for b in boxes], [b[1] for b in boxes], [b[2] for b in boxes], n, id_dtype)


def _id_frame(frame: pd.DataFrame) -> pd.DataFrame:
    return frame[["_id"]]


def _repeated(pieces: Sequence[pd.DataFrame]) -> pd.Series:
    """The ids that appear more than once among one hash bucket's pieces, with their counts."""
    ids = pd.concat([p["_id"] for p in pieces], ignore_index=True)
    counts = ids.value_counts()
    return counts[counts > 1]


def _check_unique(units: list[Delayed], n: int, id_dtype: Any) -> None:
    """Ids unique across partitions (one hash exchange of the ids; within a partition they were checked on reading)."""
    buckets = max(1, min(-(-n // _BUCKET), len(units)))
    if _direct(len(units), buckets):
        ids = [dask.delayed(_id_frame)(u) for u in units]
        groups = [ids] if buckets == 1 else _exchange(ids, _split, buckets, buckets)
        repeated = pd.concat(list(dask.compute(*[dask.delayed(_repeated)(g) for g in groups])))
    else:
        meta = pd.DataFrame({"_id": pd.Series([], dtype=id_dtype)})
        column = dd.from_delayed([dask.delayed(_id_frame)(u) for u in units], meta=meta, verify_meta=False)["_id"]
        if int(column.drop_duplicates(split_out=max(1, len(units))).size.compute()) == n:
            return
        counts = column.value_counts()
        repeated = counts[counts > 1].compute()
    if len(repeated):
        raise IdError(
            f"ids must be unique, but {len(repeated)} id(s) repeat: {examples(repeated.index)}; "
            "pass ids= with unique labels, or reset the index"
        )


def _neighbours_of(u: _Units, p: int, lo: np.ndarray, hi: np.ndarray, radius: float) -> list[int]:
    """Partitions (other than p) with units that may lie within ``radius`` of the box [lo, hi]."""
    return [
        q for q in range(len(u.parts)) if q != p and u.sizes[q] and _boxes_apart(lo, hi, u.lo[q], u.hi[q]) <= radius
    ]


def _tagged(q: int, frame: pd.DataFrame) -> tuple[int, pd.DataFrame]:
    return q, frame


def _round(
    u: _Units,
    spec: _Spec,
    radii: dict[int, float],
    pending: dict[int, Any],
    boxes: dict[int, tuple[Any, Any]],
    certify: dict[int, float] | None = None,
) -> tuple[dict[int, Delayed], set[tuple[int, int]]]:
    """One round of builds: each partition p in ``radii`` with its halo within radii[p] of boxes[p].

    Radii are in search coordinates; for k nearest, rows are certified when
    their k-th distance is at most certify[p] (public metric).
    """
    out: dict[int, Delayed] = {}
    pairs: set[tuple[int, int]] = set()
    for p, radius in radii.items():
        lo, hi = boxes[p]
        sources = _neighbours_of(u, p, lo, hi, radius)
        halo = [dask.delayed(_tagged)(q, dask.delayed(_halo)(u.parts[q], lo, hi, radius, spec.metric)) for q in sources]
        pairs.update((p, q) for q in sources)
        step = replace(spec, params={**spec.params, "_radius": certify[p]}) if certify is not None else spec
        out[p] = dask.delayed(_build)(step, p, u.parts[p], pending.get(p), *halo)
    return out, pairs


def _strip(params: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in params.items() if not k.startswith("_")}


def _late(result: dict[str, Any]) -> tuple[np.ndarray, float, Any]:
    """What the driver needs of a round: the units left uncertified, their k-th distance bound and box."""
    return result["pending"], result["radius"], result.get("box")


def _finish(
    u: _Units, spec: _Spec, results: dict[int, list[Delayed]], pairs: set[tuple[int, int]], step: Step
) -> EdgeTable:
    edges, units, dups, halos = [], [], [], []
    for p in range(len(u.parts)):
        rs = results.get(p, [])
        if not rs:
            edges.append(dask.delayed(_empty_edges)(spec))
            units.append(dask.delayed(_empty_unit_facts)(spec))
            dups.append(0)
            halos.append(0)
            continue
        edges.append(dask.delayed(_concat)([dask.delayed(_pick)(r, "edges") for r in rs], ("_spos", "_tpos")))
        units.append(dask.delayed(_concat)([dask.delayed(_pick)(r, "units") for r in rs], ("_pos",)))
        dups.append(dask.delayed(sum)([dask.delayed(_pick)(r, "duplicates") for r in rs]))
        halos.append(dask.delayed(sum)([dask.delayed(_pick)(r, "halo") for r in rs]))
    return EdgeTable(
        edges,
        units,
        (step,),
        frozenset(pairs),
        u.n,
        spec.id_dtype,
        dups,
        halos,
        _empty_edges(spec),
        _empty_unit_facts(spec),
        (*u.parts, *(d for rs in results.values() for d in rs)),
    )


# ---- the result -------------------------------------------------------------------
class EdgeTable:
    """A distributed weights matrix: one row per link, partitioned spatially.

    Made by :func:`k_nearest`, :func:`within_distance` and :func:`contiguity`
    of this module. Partition p holds the links whose source is one of its
    own units (sorted by the sources' and targets' positions in the input),
    and :attr:`units` lists every unit, so islands are kept.

    Attributes
    ----------
    edges : dask.dataframe.DataFrame
        ``source``, ``target``, ``weight`` and the per-link fact
        (``distance`` or ``border_length``), as :meth:`vicino.Weights.to_edges`.
    units : dask.dataframe.DataFrame
        ``id`` of every unit (and ``perimeter`` for polygons), by partition.
    n : int
        Number of units.
    recipe : tuple of Step
        How the links were built and transformed.
    """

    def __init__(
        self,
        parts: list[Delayed],
        unit_parts: list[Delayed],
        recipe: tuple[Step, ...],
        pairs: frozenset[tuple[int, int]],
        n: int,
        id_dtype: Any,
        duplicates: list[Any],
        halos: list[Any],
        edge_meta: pd.DataFrame,
        unit_meta: pd.DataFrame,
        keep: tuple[Any, ...] = (),
        needs: dict[tuple[int, int], Any] | None = None,
    ) -> None:
        self._parts = parts
        self._unit_parts = unit_parts
        self.recipe = recipe
        self._pairs = pairs  # (p, q): partition q lent halo units to partition p
        self.n = n
        self._id_dtype = id_dtype
        self._duplicates = duplicates
        self._halos = halos
        self._edge_meta = edge_meta
        self._unit_meta = unit_meta
        # persisted pieces the lazy partitions read: the cluster keeps them while this table lives
        self._keep = keep
        # (p, q): the positions of q's units that p's links point to; they outlive a change of weights
        self._needs = needs

    def _needed(self) -> dict[tuple[int, int], Any]:
        if self._needs is None:
            self._needs = {(p, q): dask.delayed(_needs)(self._parts[p], q) for p, q in sorted(self._pairs)}
        return self._needs

    def _with(self, parts: list[Delayed], step: Step) -> EdgeTable:
        return EdgeTable(
            parts,
            self._unit_parts,
            (*self.recipe, step),
            self._pairs,
            self.n,
            self._id_dtype,
            self._duplicates,
            self._halos,
            self._edge_meta,
            self._unit_meta,
            self._keep,
            self._needs,
        )

    @property
    def npartitions(self) -> int:
        """Number of spatial partitions."""
        return len(self._parts)

    @property
    def edges(self) -> Any:
        """The links as a lazy Dask DataFrame (``source``, ``target``, ``weight``, per-link fact)."""
        parts = [dask.delayed(_public)(p) for p in self._parts]
        return dd.from_delayed(parts, meta=_public(self._edge_meta), verify_meta=False)

    @property
    def units(self) -> Any:
        """Every unit's ``id`` (and facts such as ``perimeter``), as a lazy Dask DataFrame."""
        parts = [dask.delayed(_unit_ids)(p) for p in self._unit_parts]
        return dd.from_delayed(parts, meta=_unit_ids(self._unit_meta), verify_meta=False)

    def persist(self) -> EdgeTable:
        """The same table with its partitions computed and kept in the workers' memory.

        Pass ``table.persist().edges`` to ``distributed.progress`` to watch the build.
        """
        needs = self._needed()
        # one persist: the pieces share the build tasks; the counts are kept so that to_weights()
        # and halo_sizes() of the persisted table do not build again
        k = len(self._parts)
        lazy = [d for d in (*self._duplicates, *self._halos) if dask.is_dask_collection(d)]
        done = _client_persist(*self._parts, *self._unit_parts, *needs.values(), *lazy)
        parts, units, needed = done[:k], done[k : 2 * k], done[2 * k : 2 * k + len(needs)]
        kept = iter(done[2 * k + len(needs) :])
        dups, halos = (
            [next(kept) if dask.is_dask_collection(d) else d for d in ds] for ds in (self._duplicates, self._halos)
        )
        out = EdgeTable(
            parts,
            units,
            self.recipe,
            self._pairs,
            self.n,
            self._id_dtype,
            dups,
            halos,
            self._edge_meta,
            self._unit_meta,
            self._keep,
            dict(zip(needs, needed, strict=True)),
        )
        return out

    def halo_sizes(self) -> list[int]:
        """Halo units each partition received (summed over the rounds of k nearest): the build's extra volume."""
        return [int(h) for h in dask.compute(*self._halos)]

    def to_parquet(self, path: Any, **options: Any) -> Any:
        """Write the edge table to a Parquet dataset (one file per partition); options go to Dask."""
        return self.edges.to_parquet(path, **options)

    def to_weights(self) -> Weights:
        """The links as an in-memory :class:`vicino.Weights`, equal to the in-memory builder's result.

        Collects every link on the client: use it when the matrix fits in
        memory (about 24 bytes per link plus the ids).
        """
        # one compute: the units, links and duplicate counts share the build tasks of a lazy table
        got_units, got_edges, got_dups = dask.compute(self._unit_parts, self._parts, self._duplicates)
        units = pd.concat(list(got_units), ignore_index=True).sort_values("_pos")
        edges = pd.concat(list(got_edges), ignore_index=True)
        if len(units) != self.n or not (units["_pos"].to_numpy() == np.arange(self.n)).all():
            raise InternalError("the distributed units do not cover every position once; please report this")
        edges = edges.sort_values(["_spos", "_tpos"], kind="stable")
        rows = edges["_spos"].to_numpy()
        indptr = np.zeros(self.n + 1, dtype=np.int64)
        np.cumsum(np.bincount(rows, minlength=self.n), out=indptr[1:])
        ids = pd.Index(units["_id"].to_numpy(), dtype=self._id_dtype)
        indptr, indices, data = core.validate(
            self.n, indptr, edges["_tpos"].to_numpy(), edges["weight"].to_numpy(dtype=np.float64), ids
        )
        fact = [
            c for c in self._edge_meta.columns if c not in ("source", "target", "weight", "_spos", "_tpos", "_tpart")
        ]
        links = {c: edges[c].to_numpy(dtype=np.float64) for c in fact}
        unit_facts = {c: units[c].to_numpy(dtype=np.float64) for c in units.columns if c not in ("_id", "_pos")}
        duplicates = sum(int(d) for d in got_dups) if self.recipe[0].action != "contiguity" else 0
        if duplicates:
            warnings.warn(
                f"{duplicates} units share their location with at least one other unit; they are at "
                "distance 0 of each other and ties are broken by position (lower first)",
                DuplicateLocationWarning,
                stacklevel=2,
            )
        return built((indptr, indices, data), ids, self.recipe, links=links, units=unit_facts, duplicates=duplicates)

    def standardize(
        self, method: Literal["row", "binary"], *, islands: Literal["raise", "keep"] = "raise"
    ) -> EdgeTable:
        """A standardized copy: ``row`` (each unit's weights sum to 1) or ``binary`` (every link weighs 1).

        Each partition holds all the rows of its units, so this is one pass
        without moving data. ``islands="raise"`` refuses units without links
        (:class:`vicino.IslandError`, raised when the table is computed), as
        :meth:`vicino.Weights.standardize` does.
        """
        choice(method, "standardization", ("row", "binary"))
        choice(islands, "islands policy", ("raise", "keep"))
        parts = [
            dask.delayed(_standardized)(e, u, method, islands == "raise")
            for e, u in zip(self._parts, self._unit_parts, strict=True)
        ]
        params = {"method": method} if islands == "raise" else {"method": method, "islands": islands}
        return self._with(parts, Step("standardize", params))

    def __repr__(self) -> str:
        steps = " -> ".join(str(s) for s in self.recipe)
        return f"<vicino.dask.EdgeTable n={self.n} partitions={self.npartitions}: {steps}>"


def _standardized(edges: pd.DataFrame, units: pd.DataFrame, method: str, refuse_islands: bool) -> pd.DataFrame:
    linked = np.isin(units["_pos"].to_numpy(), edges["_spos"].to_numpy())
    if refuse_islands and not linked.all():
        alone = units["_id"][~linked]
        raise IslandError(
            f'{len(alone)} unit(s) have no neighbours (islands), ids {examples(alone)}; pass islands="keep" '
            "to leave their rows empty, or choose weights that reach them",
            count=len(alone),
            ids=list(alone[:10]),
        )
    out = edges.copy()
    if method == "binary":
        out["weight"] = 1.0
    else:
        sums = out.groupby("_spos", sort=False)["weight"].transform("sum").to_numpy()
        out["weight"] = out["weight"].to_numpy() / sums
    return out


# ---- builders ---------------------------------------------------------------------
def _points(ddf: Any, ids: Any, columns: Any, metric: str, partition: Any, npartitions: Any, check_ids: Any) -> _Units:
    _check_frame(ddf)
    choice(metric, "metric", METRICS)
    partition, check_ids = flag(partition, "partition"), flag(check_ids, "check_ids")
    id_column, id_dtype = _ids_and_dtype(ddf, ids)
    meta = ddf._meta
    geometry = getattr(meta, "geometry", None) if "geometry" in meta.columns else None
    if geometry is None and columns is None:
        data = meta if id_column is None else meta.drop(columns=[id_column])
        _pick_columns(data, None)  # the in-memory rule, with its message, before any work
    return _spread(
        ddf,
        _read_points,
        (id_column, columns, metric, id_dtype),
        id_dtype,
        metric,
        partition=partition,
        npartitions=npartitions,
        check_ids=check_ids,
    )


def within_distance(
    points: Any,
    radius: float,
    *,
    metric: Metric = "euclidean",
    ids: Any = None,
    columns: Any = None,
    partition: bool = True,
    npartitions: int | None = None,
    check_ids: bool = True,
) -> EdgeTable:
    """Links between every pair of units at distance <= ``radius``, on a Dask collection.

    Parameters
    ----------
    points : dask.dataframe.DataFrame or dask_geopandas.GeoDataFrame
        Points: coordinate columns (found as :func:`vicino.k_nearest` finds
        them, or named by ``columns``) or point geometries.
    radius, metric, columns
        As in :func:`vicino.within_distance`.
    ids : column name, optional
        The column holding unit ids; by default the index.
    partition : bool
        Partition the units along a Hilbert curve first (one shuffle).
        False keeps the input partitions (right when they are already
        spatial; correct in any case, only the halos grow).
    npartitions : int, optional
        Spatial partitions (by default as many as the input has).
    check_ids : bool
        Check that ids are unique across partitions (one shuffle of the ids).

    Returns
    -------
    EdgeTable
        The same links, weights and distances as
        :func:`vicino.within_distance` on ``points.compute()``.
    """
    _within_distance([[0.0, 0.0]], radius, metric=metric)  # the in-memory checks of radius and metric
    u = _points(points, ids, columns, metric, partition, npartitions, check_ids)
    spec = _Spec("within_distance", {"radius": float(radius)}, metric, u.id_dtype)
    r = _search_radius(float(radius), metric)
    todo = {p: r for p in range(len(u.parts)) if u.sizes[p]}
    results, pairs = _round(u, spec, todo, {}, {p: (u.lo[p], u.hi[p]) for p in todo})
    step = Step("within_distance", {"radius": float(radius), "metric": metric})
    return _finish(u, spec, {p: [d] for p, d in results.items()}, pairs, step)


def k_nearest(
    points: Any,
    k: int,
    *,
    metric: Metric = "euclidean",
    ids: Any = None,
    columns: Any = None,
    partition: bool = True,
    npartitions: int | None = None,
    check_ids: bool = True,
) -> EdgeTable:
    """Links from each unit to its exact k nearest neighbours, on a Dask collection.

    Each partition first finds the k nearest among its own units; the
    largest k-th distance bounds its halo. A unit whose k-th distance with
    the halo exceeds the halo's radius is not certified and is searched again
    with a halo of that distance (which certifies it), round by round. Ties
    go to the lower position in the input, as in memory.

    Parameters and result as in :func:`within_distance` (``k`` as in
    :func:`vicino.k_nearest`).
    """
    k = whole_number(k, "k", minimum=1)
    choice(metric, "metric", METRICS)
    u = _points(points, ids, columns, metric, partition, npartitions, check_ids)
    if u.n <= k:
        # the in-memory refusal, with its message
        _k_nearest(np.column_stack([np.arange(u.n), np.zeros(u.n)]), k)
    spec = _Spec("k_nearest", {"k": k}, metric, u.id_dtype)
    live = [p for p in range(len(u.parts)) if u.sizes[p]]
    kth = dict(zip(live, dask.compute(*[dask.delayed(_local_kth)(u.parts[p], k, metric) for p in live]), strict=True))
    finite = [d for d in kth.values() if math.isfinite(d)]
    guess = max(finite) if finite else math.inf
    radii = {p: (d if math.isfinite(d) else guess) for p, d in kth.items()}
    boxes = {p: (u.lo[p], u.hi[p]) for p in live}
    pending: dict[int, Any] = {}
    results: dict[int, list[Delayed]] = {}
    pairs: set[tuple[int, int]] = set()
    while radii:
        search = {p: _search_radius(d, metric) for p, d in radii.items()}
        out, new_pairs = _round(u, spec, search, pending, boxes, certify=radii)
        pairs |= new_pairs
        out = dict(zip(out, _client_persist(*out.values()), strict=True))
        late = dask.compute({p: dask.delayed(_late)(d) for p, d in out.items()})[0]
        for p, d in out.items():
            results.setdefault(p, []).append(d)
        previous, radii, pending, boxes = radii, {}, {}, {}
        for p, (left, found, box) in late.items():
            if len(left) == 0:
                continue
            if math.isfinite(found):
                radii[p] = found  # the k-th distance found bounds the true one: this halo certifies the unit
            else:  # too few units within reach: look further
                before = previous[p]
                radii[p] = 2 * before if 0 < before < math.inf else math.inf
            pending[p] = left
            boxes[p] = box
    step = Step("k_nearest", {"k": k, "metric": metric})
    return _finish(u, spec, results, pairs, step)


def contiguity(
    polygons: Any,
    rule: Literal["queen", "rook"] = "queen",
    *,
    tolerance: float = 0.0,
    weight: Literal["binary", "border_length"] = "binary",
    ids: Any = None,
    partition: bool = True,
    npartitions: int | None = None,
    check_ids: bool = True,
) -> EdgeTable:
    """Contiguity links (queen or rook) between polygons of a Dask collection.

    Parameters
    ----------
    polygons : dask_geopandas.GeoDataFrame or dask.dataframe.DataFrame
        One Polygon or MultiPolygon per unit in the ``geometry`` column.
    rule, tolerance, weight
        As in :func:`vicino.contiguity`.
    ids, partition, npartitions, check_ids
        As in :func:`within_distance`. Polygons are partitioned by the
        centres of their bounding boxes and cross the shuffle as
        Well-Known Binary (exact).

    Returns
    -------
    EdgeTable
        The same links, weights and border lengths as
        :func:`vicino.contiguity` on ``polygons.compute()``; ``units`` holds
        each unit's ``perimeter``.
    """
    import shapely

    _contiguity([shapely.box(0, 0, 1, 1)], rule, tolerance=tolerance, weight=weight)  # the in-memory checks
    _check_frame(polygons)
    if "geometry" not in polygons.columns:
        raise InvalidTypeError(
            "a Dask DataFrame of polygons needs a 'geometry' column (a dask-geopandas GeoDataFrame works)"
        )
    partition, check_ids = flag(partition, "partition"), flag(check_ids, "check_ids")
    id_column, id_dtype = _ids_and_dtype(polygons, ids)
    u = _spread(
        polygons,
        _read_polygons,
        (id_column, id_dtype),
        id_dtype,
        "euclidean",
        partition=partition,
        npartitions=npartitions,
        check_ids=check_ids,
    )
    tol = float(tolerance)
    spec = _Spec("contiguity", {"rule": rule, "tolerance": tol, "weight": weight}, "euclidean", id_dtype)
    grow = tol * (1 + SLACK) + 1e-300 if tol > 0 else 0.0
    todo = {p: grow for p in range(len(u.parts)) if u.sizes[p] and np.isfinite(u.lo[p]).all()}
    results, pairs = _round(u, spec, todo, {}, {p: (u.lo[p], u.hi[p]) for p in todo})
    params: dict[str, Any] = {"rule": rule, "tolerance": tol}
    if weight != "binary":
        params["weight"] = weight
    # partitions whose units are all empty polygons still list them (as islands)
    for p in range(len(u.parts)):
        if u.sizes[p] and p not in results:
            results[p] = dask.delayed(_build)(spec, p, u.parts[p], None)
    return _finish(u, spec, {p: [d] for p, d in results.items()}, pairs, Step("contiguity", params))


# ---- using distributed weights ----------------------------------------------------
def _as_frame(values: Any) -> tuple[Any, bool]:
    """Values as a Dask DataFrame indexed by id, and whether they were a Series."""
    if isinstance(values, (pd.Series, pd.DataFrame)):
        values = dd.from_pandas(values, npartitions=1)
    if isinstance(values, dd.Series):
        return values.to_frame(name=values.name if values.name is not None else "_value"), True
    if isinstance(values, dd.DataFrame):
        return values, False
    raise InvalidTypeError(
        f"values must be a Dask (or pandas) Series or DataFrame indexed by the units' ids, got {type(values).__name__}"
    )


def _unit_home(units: pd.DataFrame, p: int) -> pd.DataFrame:
    return pd.DataFrame({"_id": units["_id"], "_pos": units["_pos"], "_part": np.full(len(units), p, np.int64)})


def _split(frame: pd.DataFrame, buckets: int) -> tuple[pd.DataFrame, ...]:
    """Rows split into hash buckets of their ``_id`` (the same id lands in the same bucket in every process)."""
    hashed = pd.util.hash_pandas_object(frame["_id"], index=False).to_numpy()
    return _cut(frame, (hashed % np.uint64(buckets)).astype(np.int64), buckets)


def _value_frame(part: pd.DataFrame, id_dtype: Any) -> pd.DataFrame:
    """One partition of the values with its index as an ``_id`` column of the units' id dtype."""
    ids = part.index
    if ids.dtype != id_dtype:
        try:
            converted = ids.astype(id_dtype)
            # only a lossless conversion (int32 to int64, float 3.0 to int 3): other ids stay and are unknown
            ids = converted if bool(np.asarray(converted == ids, dtype=bool).all()) else ids
        except (TypeError, ValueError, OverflowError):
            pass
    flat = part.reset_index(drop=True)
    flat.insert(0, "_id", pd.Series(ids, index=flat.index))
    return flat


def _joined(units: Sequence[pd.DataFrame], values: Sequence[pd.DataFrame], nparts: int) -> tuple[pd.DataFrame, ...]:
    """One bucket: its units joined with their values by id, then split by the units' spatial partition."""
    both = pd.concat(units, ignore_index=True).merge(
        pd.concat(values, ignore_index=True), on="_id", how="outer", indicator=True
    )
    part = both["_part"].fillna(0).to_numpy().astype(np.int64)  # unknown ids: reported by partition 0
    return _cut(both, part, nparts)


def _checked_home(pieces: Sequence[pd.DataFrame], p: int, value_columns: list[Any]) -> pd.DataFrame:
    """A partition's own units with their values, in position order; missing or unknown ids refused."""
    frame = pd.concat(pieces, ignore_index=True)  # the shuffled route has "_part" as index: dropped
    both = frame["_merge"].astype(str)
    unknown = frame.loc[both == "right_only", "_id"]
    if len(unknown):
        raise IdError(f"the values' index is not an id for {len(unknown)} row(s): {examples(unknown)}")
    missing = frame.loc[both == "left_only", "_id"]
    if len(missing):
        raise IdError(f"{len(missing)} id(s) without values: {examples(missing)}; give one value per unit")
    block = frame[value_columns]
    for c, dtype in zip(block.columns, block.dtypes, strict=True):
        if pd.api.types.is_bool_dtype(dtype) or not pd.api.types.is_numeric_dtype(dtype):
            raise InvalidValuesError(f"column {c!r} has dtype {dtype}; values must be numbers")
    arr = block.to_numpy(dtype=np.float64)
    bad = ~np.isfinite(arr).all(axis=1)
    if bad.any():
        named = frame["_id"][bad]
        raise InvalidValuesError(
            f"{int(bad.sum())} unit(s) have NaN or infinite values, ids {examples(named)}; "
            "drop or impute them (and subset the weights) first",
            count=int(bad.sum()),
            ids=list(named[:10]),
        )
    out = pd.DataFrame(arr, columns=value_columns)
    out.insert(0, "_pos", frame["_pos"].to_numpy().astype(np.int64))
    out.insert(0, "_id", frame["_id"].to_numpy())
    return out.sort_values("_pos", kind="stable").reset_index(drop=True)


def _homes(values: Any, table: EdgeTable) -> tuple[list[Delayed], list[Any]]:
    """Each value moved to its unit's spatial partition, in one exchange of n rows.

    The unit ids (by spatial partition) and the values (by their own
    partitions) go to the same hash buckets of the id, about ``_BUCKET``
    units each; each bucket joins its ids with their values and sends every
    row to its unit's partition: a few tasks per partition. Beyond
    ``_DIRECT`` pieces, a Dask join and shuffle do the same.
    """
    frame, _ = _as_frame(values)
    columns = list(frame.columns)
    parts = frame.to_delayed()
    nparts, dtype = table.npartitions, table._id_dtype
    buckets = max(1, min(-(-table.n // _BUCKET), max(len(parts), nparts)))
    if _direct(len(parts) + nparts, buckets) and _direct(buckets, nparts):
        units = [dask.delayed(_unit_home)(u, p) for p, u in enumerate(table._unit_parts)]
        given = [dask.delayed(_value_frame)(v, dtype) for v in parts]
        groups = [[*units, *given]]
        if buckets > 1:
            by_units, by_values = (_exchange(x, _split, buckets, buckets) for x in (units, given))
            groups = [a + b for a, b in zip(by_units, by_values, strict=True)]
        joined = [dask.delayed(_joined)(g[: len(units)], g[len(units) :], nparts) for g in groups]
        return [dask.delayed(_checked_home)([j[p] for j in joined], p, columns) for p in range(nparts)], columns
    meta = pd.DataFrame(
        {"_id": pd.Series([], dtype=dtype), "_pos": np.zeros(0, np.int64), "_part": np.zeros(0, np.int64)}
    )
    homes = dd.from_delayed(
        [dask.delayed(_unit_home)(u, p) for p, u in enumerate(table._unit_parts)], meta=meta, verify_meta=False
    )
    flat = dd.from_delayed(
        [dask.delayed(_value_frame)(v, dtype) for v in parts], meta=_value_frame(frame._meta, dtype), verify_meta=False
    )
    joined_all = homes.merge(flat, on="_id", how="outer", indicator=True)
    joined_all["_part"] = joined_all["_part"].fillna(0).astype(np.int64)
    spread = joined_all.set_index("_part", divisions=tuple(range(nparts + 1)))
    pieces = spread.to_delayed()
    return [dask.delayed(_checked_home)([piece], p, columns) for p, piece in enumerate(pieces)], columns


def _needs(edges: pd.DataFrame, q: int) -> np.ndarray:
    return np.unique(edges["_tpos"].to_numpy()[edges["_tpart"].to_numpy() == q])


def _take(home: pd.DataFrame, positions: np.ndarray) -> pd.DataFrame:
    return home[np.isin(home["_pos"].to_numpy(), positions)]


def _gathered(table: EdgeTable, homes: list[Delayed]) -> list[Delayed]:
    """For each partition, its own values and the halo values its links need (no edge moves)."""
    out = []
    for p in range(table.npartitions):
        lenders = sorted(q for (a, q) in table._pairs if a == p)
        got = [dask.delayed(_take)(homes[q], table._needed()[(p, q)]) for q in lenders]
        out.append(dask.delayed(_concat)([homes[p], *got], ("_pos",)))
    return out


def _lag_part(edges: pd.DataFrame, values: pd.DataFrame, units: pd.DataFrame, columns: list[Any]) -> pd.DataFrame:
    pos = values["_pos"].to_numpy()
    where = np.searchsorted(pos, edges["_tpos"].to_numpy())
    x = values[columns].to_numpy()[where]
    own = units["_pos"].to_numpy()
    rows = np.searchsorted(own, edges["_spos"].to_numpy())
    out = np.zeros((len(own), len(columns)))
    w = edges["weight"].to_numpy()
    for c in range(len(columns)):  # a few columns; the units are vectorized
        out[:, c] = np.bincount(rows, weights=w * x[:, c], minlength=len(own))
    return pd.DataFrame(out, index=pd.Index(units["_id"].to_numpy(), name=None), columns=columns)


def lag(values: Any, edges: EdgeTable) -> Any:
    """The spatial lag W x of a Dask Series or DataFrame aligned with the units by id.

    Parameters
    ----------
    values : dask Series or DataFrame (or pandas)
        One value (or row of values) per unit, indexed by unit id; every
        unit needs one and no other id may appear.
    edges : EdgeTable
        The weights (standardize them first for a local average).

    Returns
    -------
    dask Series or DataFrame
        Indexed by id, partitioned like ``edges``; equal to
        :meth:`vicino.Weights.lag` on the same data. Islands get 0.

    Notes
    -----
    Cost per call: the values join the units by id (a hash join of n rows)
    and move to their spatial partitions (one shuffle of n rows); each
    partition then fetches only the halo values its links need. The links
    never move. Persist the result when it is used more than once.
    """
    if not isinstance(edges, EdgeTable):
        raise InvalidTypeError(f"edges must be a vicino.dask.EdgeTable, got {type(edges).__name__}")
    _, is_series = _as_frame(values)
    homes, columns = _homes(values, edges)
    gathered = _gathered(edges, homes)
    parts = [
        dask.delayed(_lag_part)(e, g, u, columns)
        for e, g, u in zip(edges._parts, gathered, edges._unit_parts, strict=True)
    ]
    meta = pd.DataFrame({c: np.zeros(0) for c in columns}, index=pd.Index([], dtype=edges._id_dtype))
    out = dd.from_delayed(parts, meta=meta, verify_meta=False)
    if is_series:
        series = out[columns[0]]
        return series.rename(None) if columns[0] == "_value" else series
    return out


def _value_sums(home: pd.DataFrame) -> tuple[int, float]:
    x = home.iloc[:, 2].to_numpy()
    return len(x), float(x.sum())


def _moran_part(
    edges: pd.DataFrame, values: pd.DataFrame, units: pd.DataFrame, back: list[pd.DataFrame], mean: float, n: int
) -> np.ndarray:
    """Sums over one partition's units and links: S0, sum w^2, sum w_ij w_ji, S2, z'Wz, sum z^2, sum z^4."""
    w = edges["weight"].to_numpy()
    spos, tpos = edges["_spos"].to_numpy(), edges["_tpos"].to_numpy()
    own = units["_pos"].to_numpy()
    pos = values["_pos"].to_numpy()
    z_all = values.iloc[:, 2].to_numpy() - mean
    z_t = z_all[np.searchsorted(pos, tpos)]
    z_own = z_all[np.searchsorted(pos, own)]
    rows = np.searchsorted(own, spos)
    lagged = np.bincount(rows, weights=w * z_t, minlength=len(own))
    # links into own units: from own units (in this partition) and from halo units (lent back)
    inward = pd.concat([edges[["_spos", "_tpos", "weight"]], *[b[["_spos", "_tpos", "weight"]] for b in back]])
    into_own = np.isin(inward["_tpos"].to_numpy(), own)
    inward = inward[into_own]
    col = np.bincount(
        np.searchsorted(own, inward["_tpos"].to_numpy()), weights=inward["weight"].to_numpy(), minlength=len(own)
    )
    row = np.bincount(rows, weights=w, minlength=len(own))
    key = inward["_spos"].to_numpy() * n + inward["_tpos"].to_numpy()
    lookup = pd.Index(key).get_indexer(tpos * n + spos)
    found = lookup >= 0
    cross = float((w[found] * inward["weight"].to_numpy()[lookup[found]]).sum())
    return np.array(
        [
            w.sum(),
            (w * w).sum(),
            cross,
            ((row + col) ** 2).sum(),
            (z_own * lagged).sum(),
            (z_own**2).sum(),
            (z_own**4).sum(),
        ]
    )


def _back(edges: pd.DataFrame, p: int) -> pd.DataFrame:
    return edges.loc[edges["_tpart"].to_numpy() == p, ["_spos", "_tpos", "weight"]]


def moran(
    values: Any,
    edges: EdgeTable,
    *,
    permutations: int = 0,
    seed: int | None = None,
    alternative: Literal["two-sided", "greater", "less"] = "two-sided",
) -> MoranResult:
    """Global Moran's I of a Dask Series on distributed weights, with normality and randomization inference.

    Parameters
    ----------
    values : dask Series (or pandas Series)
        One value per unit, indexed by unit id.
    edges : EdgeTable
        The weights.
    permutations : int
        0 (the default here): the analytic inference only, from sums over
        links and units. With R >= 2 permutations, the values and links are
        collected and :func:`vicino.moran` runs in one process; refused with
        :class:`vicino.TooLargeError` when they would not fit in one worker.
    seed, alternative
        As in :func:`vicino.moran`.

    Returns
    -------
    MoranResult
        As :func:`vicino.moran` gives it (S0, S1, S2, the moments of Cliff
        and Ord 1981 for normality and randomization).

    Notes
    -----
    S0 = sum w_ij, S1 = 1/2 sum (w_ij + w_ji)^2 = sum w_ij^2 + sum w_ij w_ji
    and S2 = sum_i (w_i. + w_.i)^2 need each partition's links plus the links
    of halo units back into it; z'Wz needs the halo values. Cost: that of
    :func:`lag`, plus the links that cross partitions. A small p-value says
    the pattern is unlikely under random assignment of the values to units
    *for these weights*; it does not say why.
    """
    if not isinstance(edges, EdgeTable):
        raise InvalidTypeError(f"edges must be a vicino.dask.EdgeTable, got {type(edges).__name__}")
    permutations = whole_number(permutations, "permutations", minimum=0)
    choice(alternative, "alternative", ALTERNATIVES)
    frame, is_series = _as_frame(values)
    if not is_series and len(frame.columns) != 1:
        raise InvalidValuesError("Moran's I takes one variable: give a Series (or a DataFrame of one column)")
    n = edges.n
    if permutations or n < 4:
        return _collected_moran(values, edges, permutations, seed, alternative)
    homes, _ = _homes(values, edges)
    homes = _client_persist(*homes)
    counts = dask.compute(*[dask.delayed(_value_sums)(h) for h in homes])
    mean = sum(s for _, s in counts) / n
    gathered = _gathered(edges, homes)
    sums = []
    for p in range(edges.npartitions):
        borrowers = sorted(a for (a, q) in edges._pairs if q == p)
        back = [dask.delayed(_back)(edges._parts[a], p) for a in borrowers]
        sums.append(dask.delayed(_moran_part)(edges._parts[p], gathered[p], edges._unit_parts[p], back, mean, n))
    s0, sq, cross, s2, zwz, z2, z4 = np.sum(dask.compute(*sums), axis=0)
    if z2 == 0:
        raise InvalidValuesError("the values are constant (zero variance): spatial autocorrelation is undefined")
    if s0 == 0:
        raise IslandError("the weights have no links: Moran's I is undefined")
    s1 = float(sq + cross)
    statistic = n / s0 * zwz / z2
    expected = -1.0 / (n - 1)
    # Cliff and Ord (1981), eqs. 1.35 (normality) and 1.36 (randomization)
    var_n = (n * n * s1 - n * s2 + 3 * s0 * s0) / (s0 * s0 * (n * n - 1)) - expected**2
    b2 = n * z4 / (z2 * z2)
    var_r = (
        n * ((n * n - 3 * n + 3) * s1 - n * s2 + 3 * s0 * s0) - b2 * ((n * n - n) * s1 - 2 * n * s2 + 6 * s0 * s0)
    ) / ((n - 1) * (n - 2) * (n - 3) * s0 * s0) - expected**2

    def analytic(name: str, variance: float) -> AnalyticInference:
        z = (statistic - expected) / math.sqrt(variance) if variance > 0 else math.nan
        return AnalyticInference(name, variance, z, normal_p(z, alternative))

    return MoranResult(
        float(statistic),
        expected,
        n,
        alternative,
        analytic("normality", var_n),
        analytic("randomization", var_r),
        None,
        float(s0),
        s1,
        float(s2),
        " -> ".join(str(s) for s in edges.recipe),
    )


def _worker_memory() -> int | None:
    try:
        from distributed import get_client

        client = get_client()
    except (ImportError, ValueError):
        return None
    limits = [w.get("memory_limit") or 0 for w in client.scheduler_info().get("workers", {}).values()]
    limits = [m for m in limits if m > 0]
    return min(limits) if limits else None


def _collected_moran(values: Any, edges: EdgeTable, permutations: int, seed: Any, alternative: str) -> MoranResult:
    """Moran's I with permutations: collect the links and values, then the in-memory route."""
    nnz = int(sum(dask.compute(*[dask.delayed(len)(p) for p in edges._parts])))
    need = 48 * nnz + 64 * edges.n  # links (positions, weight, fact) twice while assembling, values and ids
    room = min(m for m in (_worker_memory(), core.get_memory_limit()) if m is not None)
    if need > room:
        raise TooLargeError(
            f"permutation inference collects the {nnz} links and {edges.n} values in one process, about "
            f"{need / 1e6:.0f} MB, more than the {room / 1e6:.0f} MB a worker has; use permutations=0 "
            "(normality and randomization inference need no collection)"
        )
    w = edges.to_weights()
    frame, _ = _as_frame(values)
    x = frame.compute().iloc[:, 0]
    missing, unknown = w.ids.difference(x.index), x.index.difference(w.ids)
    if len(unknown):
        raise IdError(f"the values' index is not an id for {len(unknown)} row(s): {examples(unknown)}")
    if len(missing):
        raise IdError(f"{len(missing)} id(s) without values: {examples(missing)}; give one value per unit")
    return _moran(x.reindex(w.ids), w, permutations=permutations, seed=seed, alternative=alternative)  # type: ignore[arg-type]
