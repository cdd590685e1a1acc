"""Exceptions raised by vicino.

Every exception derives from :class:`VicinoError`, and also from the
built-in class that fits (``ValueError`` or ``TypeError``), so existing
``except ValueError`` code keeps working. Errors that concern particular
units carry ``positions`` (row numbers) and, where known, ``ids``.
"""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any

__all__ = [
    "ConvergenceError",
    "DuplicateLocationWarning",
    "IdError",
    "InternalError",
    "InvalidInputError",
    "InvalidMatrixError",
    "InvalidParameterError",
    "InvalidParameterTypeError",
    "InvalidTypeError",
    "InvalidValuesError",
    "IslandError",
    "VicinoError",
]


class VicinoError(Exception):
    """Base class of every error raised by vicino.

    Attributes
    ----------
    positions : list of int
        Row positions of the units the error is about (the first few).
    ids : list
        The ids of those units, where known.
    count : int
        How many units are concerned in all (may exceed ``len(positions)``).
    edges : list of int
        For errors about an edge list: the positions of the edges concerned.
    """

    count: int
    positions: list[int]
    ids: list[Any]
    edges: list[int]

    def __init__(
        self, message: str = "", *, count: int = 0, positions: Iterable[int] = (), ids: Iterable[Any] = ()
    ) -> None:
        super().__init__(message)
        self.count = count
        self.positions = list(positions)
        self.ids = list(ids)
        self.edges = []


class InvalidInputError(VicinoError, ValueError):
    """Locations or geometry that cannot be used: empty, NaN, wrong shape, out of range."""


class InvalidTypeError(VicinoError, TypeError):
    """Input of a type vicino cannot read (non-numeric data, unknown objects)."""


class InvalidParameterError(VicinoError, ValueError):
    """A parameter outside its allowed values (k, radius, metric, method, ...)."""


class InvalidParameterTypeError(InvalidParameterError, TypeError):
    """A parameter of the wrong type (a string or bool where a number belongs, ...).

    It is both a ``ValueError`` and a ``TypeError``, so either ``except`` catches it.
    """


class IdError(VicinoError, ValueError):
    """Unit ids that are duplicated, of the wrong length, unknown or misaligned."""


class IslandError(VicinoError, ValueError):
    """Units without neighbours where the operation needs every unit to have some."""


class InvalidMatrixError(VicinoError, ValueError):
    """A weights matrix that is not square, finite and non-negative."""


class InvalidValuesError(VicinoError, ValueError):
    """Variable values that are NaN, constant, or of the wrong length."""


class ConvergenceError(VicinoError, ValueError):
    """An iterative computation did not converge for these weights."""


class TooLargeError(VicinoError, MemoryError):
    """A result that would need more memory than the limit allows.

    The message gives the estimate and a way to need less;
    :func:`vicino.set_memory_limit` raises the limit.
    """


class FileFormatError(VicinoError, ValueError):
    """A weights file that cannot be read as its format says; the message names the file and line."""


class FileAccessError(VicinoError, OSError):
    """A file that cannot be opened, read or written (missing, no permission, disk full)."""


class InternalError(VicinoError, RuntimeError):
    """A bug in vicino; please report it with the input that caused it."""


class DuplicateLocationWarning(UserWarning):
    """Several units share one location."""
