"""Checks of scalar parameters shared by the public functions."""

from __future__ import annotations

import numbers
from collections.abc import Sequence
from typing import Any

import numpy as np

from .errors import InvalidParameterError, InvalidParameterTypeError

INT64_MAX = 2**63 - 1


def whole_number(value: Any, name: str, *, minimum: int | None = None, maximum: int = INT64_MAX) -> int:
    """Check that ``value`` is an integer (not a bool or float) within bounds and return it."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InvalidParameterTypeError(
            f"{name} must be a whole number (int), got {value!r} of type {type(value).__name__}"
        )
    if not isinstance(value, numbers.Integral):
        raise InvalidParameterError(f"{name} must be a whole number (int), got {value!r}")
    value = int(value)
    if minimum is not None and value < minimum:
        raise InvalidParameterError(f"{name} must be at least {minimum}, got {value}")
    if value > maximum:
        raise InvalidParameterError(f"{name} = {value} is too large: it must be at most {maximum:,}")
    return value


def real_number(value: Any, name: str) -> float:
    """Check that ``value`` is a real number (not a bool) and return it as float."""
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise InvalidParameterTypeError(f"{name} must be a number, got {value!r} of type {type(value).__name__}")
    try:
        return float(value)
    except OverflowError:
        raise InvalidParameterError(f"{name} = {value} is too large for a floating point number") from None


def flag(value: Any, name: str) -> bool:
    """Check that ``value`` is True or False."""
    if not isinstance(value, (bool, np.bool_)):
        raise InvalidParameterTypeError(f"{name} must be True or False, got {value!r}")
    return bool(value)


def choice(value: Any, name: str, allowed: Sequence[str]) -> str:
    """Check that ``value`` is one of ``allowed``."""
    if not isinstance(value, str) or value not in allowed:
        options = ", ".join(repr(a) for a in allowed)
        raise InvalidParameterError(f"unknown {name} {value!r}: use one of {options}")
    return value
