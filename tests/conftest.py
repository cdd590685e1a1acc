"""Shared set-up of the test suite: the oracles module is importable from every test folder,
and the Dask tests share one 2-process LocalCluster."""

import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))


@pytest.fixture(scope="session")
def dask_client():
    """A real 2-worker-process LocalCluster, started on first use and closed at the end of the session."""
    distributed = pytest.importorskip("distributed")
    import dask

    cluster = distributed.LocalCluster(
        n_workers=2, processes=True, threads_per_worker=1, dashboard_address=None, silence_logs=50
    )
    client = distributed.Client(cluster)
    # small data: the task-based shuffle starts faster than the peer-to-peer one (the default for large data)
    with dask.config.set({"dataframe.shuffle.method": "tasks"}):
        yield client
    client.close()
    cluster.close()
