"""Small input checks shared by the public functions."""

from __future__ import annotations

import numbers
from collections.abc import Sequence

import numpy as np
import pandas as pd

from .errors import IdError, InvalidParameterError, InvalidParameterTypeError, VicinoError

SHOW = 5  # how many ids a message names


def examples(items: Sequence, limit: int = SHOW) -> str:
    """Format the first few items of a list for a message."""
    items = list(items)
    shown = ", ".join(repr(x) for x in items[:limit])
    more = f" and {len(items) - limit} more" if len(items) > limit else ""
    return shown + more


def whole_number(value, name: str, *, minimum: int | None = None) -> int:
    """Check that ``value`` is an integer (not a bool or float) and return it."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InvalidParameterTypeError(
            f"{name} must be a whole number (int), got {value!r} of type {type(value).__name__}"
        )
    if not isinstance(value, numbers.Integral):
        raise InvalidParameterError(f"{name} must be a whole number (int), got {value!r}")
    value = int(value)
    if minimum is not None and value < minimum:
        raise InvalidParameterError(f"{name} must be at least {minimum}, got {value}")
    return value


def real_number(value, name: str) -> float:
    """Check that ``value`` is a real number (not a bool) and return it as float."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InvalidParameterTypeError(f"{name} must be a number, got {value!r} of type {type(value).__name__}")
    return float(value)


def choice(value, name: str, allowed: Sequence[str]) -> str:
    """Check that ``value`` is one of ``allowed``."""
    if not isinstance(value, str) or value not in allowed:
        options = ", ".join(repr(a) for a in allowed)
        raise InvalidParameterError(f"unknown {name} {value!r}: use one of {options}")
    return value


def make_ids(ids, n: int, default: pd.Index | None = None) -> pd.Index:
    """Unit ids as a unique pandas Index of length n."""
    if ids is None:
        index = default if default is not None else pd.RangeIndex(n)
        source = "the index of the input"
    else:
        if isinstance(ids, (str, bytes)) or np.ndim(ids) != 1:
            raise IdError("ids must be a one-dimensional sequence with one id per unit")
        index = ids if isinstance(ids, pd.Index) else pd.Index(list(ids) if not isinstance(ids, np.ndarray) else ids)
        source = "ids"
    if len(index) != n:
        raise IdError(f"{source} has {len(index)} entries but there are {n} units; give one id per unit")
    if not index.is_unique:
        dup = index[index.duplicated()].unique()
        raise IdError(
            f"{source} must be unique, but {len(dup)} id(s) repeat: {examples(dup)}; "
            "pass ids= with unique labels, or reset the index"
        )
    return index


def name_positions(err: VicinoError, ids: pd.Index) -> VicinoError:
    """Rewrite a core error that names positions so that it names ids."""
    if not err.positions:
        return err
    named = [ids[p] for p in err.positions if 0 <= p < len(ids)]
    message = str(err)
    marker = "first at positions"
    if marker in message:
        head, _, tail = message.partition(marker)
        _, _, rest = tail.partition("]")
        message = f"{head}first: ids {examples(named, limit=len(named))}{rest}"
    else:
        message = f"{message} (id {named[0]!r})" if named else message
    new = type(err)(message, count=err.count, positions=err.positions, ids=named)
    return new
