"""Inverse-distance and kernel weights against brute-force formulas.

References: scipy.spatial.distance.cdist for the distances, the kernel
formulas of Silverman (1986, table 3.1) written out here on the unit
interval, adaptive bandwidths as the k-th nearest distance (Fotheringham,
Brunsdon and Charlton 2002), great-circle distances on the vega_datasets
airports by the haversine formula.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial.distance import cdist

import vicino
from oracles import brute_haversine

KERNELS = {
    # Silverman (1986), table 3.1, written on u in [0, 1]
    "uniform": lambda u: np.full_like(u, 0.5),
    "triangular": lambda u: 1 - u,
    "epanechnikov": lambda u: 0.75 * (1 - u**2),
    "quartic": lambda u: 15 / 16 * (1 - u**2) ** 2,
    "gaussian": lambda u: np.exp(-(u**2) / 2) / np.sqrt(2 * np.pi),
}


def dense(w: vicino.Weights) -> np.ndarray:
    return w.to_dense()


@pytest.fixture
def pts():
    return np.random.default_rng(31).random((150, 2))


@pytest.mark.parametrize("power", [0.0, 0.5, 1.0, 2.0])
def test_inverse_distance_within_a_radius(pts, power):
    d = cdist(pts, pts)  # reference: scipy cdist
    ref = np.where((d <= 0.15) & (d > 0), d, np.inf) ** -power
    ref[np.isinf(np.where((d <= 0.15) & (d > 0), d, np.inf))] = 0
    w = vicino.inverse_distance(pts, power=power, radius=0.15)
    np.testing.assert_allclose(dense(w), ref, rtol=1e-13)
    e = w.to_edges()
    pos = pd.Series(np.arange(len(pts)), index=w.ids)
    np.testing.assert_allclose(e["distance"], d[pos[e["source"]], pos[e["target"]]], rtol=1e-14)


def test_inverse_distance_of_the_k_nearest(pts):
    d = cdist(pts, pts)
    np.fill_diagonal(d, np.inf)
    order = np.argsort(d, axis=1)[:, :6]  # reference: numpy brute force (no ties in random data)
    ref = np.zeros_like(d)
    rows = np.arange(len(pts))[:, None]
    ref[rows, order] = 1 / d[rows, order] ** 1.5
    np.testing.assert_allclose(dense(vicino.inverse_distance(pts, k=6, power=1.5)), ref, rtol=1e-13)


def test_inverse_distance_without_a_cutoff_links_everyone(pts):
    d = cdist(pts, pts)
    with np.errstate(divide="ignore"):
        ref = np.where(d > 0, 1 / d, 0)
    w = vicino.inverse_distance(pts)
    assert w.nnz == 150 * 149 and w.density == 1.0  # every ordered pair of distinct units
    np.testing.assert_allclose(dense(w), ref, rtol=1e-13)


def test_all_pairs_beyond_the_threshold_are_refused_with_the_memory():
    xy = np.random.default_rng(1).random((4_001, 2))
    with pytest.raises(vicino.TooLargeError, match="4,000 units give a cutoff"):
        vicino.inverse_distance(xy)


def test_coincident_points_policies():
    xy = np.array([[0.0, 0.0], [0.0, 0.0], [3.0, 4.0]])
    with pytest.raises(vicino.InvalidParameterError, match="units 0 and 1 share one location"):
        vicino.inverse_distance(xy)  # refused before the duplicate warning
    with pytest.warns(vicino.DuplicateLocationWarning):
        w = vicino.inverse_distance(xy, coincident="drop")
    assert w.neighbors_of(0).to_dict() == {2: 0.2}  # 1 / 5 by hand
    with pytest.warns(vicino.DuplicateLocationWarning):
        f = vicino.inverse_distance(xy, min_distance=0.5, power=2)
    assert f.neighbors_of(0).to_dict() == {1: 4.0, 2: 0.04}  # 1 / 0.5^2 and 1 / 5^2 by hand
    assert f.to_edges()["distance"].iloc[0] == 0.0  # the true distance is kept


@pytest.mark.parametrize("kernel", sorted(KERNELS))
@pytest.mark.parametrize("self_weight", [True, False])
def test_kernels_with_a_fixed_bandwidth(pts, kernel, self_weight):
    h = 0.2
    d = cdist(pts, pts)
    u = d / h
    ref = np.where(u <= 1, KERNELS[kernel](u), 0.0)  # reference: Silverman (1986) formulas
    if not self_weight:
        np.fill_diagonal(ref, 0.0)
    w = vicino.kernel_weights(pts, kernel=kernel, bandwidth=h, self_weight=self_weight)
    np.testing.assert_allclose(dense(w), ref, rtol=1e-13, atol=1e-300)


@pytest.mark.parametrize("kernel", sorted(KERNELS))
def test_adaptive_kernels_use_the_kth_neighbour_distance(pts, kernel):
    k = 7
    d = cdist(pts, pts)
    h = np.sort(d, axis=1)[:, k]  # reference: the k-th nearest (column 0 is the unit itself)
    u = d / h[:, None]
    ref = np.where(u <= 1, KERNELS[kernel](u), 0.0)
    w = vicino.kernel_weights(pts, kernel=kernel, k=k)
    np.testing.assert_allclose(dense(w), ref, rtol=1e-13, atol=1e-300)
    assert not w.audit().symmetric  # adaptive bandwidths give asymmetric weights


def test_kernels_and_inverse_distance_on_the_sphere():
    vega = pytest.importorskip("vega_datasets")
    df = vega.data.airports().drop_duplicates(["longitude", "latitude"]).iloc[:300]
    lonlat = df[["longitude", "latitude"]].to_numpy()
    d = brute_haversine(lonlat)  # reference: haversine on the IUGG mean sphere
    w = vicino.kernel_weights(
        df.set_index("iata"),
        kernel="quartic",
        bandwidth=250.0,
        metric="great_circle",
        columns=["longitude", "latitude"],
        self_weight=False,
    )
    u = d / 250.0
    ref = np.where(u <= 1, KERNELS["quartic"](u), 0.0)
    np.fill_diagonal(ref, 0.0)
    np.testing.assert_allclose(dense(w), ref, rtol=1e-9, atol=1e-12)
    inv = vicino.inverse_distance(lonlat, k=4, metric="great_circle")
    e = inv.to_edges()
    np.testing.assert_allclose(e["weight"], 1 / e["distance"], rtol=1e-15)
    np.testing.assert_allclose(e["distance"], d[e["source"], e["target"]], rtol=1e-9)


@pytest.mark.parametrize(
    "call,error,words",
    [
        (lambda xy: vicino.inverse_distance(xy, power=-1, k=2), vicino.InvalidParameterError, "power"),
        (lambda xy: vicino.inverse_distance(xy, power=float("nan"), k=2), vicino.InvalidParameterError, "power"),
        (lambda xy: vicino.inverse_distance(xy, radius=1.0, k=2), vicino.InvalidParameterError, "not both"),
        (lambda xy: vicino.inverse_distance(xy, min_distance=-1.0), vicino.InvalidParameterError, "min_distance"),
        (lambda xy: vicino.inverse_distance(xy, coincident="floor"), vicino.InvalidParameterError, "coincident"),
        (lambda xy: vicino.kernel_weights(xy), vicino.InvalidParameterError, "exactly one"),
        (lambda xy: vicino.kernel_weights(xy, bandwidth=1.0, k=2), vicino.InvalidParameterError, "exactly one"),
        (lambda xy: vicino.kernel_weights(xy, bandwidth=-1.0), vicino.InvalidParameterError, "bandwidth"),
        (lambda xy: vicino.kernel_weights(xy, bandwidth=float("nan")), vicino.InvalidParameterError, "bandwidth"),
        (lambda xy: vicino.kernel_weights(xy, k=2, kernel="cosine"), vicino.InvalidParameterError, "kernel"),
        (lambda xy: vicino.kernel_weights(xy, k=0), vicino.InvalidParameterError, "at least 1"),
        (lambda xy: vicino.kernel_weights(xy, k=2, self_weight="yes"), vicino.InvalidParameterError, "True or False"),
    ],
)
def test_bad_parameters_are_refused(call, error, words):
    xy = np.random.default_rng(2).random((10, 2))
    with pytest.raises(error, match=words):
        call(xy)


def test_weights_beyond_floating_point_are_refused():
    xy = np.array([[0.0, 0.0], [1e-110, 0.0], [1.0, 1.0]])
    # 1e-110 ** -3 = 1e330 is beyond binary64 (about 1.8e308)
    with pytest.raises(vicino.InvalidMatrixError, match="rescale the coordinates"):
        vicino.inverse_distance(xy, power=3.0, k=1)
