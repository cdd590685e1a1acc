"""Shared set-up of the test suite: the oracles module is importable from every test folder,
the Dask tests share one 2-process LocalCluster, and pytest-xdist workers get one thread each."""

import os
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).parent))

if os.environ.get("PYTEST_XDIST_WORKER"):
    # several pytest-xdist workers share the cores: one thread each for the core's pool and for BLAS,
    # or idle threads spin against the other workers (the thread-count tests set their own counts)
    for _name in ("RAYON_NUM_THREADS", "OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
        os.environ.setdefault(_name, "1")


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


def pytest_collection_modifyitems(config, items):
    """The Dask tests (one pytest-xdist group across their modules: one cluster) go first, as they take
    longest; modules with a costly module fixture (a demo run, a notebook run) are groups of their own."""

    def later(item):
        group = item.get_closest_marker("xdist_group")
        return group is None or group.args[0] != "dask"

    items.sort(key=later)
