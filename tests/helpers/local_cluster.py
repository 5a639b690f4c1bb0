"""Fixture of the ``--scheduler`` tests: a Dask distributed cluster on this
machine (two worker processes of one thread each), started by the test
module that asks for it and stopped after it.  A test module takes it with
``from local_cluster import scheduler`` (a helper module, not a conftest:
two conftest.py files would clash under ``--doctest-modules``)."""

import os

import pytest

__all__ = ["scheduler"]

ROOT = os.path.abspath(os.path.join(os.path.dirname(__file__), "..", ".."))


@pytest.fixture(scope="module")
def scheduler():
    """The scheduler address of a local cluster of two worker processes."""
    from distributed import LocalCluster

    # the workers are new processes: they import dynshare from the same tree
    before = os.environ.get("PYTHONPATH")
    os.environ["PYTHONPATH"] = ROOT + os.pathsep + (before or "")
    try:
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
            yield cluster.scheduler_address
    finally:
        if before is None:
            del os.environ["PYTHONPATH"]
        else:
            os.environ["PYTHONPATH"] = before
