"""The executors: in-process, the local process pool and a Dask cluster on loopback.

References: a plain Python loop over the same tasks in this process (what ``map`` must
equal, element for element); the operating system's process ids (which process ran a
task); ngspice run in this process's own child; and the textbook natural response of a
series RLC with the capacitor charged and no initial current (from memory):
v(t) = V0 exp(-alpha t) (cos(omega_d t) + alpha / omega_d sin(omega_d t)), alpha = R / 2L,
omega_d = sqrt(1 / LC - alpha^2).
"""

from __future__ import annotations

import math
import os

import numpy as np
import pytest

import executor_tasks as tasks
from xcheck.errors import XcheckError
from xcheck.sweep.executors import (
    InProcessExecutor,
    PoolExecutor,
    TaskError,
    available_cpus,
    open_executor,
)

SEEDS = list(range(101, 109))


def _same_captures(results, reference) -> None:
    assert len(results) == len(reference)
    for (seed, volts), (ref_seed, ref_volts) in zip(results, reference):
        assert seed == ref_seed
        # Exact equality: the same code on the same inputs on the same machine; the only
        # linear algebra is 2x2 (scipy lsim), too small for a threaded BLAS to reorder.
        np.testing.assert_array_equal(volts, ref_volts)


def test_one_worker_pool_and_dask_give_the_loop_results(dask_address) -> None:
    reference = [tasks.seeded_capture(seed) for seed in SEEDS]  # a plain loop, here
    seen = []
    with open_executor(workers=1) as executor:
        assert isinstance(executor, InProcessExecutor)
        _same_captures(executor.map(tasks.seeded_capture, SEEDS), reference)
    with open_executor(workers=2) as executor:
        assert isinstance(executor, PoolExecutor) and executor.workers == 2
        _same_captures(executor.map(tasks.seeded_capture, SEEDS,
                                    progress=lambda done, total: seen.append((done, total))),
                       reference)
    with open_executor(cluster=dask_address) as executor:
        assert executor.workers == 2  # two worker processes of one thread each
        _same_captures(executor.map(tasks.seeded_capture, SEEDS), reference)
    # progress(done, total) came in this process, from 0 to all of them, in order.
    assert seen == [(done, len(SEEDS)) for done in range(len(SEEDS) + 1)]


def test_the_pool_and_dask_run_tasks_outside_this_process(dask_address) -> None:
    with open_executor(workers=2) as executor:
        pool = executor.map(tasks.where, range(6))
    with open_executor(cluster=dask_address) as executor:
        remote = executor.map(tasks.where, range(6))
    for results in (pool, remote):
        assert [task for task, _ in results] == list(range(6))  # in task order
        assert all(pid != os.getpid() for _, pid in results)


def test_one_task_runs_here_without_a_pool() -> None:
    with open_executor(workers=2) as executor:
        assert executor.map(tasks.where, [0]) == [(0, os.getpid())]


@pytest.mark.parametrize("kind", ["in-process", "pool", "dask"])
def test_a_failing_task_is_reported_and_the_others_finish(kind, request) -> None:
    options = ({"workers": 1} if kind == "in-process" else {"workers": 2} if kind == "pool"
               else {"cluster": request.getfixturevalue("dask_address")})
    with open_executor(**options) as executor:
        results = executor.map(tasks.fails_on_three, range(7))
    assert [r for i, r in enumerate(results) if i != 3] == [i * i for i in range(7) if i != 3]
    error = results[3]
    assert isinstance(error, TaskError)
    assert (error.index, error.kind) == (3, "ValueError")
    assert error.message == "task 3 was told to fail"
    assert "fails_on_three" in error.detail  # where it happened, for the developer


def test_a_worker_that_dies_costs_only_its_own_task() -> None:
    with open_executor(workers=2) as executor:
        results = executor.map(tasks.dies_on_five, range(9))
        again = executor.map(tasks.fails_on_three, [1, 2])  # the pool works on afterwards
    assert [r for i, r in enumerate(results) if i != 5] == [i * i for i in range(9) if i != 5]
    assert isinstance(results[5], TaskError) and results[5].kind == "WorkerDied"
    assert "exited unexpectedly" in results[5].message
    assert again == [1, 4]


def test_bad_executor_options_are_clear_errors() -> None:
    with pytest.raises(XcheckError, match=r"--workers 0: .* at least 1"):
        open_executor(workers=0)
    with pytest.raises(XcheckError, match="not both"):
        open_executor(workers=2, cluster="tcp://127.0.0.1:8786")
    with pytest.raises(XcheckError, match=r"not a Dask scheduler address; give it as tcp://HOST:PORT"):
        open_executor(cluster="127.0.0.1 8786")


def test_an_unreachable_scheduler_is_a_clear_error(monkeypatch) -> None:
    from xcheck.sweep import executors

    monkeypatch.setattr(executors, "CONNECT_TIMEOUT", 1.0)
    # Port 9 on the loopback address: nothing of these tests listens there.
    with pytest.raises(XcheckError, match=r"could not reach a Dask scheduler there .* "
                                          r"start one with 'dask scheduler'"):
        open_executor(cluster="tcp://127.0.0.1:9")


def test_the_default_is_the_cpus_this_process_may_use() -> None:
    # Reference: the operating system's affinity mask (os.sched_getaffinity).
    expected = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else os.cpu_count()
    assert available_cpus() == expected
    with open_executor() as executor:
        assert executor.workers == expected


def _textbook(time: np.ndarray) -> np.ndarray:
    r, l, c = tasks.RLC["R"], tasks.RLC["L"], tasks.RLC["C"]
    alpha = r / (2 * l)
    omega = math.sqrt(1 / (l * c) - alpha**2)
    return np.exp(-alpha * time) * (np.cos(omega * time) + alpha / omega * np.sin(omega * time))


@pytest.mark.ngspice
@pytest.mark.parametrize("kind", ["pool", "dask"])
def test_ngspice_runs_inside_the_workers(kind, request) -> None:
    options = ({"workers": 2} if kind == "pool"
               else {"cluster": request.getfixturevalue("dask_address")})
    here_pid, here_time, here_volts = tasks.ngspice_ringdown(0)  # this process's own child
    with open_executor(**options) as executor:
        results = executor.map(tasks.ngspice_ringdown, range(4))
    for result in results:
        assert not isinstance(result, TaskError), result
        pid, time, volts = result
        assert pid != here_pid
        # The same deck in the same ngspice gives the same numbers, wherever it runs.
        np.testing.assert_array_equal(time, here_time)
        np.testing.assert_array_equal(volts, here_volts)
        # Against the textbook response: within 1e-4 of the 1 V start, ngspice's accuracy
        # target for xcheck's automatic time step (benchmarks/README.md, row c).
        np.testing.assert_allclose(volts, _textbook(time), rtol=0, atol=1e-4)


@pytest.mark.ngspice
def test_a_workers_ngspice_is_replaced_after_its_quota_of_decks_or_memory(monkeypatch) -> None:
    import psutil

    from xcheck.engines import ngspice
    from xcheck.sweep import executors

    def state() -> list[tuple[int, int]]:
        seen: list[tuple[int, int]] = []
        ngspice.recycle_shared_worker(lambda pid, runs: seen.append((pid, runs)) or False)
        return seen  # [] when no child is running

    ngspice.recycle_shared_worker(lambda pid, runs: True)  # start from no child
    monkeypatch.setattr(executors, "RECYCLE_AFTER_DECKS", 2)
    executors.run_guarded(tasks.ngspice_ringdown, 0, 0)
    [(first, runs)] = state()
    assert runs == 1  # one deck served, below the quota: kept
    executors.run_guarded(tasks.ngspice_ringdown, 1, 1)
    assert state() == []  # the second deck reached the quota: stopped
    assert not psutil.pid_exists(first)  # reference: the operating system's process table
    monkeypatch.setattr(executors, "RECYCLE_AFTER_DECKS", 1000)
    monkeypatch.setattr(executors, "MEMORY_CEILING_BYTES", 1)  # every child is above 1 byte
    executors.run_guarded(tasks.ngspice_ringdown, 2, 2)
    assert state() == []
