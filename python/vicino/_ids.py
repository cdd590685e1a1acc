"""Unit ids: making them, checking that data line up with them, and naming units in messages.

A leaf module: it imports nothing else of vicino but :mod:`vicino.errors`.
This is the one place where positions become ids.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable, Sequence
from typing import Any

import numpy as np
import pandas as pd

from .errors import IdError, VicinoError

SHOW = 5  # how many ids a message names
MARK = "\x01"  # encloses the number of a marker in a core message template


def show(x: Any) -> str:
    """An id as a message shows it: NumPy scalars as the Python values they hold."""
    return repr(x.item() if isinstance(x, np.generic) else x)


def examples(items: Any, limit: int = SHOW) -> str:
    """Format the first few items of a list for a message."""
    items = list(items)
    shown = ", ".join(show(x) for x in items[:limit])
    more = f" and {len(items) - limit} more" if len(items) > limit else ""
    return shown + more


def make_ids(ids: Any, n: int, default: pd.Index | None = None) -> pd.Index:
    """Unit ids as a unique pandas Index of length n."""
    if ids is None:
        index = default if default is not None else pd.RangeIndex(n)
        source = "the index of the input"
    else:
        if isinstance(ids, (str, bytes)) or np.ndim(ids) != 1:
            raise IdError("ids must be a one-dimensional sequence with one id per unit")
        index = ids if isinstance(ids, pd.Index) else pd.Index(ids if isinstance(ids, np.ndarray) else list(ids))
        source = "ids"
    if len(index) != n:
        raise IdError(f"{source} has {len(index)} entries but there are {n} units; give one id per unit")
    if isinstance(index, pd.MultiIndex):
        missing = np.asarray(index.to_frame().isna().any(axis=1))
    else:
        missing = np.asarray(index.isna())
    if missing.any():
        raise IdError(
            f"{source} holds {int(missing.sum())} missing id(s) (NaN / None / NA) at positions "
            f"{examples(np.flatnonzero(missing))}; give every unit an id"
        )
    if not index.is_unique:
        dup = index[index.duplicated()].unique()
        raise IdError(
            f"{source} must be unique, but {len(dup)} id(s) repeat: {examples(dup)}; "
            "pass ids= with unique labels, or reset the index"
        )
    return index


def positions(ids: pd.Index, values: Any) -> np.ndarray:
    """The position of each value among unique ``ids`` (-1 where absent), like ``ids.get_indexer``.

    Whole-number ids that run without gaps (0 .. n-1, or any k .. k+n-1, as files of vicino's own
    usually hold) are found by one subtraction instead of a hash lookup per value.
    """
    v = np.asarray(values)
    if len(ids) and v.dtype.kind == "i" and pd.api.types.is_signed_integer_dtype(ids.dtype):
        a = ids.to_numpy(dtype=np.int64)
        steps_of_one = bool((a[1:] - a[:-1] == 1).all())
    else:
        steps_of_one = False
    if steps_of_one:
        # (no wrap-around can land inside: ids end at or below the int64 maximum)
        at = v.astype(np.int64, copy=False) - a[0]
        return np.where((at >= 0) & (at < len(ids)), at, -1)
    return ids.get_indexer(pd.Index(values))


def id_differences(ids: pd.Index, index: pd.Index, *, missing: str, extra: str) -> list[str]:
    """Phrases naming the ids in ``ids`` but not in ``index`` and the reverse (empty when the sets agree)."""
    parts = []
    for found, label in ((ids.difference(index, sort=False), missing), (index.difference(ids, sort=False), extra)):
        if len(found):
            parts.append(f"{len(found)} {label}: {examples(found)}")
    return parts


def check_index(index: pd.Index, ids: pd.Index, what: str = "values") -> None:
    """Require ``index`` to equal ``ids`` element by element, explaining any mismatch."""
    if index.equals(ids):
        return
    if len(index) != len(ids):
        raise IdError(f"the {what} have {len(index)} rows but the weights have {len(ids)} units")
    parts = id_differences(ids, index, missing=f"id(s) without {what}", extra=f"{what} whose index is not an id")
    if parts:
        raise IdError(f"the {what}' index does not match the weights' ids (" + "; ".join(parts) + ")")
    raise IdError(
        f"the {what}' index holds the same ids as the weights but in another order; "
        f"reorder them with {what}.reindex(weights.ids) (vicino never reorders silently)"
    )


def is_unit_key(key: Any) -> bool:
    """Whether ``key`` can name one unit (a hashable scalar, or a tuple for a MultiIndex)."""
    if isinstance(key, (list, slice, np.ndarray, pd.Index, pd.Series, set, dict)):
        return False
    return isinstance(key, Hashable)


def _phrase(
    kind: str, positions: Sequence[int], count: int, ids: pd.Index | None, edge_name: Callable[[int], str] | None
) -> str:
    """How a message names units (by id when the ids are known, else by position) and edges."""
    if kind == "edge":
        return edge_name(positions[0]) if edge_name is not None else f"edge {positions[0]}"
    known = ids is not None and all(0 <= p < len(ids) for p in positions)
    if known:
        assert ids is not None
        names = [show(ids[p]) for p in positions]
    else:
        names = [str(p) for p in positions]
    if kind == "unit":
        return f"unit {names[0]}" if known else f"unit at position {names[0]}"
    if kind == "pair":
        return f"units {names[0]} and {names[1]}" if known else f"units at positions {names[0]} and {names[1]}"
    if kind == "link":
        return (
            f"link from {names[0]} to {names[1]}" if known else f"link from position {names[0]} to position {names[1]}"
        )
    more = f" and {count - len(names)} more" if count > len(names) else ""
    return ("ids " if known else "positions ") + ", ".join(names) + more


def render(err: VicinoError, ids: pd.Index | None, edge_name: Callable[[int], str] | None = None) -> VicinoError:
    """The error with its message's markers replaced by unit names (ids when known).

    Errors raised by the core carry a template and, in ``_named``, what each
    marker stands for: (kind, positions, count). The result carries the named
    positions in ``positions`` and the matching ids in ``ids``; edges (of an
    edge list) are named by ``edge_name`` (a table row, a file line) and
    listed in ``edges``.
    """
    named = getattr(err, "_named", None)
    if not named:
        return err
    parts = str(err.args[0]).split(MARK) if err.args else [""]
    pieces = []
    for k, piece in enumerate(parts):
        if k % 2:
            kind, where, count = named[int(piece)]
            pieces.append(_phrase(kind, where, count, ids, edge_name))
        else:
            pieces.append(piece)
    text = "".join(pieces)
    positions = [p for kind, where, _ in named if kind != "edge" for p in where]
    edges = [where[0] for kind, where, _ in named if kind == "edge"]
    count = max((c for kind, _, c in named if kind == "units"), default=len(set(positions)))
    out = type(err)(
        text,
        count=count,
        positions=positions,
        ids=[ids[p] for p in positions] if ids is not None and all(p < len(ids) for p in positions) else (),
    )
    out.edges = edges
    return out
