"""Input adapters: turn what users hold into coordinate arrays and ids.

Points may be an (n, 2) array-like, a pandas DataFrame with coordinate
columns, a GeoDataFrame / GeoSeries / pandas Series of point geometries, or a
shapely array or list of points. Nothing here loops over units in Python.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from . import _gateway as core
from ._ids import check_index, examples, make_ids
from .errors import InvalidInputError, InvalidTypeError

# shapely's geometry type ids, named for messages
GEOMETRY_TYPES = {
    0: "Point",
    1: "LineString",
    2: "LinearRing",
    3: "Polygon",
    4: "MultiPoint",
    5: "MultiLineString",
    6: "MultiPolygon",
    7: "GeometryCollection",
}


def _type_names(kinds: np.ndarray) -> str:
    return ", ".join(GEOMETRY_TYPES.get(int(k), f"type {int(k)}") for k in sorted(set(kinds.tolist())))


# Column pairs recognised without being named, tried in this order
# (case-insensitive). The first of each pair is x / longitude.
COORDINATE_COLUMNS = (
    ("x", "y"),
    ("lon", "lat"),
    ("lng", "lat"),
    ("long", "lat"),
    ("longitude", "latitude"),
    ("easting", "northing"),
)


def _is_geometry_array(values) -> bool:
    """Whether ``values`` holds shapely geometries (without importing shapely needlessly)."""
    arr = np.asarray(values, dtype=object) if not isinstance(values, np.ndarray) else values
    if arr.dtype != object or arr.size == 0:
        return False
    first = next((v for v in arr.flat if v is not None), None)
    return first is not None and type(first).__module__.startswith("shapely")


def _points_from_geometry(values, index: pd.Index) -> np.ndarray:
    try:
        import shapely
    except ImportError as exc:  # pragma: no cover - shapely is present when geometries are
        raise InvalidTypeError("point geometries need shapely (a dependency of vicino): pip install shapely") from exc
    geoms = np.asarray(values, dtype=object)
    if geoms.ndim != 1:
        raise InvalidInputError("geometries must be a one-dimensional collection, one per unit")
    missing = pd.isna(geoms)
    if missing.any():
        raise InvalidInputError(f"{int(missing.sum())} unit(s) have no geometry (None): ids {examples(index[missing])}")
    try:
        kinds = shapely.get_type_id(geoms)
    except TypeError:
        raise InvalidTypeError(
            "some values are not shapely geometries; give points as geometries or coordinates"
        ) from None
    not_points = kinds != 0
    if not_points.any():
        raise InvalidInputError(
            f"{int(not_points.sum())} geometries are not points ({_type_names(kinds[not_points])}), "
            f"ids {examples(index[not_points])}; use their centroids (geoms.centroid) or a polygon builder"
        )
    empty = shapely.is_empty(geoms)
    if empty.any():
        raise InvalidInputError(f"{int(empty.sum())} point(s) are empty: ids {examples(index[empty])}; drop them first")
    return np.column_stack([shapely.get_x(geoms), shapely.get_y(geoms)])


KIND_NAMES = {"b": "booleans", "c": "complex numbers", "M": "dates", "m": "time spans", "U": "text", "S": "bytes"}


def _numeric(block: Any, what: str, index: pd.Index | None = None) -> np.ndarray:
    """Coordinates as a float array; masked, missing and non-numeric values refused."""
    if isinstance(block, pd.DataFrame):
        for c, dtype in zip(block.columns, block.dtypes, strict=True):
            if pd.api.types.is_bool_dtype(dtype) or not pd.api.types.is_numeric_dtype(dtype):
                raise InvalidTypeError(f"column {c!r} has dtype {dtype}; coordinates must be numeric (int or float)")
            if pd.api.types.is_complex_dtype(dtype):
                raise InvalidTypeError(f"column {c!r} holds complex numbers; coordinates must be real numbers")
        missing = block.isna().to_numpy().any(axis=1)
        if missing.any():
            where = np.flatnonzero(missing)
            named = block.index[where]
            raise InvalidInputError(
                f"{len(where)} unit(s) have missing coordinates (NaN / NA), ids {examples(named)}; "
                "drop or impute units with missing locations first",
                count=len(where),
                positions=where[:10].tolist(),
                ids=list(named[:10]),
            )
        return block.to_numpy(dtype=np.float64)
    if isinstance(block, np.ma.MaskedArray):
        mask = np.ma.getmaskarray(block)
        if mask.any():
            rows = np.flatnonzero(mask.reshape(mask.shape[0], -1).any(axis=1)) if mask.ndim else np.array([0])
            raise InvalidInputError(
                f"{len(rows)} unit(s) have masked {what}, at positions {examples(rows)}; "
                "fill them or drop those units first",
                count=len(rows),
                positions=rows[:10].tolist(),
            )
        block = block.data
    try:
        arr = np.asarray(block)
    except (ValueError, TypeError) as exc:
        raise InvalidInputError(
            f"could not read {what} as an (n, 2) array ({exc}); give the same number of values in every row"
        ) from None
    if arr.dtype.kind == "O":
        kind = pd.api.types.infer_dtype(arr.ravel(), skipna=False)
        if kind not in ("integer", "floating", "mixed-integer-float", "decimal"):
            raise InvalidTypeError(
                f"{what} are not all numbers (found {kind}); convert them first, e.g. with pd.to_numeric"
            )
        try:
            arr = arr.astype(np.float64)
        except (TypeError, ValueError) as exc:
            raise InvalidTypeError(f"{what} must be numeric ({exc}); convert them with pd.to_numeric") from None
        except OverflowError:
            raise InvalidInputError(f"{what} hold integers beyond the range of floating point (about 1e308)") from None
    if arr.dtype.kind not in "iuf":
        found = KIND_NAMES.get(arr.dtype.kind, f"dtype {arr.dtype}")
        raise InvalidTypeError(f"{what} are {found}; coordinates must be real numbers")
    return arr


def _frame_columns(df: pd.DataFrame, columns: Any) -> list:
    cols = _pick_columns(df, columns)
    repeated = [c for c in cols if list(df.columns).count(c) > 1]
    if repeated:
        raise InvalidInputError(f"the DataFrame has more than one column named {examples(repeated)}; rename them")
    return cols


def _pick_columns(df: pd.DataFrame, columns: Any) -> list:
    if columns is not None:
        if isinstance(columns, (str, bytes)) or not isinstance(columns, (list, tuple, pd.Index, np.ndarray)):
            raise InvalidInputError(f"columns must be a pair of column names, such as ('lon', 'lat'), got {columns!r}")
        cols = list(columns)
        if len(cols) != 2:
            raise InvalidInputError(f"columns must name two columns (x, y) or (longitude, latitude), got {cols}")
        missing = [c for c in cols if c not in df.columns]
        if missing:
            raise InvalidInputError(f"columns {missing} are not in the DataFrame (it has {examples(list(df.columns))})")
        return cols
    lower = {str(c).lower(): c for c in df.columns}
    for a, b in COORDINATE_COLUMNS:
        if a in lower and b in lower:
            return [lower[a], lower[b]]
    if df.shape[1] == 2:
        return list(df.columns)
    raise InvalidInputError(
        f"cannot tell which columns hold the coordinates among {examples(list(df.columns))}; "
        "pass columns=(x_column, y_column)"
    )


def as_points(points, *, ids=None, columns=None) -> tuple[np.ndarray, pd.Index]:
    """Coordinates as a C-contiguous float64 (n, 2) array, and unit ids.

    Ids come from ``ids`` if given, else from the pandas index of the input,
    else they are 0..n-1.
    """
    index = None
    if isinstance(points, pd.DataFrame):
        index = points.index
        geometry = getattr(points, "geometry", None) if "geometry" in points.columns or hasattr(points, "crs") else None
        if geometry is not None and columns is None:
            xy = _points_from_geometry(np.asarray(geometry, dtype=object), index)
        else:
            cols = _frame_columns(points, columns)
            xy = _numeric(points[cols], f"columns {cols}")
    elif isinstance(points, pd.Series):
        index = points.index
        if not _is_geometry_array(points.to_numpy()):
            raise InvalidTypeError("a Series of points must hold point geometries; for coordinates pass a DataFrame")
        xy = _points_from_geometry(points.to_numpy(), index)
    else:
        if columns is not None:
            raise InvalidInputError("columns= applies only to DataFrame input")
        if isinstance(points, (list, tuple)) and len(points) and type(points[0]).__module__.startswith("shapely"):
            geoms = np.empty(len(points), dtype=object)
            geoms[:] = list(points)
            xy = _points_from_geometry(geoms, pd.RangeIndex(len(points)))
        elif isinstance(points, np.ndarray) and _is_geometry_array(points):
            xy = _points_from_geometry(points, pd.RangeIndex(len(points)))
        else:
            xy = _numeric(points, "coordinates")
    if xy.ndim != 2 or xy.shape[1] != 2:
        raise InvalidInputError(
            "points must have shape (n, 2), one row per unit with x and y (or longitude and latitude); "
            f"got shape {xy.shape}"
        )
    if xy.shape[0] == 0:
        raise InvalidInputError("no points were given; pass at least one location")
    units = make_ids(ids, xy.shape[0], index)
    return np.ascontiguousarray(xy, dtype=np.float64), units


def _geometry_values(polygons: Any) -> tuple[np.ndarray, pd.Index | None]:
    """An object array of geometries and the pandas index, if any."""
    index = None
    values: np.ndarray
    if isinstance(polygons, pd.DataFrame):
        if "geometry" not in polygons.columns and not hasattr(polygons, "geometry"):
            raise InvalidTypeError("a DataFrame of polygons needs a 'geometry' column (a GeoDataFrame works)")
        index = polygons.index
        column = polygons.geometry if hasattr(polygons, "geometry") else polygons["geometry"]
        values = np.asarray(column, dtype=object)
    elif isinstance(polygons, pd.Series):
        index = polygons.index
        values = np.asarray(polygons.to_numpy(), dtype=object)
    else:
        if isinstance(polygons, (str, bytes)) or np.ndim(polygons) != 1:
            raise InvalidTypeError(
                "polygons must be a GeoDataFrame, GeoSeries, shapely array or list of Polygon / MultiPolygon"
            )
        values = np.empty(len(polygons), dtype=object)
        values[:] = list(polygons)
    return values, index


def as_polygons(polygons, *, ids=None):
    """Polygons as flat buffers for the core, unit ids, and the mask of empty units.

    Accepts a GeoDataFrame, GeoSeries, pandas Series of shapely geometries,
    shapely array or list of Polygon / MultiPolygon (holes included).

    The buffers are ``("rings", coordinates, ring offsets)`` when every unit
    is a single polygon without holes (read with shapely's vectorized
    coordinate export), else ``("wkb", bytes, offsets)``: Well-Known Binary
    written by GEOS in C, decoded into flat buffers by the core in parallel.
    """
    try:
        import shapely
    except ImportError as exc:  # pragma: no cover
        raise InvalidTypeError("polygons need shapely (a dependency of vicino): pip install shapely") from exc
    values, index = _geometry_values(polygons)
    n = len(values)
    if n == 0:
        raise InvalidInputError("no polygons were given; pass at least one unit")
    units = make_ids(ids, n, index)
    try:
        kinds = shapely.get_type_id(values)  # -1 for None
    except TypeError:
        # only on the error path: find which values are not geometries
        not_geometry = ~np.array([v is None or isinstance(v, shapely.Geometry) for v in values.tolist()])
        raise InvalidTypeError(
            f"{int(not_geometry.sum())} value(s) are not shapely geometries, ids {examples(units[not_geometry])}; "
            "read the file with a GIS reader or build shapely polygons first"
        ) from None
    missing = kinds == -1
    if missing.any():
        raise InvalidInputError(f"{int(missing.sum())} unit(s) have no geometry (None): ids {examples(units[missing])}")
    sizes = shapely.get_num_coordinates(values)
    empty = sizes == 0  # a geometry of any type without coordinates is empty
    polygon = kinds == 3
    wrong = ~(polygon | (kinds == 6)) & ~empty  # 3 Polygon, 6 MultiPolygon
    if wrong.any():
        hint = (
            "; keep only the polygon parts of each collection (shapely.get_parts, then one MultiPolygon per unit)"
            if (kinds[wrong] == 7).any()
            else ""
        )
        raise InvalidInputError(
            f"{int(wrong.sum())} geometries are not polygons ({_type_names(kinds[wrong])}), ids "
            f"{examples(units[wrong])}; these weights need one Polygon or MultiPolygon per unit{hint}"
        )
    if (polygon | empty).all() and shapely.get_num_interior_rings(values).max() <= 0:
        # one ring per unit: coordinates in unit order, one offset per unit
        offsets = np.zeros(n + 1, dtype=np.int64)
        np.cumsum(sizes, out=offsets[1:])
        coords = shapely.get_coordinates(values).reshape(-1)
        return ("rings", coords, offsets), units, empty
    if (empty & ~polygon).any():
        values = values.copy()
        values[empty] = shapely.Polygon()
    wkb = shapely.to_wkb(values, output_dimension=2).tolist()
    lengths = np.fromiter(map(len, wkb), dtype=np.int64, count=n)
    offsets = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(lengths, out=offsets[1:])
    return ("wkb", np.frombuffer(b"".join(wkb), dtype=np.uint8), offsets), units, empty


def _holds_polygons(values) -> bool:
    """Whether ``values`` (pandas or array-like) holds shapely polygons, judged by the first geometry."""
    if isinstance(values, pd.DataFrame):
        if "geometry" not in values.columns and not hasattr(values, "geometry"):
            return False
        values = values.geometry if hasattr(values, "geometry") else values["geometry"]
    if isinstance(values, pd.Series):
        values = values.to_numpy()
    if isinstance(values, (list, tuple)):
        arr = np.empty(len(values), dtype=object)
        arr[:] = list(values)
        values = arr
    if not (isinstance(values, np.ndarray) and _is_geometry_array(values)):
        return False
    import shapely

    kinds = shapely.get_type_id(values)
    return bool(np.isin(kinds, (3, 6)).any())


def unit_locations(locations: Any, ids: pd.Index) -> tuple[np.ndarray, np.ndarray | None]:
    """One location per unit, aligned with ``ids``.

    Returns an (n, 2) float64 array (rows of NaN for empty polygons) and the
    polygons' object array (None for point input). Points as
    :func:`as_points` accepts them; polygons as :func:`as_polygons` accepts
    them, located at their area-weighted centroids (computed in the core). A
    pandas input's index must equal ``ids``.
    """
    geoms: np.ndarray | None
    if _holds_polygons(locations):
        geoms, index = _geometry_values(locations)
        buffers, units, _ = as_polygons(geoms, ids=index)
        xy = core.centroids(buffers, ids if len(units) == len(ids) else units)
    else:
        xy, units = as_points(locations)
        geoms = None
        bad = np.asarray(~np.isfinite(xy).all(axis=1))
        if bad.any():
            named = ids[bad] if len(units) == len(ids) else units[bad]
            where = np.flatnonzero(bad)
            raise InvalidInputError(
                f"{int(bad.sum())} location(s) have NaN or infinite coordinates: ids {examples(named)}; "
                "give every unit a location, or drop those units first",
                count=int(bad.sum()),
                positions=where[:10].tolist(),
                ids=list(named[:10]),
            )
    if len(units) != len(ids):
        raise InvalidInputError(
            f"there are {len(units)} locations but the weights have {len(ids)} units; give one location per unit"
        )
    if isinstance(locations, (pd.DataFrame, pd.Series)):
        check_index(units, ids, what="locations")
    return xy, geoms
