"""Variable values as the core takes them: float64 in the weights' unit order.

Accepts 1-D or 2-D NumPy arrays (and array-likes), pandas Series and
DataFrames (whose index must equal the ids: nothing is reordered silently).
Refuses, with the units named: missing values (NaN, None, pandas NA, masked
entries), infinite values, and types that are not real numbers (booleans,
complex numbers, dates, text).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np
import pandas as pd

from ._ids import check_index, examples
from .errors import InvalidTypeError, InvalidValuesError

NUMERIC_KINDS = "iuf"
KIND_NAMES = {"b": "booleans", "c": "complex numbers", "M": "dates", "m": "time spans", "U": "text", "S": "bytes"}


def _refuse_kind(dtype: np.dtype, what: str) -> None:
    if dtype.kind not in NUMERIC_KINDS:
        found = KIND_NAMES.get(dtype.kind, f"dtype {dtype}")
        raise InvalidTypeError(f"{what} are {found}; they must be numeric (int or float)")


def _missing_error(bad: np.ndarray, ids: pd.Index, what: str) -> InvalidValuesError:
    where = np.flatnonzero(bad)
    return InvalidValuesError(
        f"{len(where)} unit(s) have missing {what}, ids {examples(ids[where])}; "
        "drop or impute them (and subset the weights) first",
        count=len(where),
        positions=where[:10].tolist(),
        ids=list(ids[where[:10]]),
    )


def _frame_array(values: pd.Series | pd.DataFrame, ids: pd.Index) -> np.ndarray:
    """A float64 array of a Series or DataFrame, NA refused with the units named."""
    frame = values.to_frame() if isinstance(values, pd.Series) else values
    if frame.columns.has_duplicates:
        dup = frame.columns[frame.columns.duplicated()].unique()
        raise InvalidValuesError(f"column names repeat: {examples(dup)}; give each column its own name")
    for position, dtype in enumerate(frame.dtypes):
        name = frame.columns[position]
        label = "values" if isinstance(values, pd.Series) else f"column {name!r}"
        if isinstance(dtype, pd.CategoricalDtype) or pd.api.types.is_object_dtype(dtype):
            raise InvalidTypeError(f"{label} has dtype {dtype}; convert it to numbers first (pd.to_numeric)")
        if pd.api.types.is_bool_dtype(dtype) or not pd.api.types.is_numeric_dtype(dtype):
            raise InvalidTypeError(f"{label} has dtype {dtype}; it must be numeric (int or float)")
        if pd.api.types.is_complex_dtype(dtype):
            raise InvalidTypeError(f"{label} holds complex numbers; it must hold real numbers")
    missing = frame.isna().to_numpy().any(axis=1)
    if missing.any():
        raise _missing_error(missing, ids, "values (NaN / NA)")
    arr = frame.to_numpy(dtype=np.float64)
    return arr[:, 0] if isinstance(values, pd.Series) else arr


def as_values(values: Any, ids: pd.Index, *, allow_2d: bool) -> tuple[np.ndarray, Callable[[np.ndarray], Any]]:
    """Values as a float64 array in unit order, and a function that wraps results back to the input's type."""
    wrap: Callable[[np.ndarray], Any]
    if isinstance(values, (pd.Series, pd.DataFrame)):
        check_index(values.index, ids)
        arr = _frame_array(values, ids)
        if isinstance(values, pd.DataFrame):

            def wrap(out: np.ndarray, _v: pd.DataFrame = values) -> Any:
                return pd.DataFrame(out, index=_v.index, columns=_v.columns)
        else:

            def wrap(out: np.ndarray, _v: pd.Series = values) -> Any:
                return pd.Series(out, index=_v.index, name=_v.name)
    else:
        arr = _array(values, ids)

        def wrap(out: np.ndarray) -> Any:
            return out

    if arr.ndim == 0 or arr.ndim > (2 if allow_2d else 1):
        shape = "(n,) or (n, m)" if allow_2d else "(n,)"
        raise InvalidValuesError(f"values must have shape {shape}, got {arr.shape}")
    if arr.shape[0] != len(ids):
        raise InvalidValuesError(f"values have {arr.shape[0]} rows but the weights have {len(ids)} units")
    if arr.ndim == 2 and arr.shape[1] == 0:
        raise InvalidValuesError("values have no columns; give at least one variable")
    # NaN and infinite values are refused by the core, which names the units (one pass, in parallel)
    return arr, wrap


def _array(values: Any, ids: pd.Index) -> np.ndarray:
    """A NumPy array of numbers from an array-like, masks and bad types refused."""
    if isinstance(values, np.ma.MaskedArray):
        mask = np.ma.getmaskarray(values)
        if mask.any():
            rows = np.asarray(mask if mask.ndim == 1 else mask.reshape(mask.shape[0], -1).any(axis=1))
            if len(rows) == len(ids):
                raise _missing_error(rows, ids, "values (masked)")
            raise InvalidValuesError(f"{int(mask.sum())} value(s) are masked; fill or drop them first")
        values = values.data
    try:
        raw = np.asarray(values)
    except (ValueError, TypeError) as exc:
        raise InvalidValuesError(
            f"values could not be read as an array ({exc}); give one number per unit, "
            "or an (n, m) table with the same number of values in every row"
        ) from None
    if raw.dtype.kind == "O":
        try:
            raw = raw.astype(np.float64)
        except (TypeError, ValueError):
            raise InvalidTypeError("values are not all numbers; convert them first (pd.to_numeric)") from None
        except OverflowError:
            raise InvalidValuesError("values hold integers beyond the range of floating point (about 1e308)") from None
    _refuse_kind(raw.dtype, "values")
    return raw.astype(np.float64, copy=False)
