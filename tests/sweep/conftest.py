"""Shared fixtures of the executor and batch tests: a Dask cluster on loopback.

The task functions live in ``executor_tasks.py`` beside this file, which is put on
``sys.path`` here: the workers (spawned pool processes, Dask worker processes started
with the same ``sys.path``) import the tasks by module name, as they would any
installed code.
"""

from __future__ import annotations

import sys
from collections.abc import Iterator
from pathlib import Path

import pytest

HERE = str(Path(__file__).resolve().parent)
if HERE not in sys.path:
    sys.path.insert(0, HERE)


@pytest.fixture(scope="session")
def dask_address() -> Iterator[str]:
    """Address of a two-process Dask cluster on 127.0.0.1 (no dashboard), its workers
    non-daemonic so that they may start ngspice's child process (see
    :mod:`xcheck.sweep.executors`)."""
    dask = pytest.importorskip("dask")
    distributed = pytest.importorskip("dask.distributed")
    with dask.config.set({"distributed.worker.daemon": False}):
        with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                      host="127.0.0.1", dashboard_address=None) as cluster:
            yield cluster.scheduler_address
