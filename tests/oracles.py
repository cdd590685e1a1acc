"""Shared oracles and checks of the test suite (importable from every test: see conftest.py).

Each oracle is a brute-force or textbook computation that the project did
not write as part of vicino, so that tests compare vicino against it.
"""

from __future__ import annotations

import numpy as np
import pytest

import vicino

R1_KM = 6371.0088  # IUGG mean Earth radius R1, in km


def check_error(err: pytest.ExceptionInfo, vicino_cls: type, builtin_cls: type) -> None:
    """The raised error is a VicinoError of the given class and also the given built-in class."""
    assert isinstance(err.value, vicino.VicinoError)
    assert isinstance(err.value, vicino_cls)
    assert isinstance(err.value, builtin_cls)
    assert str(err.value), "the message must say what is wrong"


def brute_euclidean(xy: np.ndarray) -> np.ndarray:
    """All pairwise euclidean distances by NumPy broadcasting."""
    d = xy[:, None, :] - xy[None, :, :]
    return np.sqrt((d**2).sum(axis=-1))


def brute_haversine(lonlat: np.ndarray, radius: float = R1_KM) -> np.ndarray:
    """All pairwise great-circle distances (km) by the haversine formula."""
    lam = np.radians(lonlat[:, 0])
    phi = np.radians(lonlat[:, 1])
    dphi = phi[:, None] - phi[None, :]
    dlam = lam[:, None] - lam[None, :]
    h = np.sin(dphi / 2) ** 2 + np.cos(phi)[:, None] * np.cos(phi)[None, :] * np.sin(dlam / 2) ** 2
    return 2 * radius * np.arcsin(np.sqrt(np.clip(h, 0.0, 1.0)))
