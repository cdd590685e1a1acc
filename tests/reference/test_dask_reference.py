"""The Dask route against general-purpose libraries: scipy's k-d tree and a dense numpy Moran's I."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from scipy.spatial import cKDTree

dd = pytest.importorskip("dask.dataframe")
distributed = pytest.importorskip("distributed")
vd = pytest.importorskip("vicino.dask")

# one pytest-xdist worker runs every Dask test, so the session shares one cluster
pytestmark = pytest.mark.xdist_group("dask")


def test_k_nearest_within_distance_and_moran_against_scipy_and_numpy(dask_client):
    rng = np.random.default_rng(11)
    n, k, r = 400, 5, 0.06
    xy = rng.random((n, 2))
    df = pd.DataFrame(xy, columns=["x", "y"])
    ddf = dd.from_pandas(df, npartitions=2)
    knn = vd.k_nearest(ddf, k, npartitions=5, check_ids=False).to_weights()
    # reference: scipy.spatial.cKDTree.query (random points: no ties), the point itself dropped
    dist, idx = cKDTree(xy).query(xy, k + 1)
    want = {(i, int(j)) for i in range(n) for j in idx[i, 1:]}
    edges = knn.to_edges()
    assert set(zip(edges["source"], edges["target"])) == want
    np.testing.assert_allclose(np.sort(edges["distance"]), np.sort(dist[:, 1:].ravel()), rtol=1e-12)
    band = vd.within_distance(ddf, r, npartitions=5, check_ids=False).to_weights().to_edges()
    # reference: cKDTree.query_pairs, both directions
    pairs = cKDTree(xy).query_pairs(r, output_type="ndarray")
    want = {(int(a), int(b)) for a, b in pairs} | {(int(b), int(a)) for a, b in pairs}
    assert set(zip(band["source"], band["target"])) == want
    # reference: Moran's I and its normality variance from the dense matrix (Cliff and Ord 1981, eq. 1.35)
    x = xy[:, 0] + rng.normal(scale=0.3, size=n)
    got = vd.moran(dd.from_pandas(pd.Series(x), npartitions=2), vd.k_nearest(ddf, k, npartitions=5, check_ids=False))
    w = np.zeros((n, n))
    w[edges["source"], edges["target"]] = 1.0
    z = x - x.mean()
    s0 = w.sum()
    s1 = 0.5 * ((w + w.T) ** 2).sum()
    s2 = ((w.sum(axis=1) + w.sum(axis=0)) ** 2).sum()
    i_stat = n / s0 * z @ w @ z / (z @ z)
    var_n = (n * n * s1 - n * s2 + 3 * s0 * s0) / (s0 * s0 * (n * n - 1)) - 1 / (n - 1) ** 2
    assert got.statistic == pytest.approx(i_stat, rel=1e-12)
    assert (got.s0, got.s1, got.s2) == pytest.approx((s0, s1, s2), rel=1e-12)
    assert got.normality.variance == pytest.approx(var_n, rel=1e-12)
