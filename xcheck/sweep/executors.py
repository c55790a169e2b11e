"""Executors: run one function over many tasks, here, on a local process pool, or on Dask.

:func:`open_executor` gives a context manager whose :class:`Executor` has one method,
``map(function, tasks, progress=None) -> list``: the results in task order, with
``progress(done, total)`` called in the calling process as tasks finish. A task that
raises does not stop the others: its place in the list holds a :class:`TaskError` (the
exception's type and message), and so does a task whose worker process died.

Three kinds, chosen by the arguments:

- **In-process** (``workers=1``, or a map of one task): a plain loop, no pool.
- **Local pool** (the default; ``workers`` defaults to the CPUs this process may use,
  :func:`os.sched_getaffinity`): one single-process
  :class:`concurrent.futures.ProcessPoolExecutor` per worker, started with the ``spawn``
  method so that no ngspice state (or anything else) is inherited from the caller. Each
  worker takes the next task when it finishes one, so a worker that dies is known to
  have died on its own task: that task becomes a :class:`TaskError` and a fresh process
  takes the worker's place. Worker processes live as long as the executor, so several
  maps share them (and their ngspice).
- **Dask** (``cluster="tcp://host:port"``): tasks go to a ``dask.distributed`` scheduler
  through :class:`dask.distributed.Client`; the calling process only submits and
  collects, it never loads ngspice. A worker that dies is retried by the scheduler
  (``distributed.scheduler.allowed-failures``), then reported as that task's error.

**ngspice in the workers.** A worker process runs its decks through
:mod:`xcheck.engines.ngspice`'s shared child process, one ngspice per worker process,
kept from task to task (its start-up costs about a second). After each task the child is
recycled when it has served :data:`RECYCLE_AFTER_DECKS` decks or its resident memory
exceeds :data:`MEMORY_CEILING_BYTES` (the shared library grows slowly run after run);
the next deck starts a fresh one.

**Dask workers must not be daemonic.** Dask's nanny starts each worker process as a
daemon by default, and a daemonic process may not start children, which ngspice's child
process is (it isolates crashes and hangs). xcheck keeps that child and asks the workers
to run non-daemonic: start them with ``DASK_DISTRIBUTED__WORKER__DAEMON=False`` in the
environment (the configuration key ``distributed.worker.daemon: False``), or with
``dask worker --no-nanny``. A task that needs ngspice on a daemonic worker fails with a
:class:`TaskError` saying so. Give each worker process one thread (``--nthreads 1``,
more processes with ``--nworkers``): the threads of one process share one ngspice.
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import queue
import re
import sys
import threading
import traceback
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import ProcessPoolExecutor
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from typing import Any, ContextManager, Protocol

from xcheck.errors import XcheckError

Progress = Callable[[int, int], None]

#: Decks a worker's ngspice child serves before it is replaced by a fresh one.
RECYCLE_AFTER_DECKS = 2000

#: Resident memory of a worker's ngspice child above which it is replaced (bytes).
#: A child starts near 85 MB and grew by well under 1 MB per 100 decks when measured.
MEMORY_CEILING_BYTES = 1 << 30

#: Seconds allowed to reach a Dask scheduler, and for its first worker to appear.
CONNECT_TIMEOUT = 30.0

#: How a Dask scheduler address must look.
_ADDRESS = re.compile(r"^(tcp|tls)://[^\s/:]+(:\d{1,5})?$|^(tcp|tls)://\[[0-9a-fA-F:.]+\](:\d{1,5})?$")

_DAEMON_HINT = (
    "this Dask worker runs as a daemonic process, which may not start ngspice's child "
    "process: start the workers with DASK_DISTRIBUTED__WORKER__DAEMON=False in their "
    "environment (configuration key distributed.worker.daemon: False) or with "
    "'dask worker --no-nanny'"
)


@dataclass(frozen=True)
class TaskError:
    """A task that failed: its place in the results of :meth:`Executor.map`.

    Attributes
    ----------
    index
        The task's position in the list given to ``map``.
    kind
        The exception's class name (``"WorkerDied"`` when the worker process exited).
    message
        The exception's message (for an :class:`~xcheck.errors.XcheckError`, the
        paragraph a user would see).
    detail
        The last lines of the traceback for an unexpected exception, else ``""``.
    """

    index: int
    kind: str
    message: str
    detail: str = ""

    def __str__(self) -> str:
        return self.message if self.kind == "XcheckError" else f"{self.kind}: {self.message}"


class Executor(Protocol):
    """Runs a function over tasks; see the module docstring."""

    workers: int

    def map(self, function: Callable[[Any], Any], tasks: Sequence[Any],
            progress: Progress | None = None) -> list:
        """``[function(task) for task in tasks]``, a :class:`TaskError` in place of each
        failure, with ``progress(done, total)`` called in the caller's process."""
        ...


def available_cpus() -> int:
    """CPUs this process may run on (:func:`os.sched_getaffinity`; the CPU count where
    the platform has no affinity)."""
    try:
        return max(len(os.sched_getaffinity(0)), 1)
    except AttributeError:  # macOS, Windows
        return os.cpu_count() or 1


# --------------------------------------------------------------------------------------
# What runs in a worker
# --------------------------------------------------------------------------------------


def _error_record(index: int, exc: BaseException) -> TaskError:
    """The :class:`TaskError` for ``exc`` raised by task ``index``."""
    message = str(exc) or type(exc).__name__
    detail = ""
    if not isinstance(exc, XcheckError):
        lines = traceback.format_exception(type(exc), exc, exc.__traceback__)
        detail = "".join(lines[-6:]).strip()
        if "daemonic processes are not allowed to have children" in message:
            message = f"{message}: {_DAEMON_HINT}"
    kind = "XcheckError" if isinstance(exc, XcheckError) else type(exc).__name__
    return TaskError(index, kind, message, detail)


def _child_memory(pid: int) -> int:
    """Resident memory of process ``pid`` in bytes (0 when it cannot be read)."""
    try:
        import psutil  # a dependency of dask.distributed

        return int(psutil.Process(pid).memory_info().rss)
    except Exception:  # noqa: BLE001 - gone, or not permitted: never recycle for it
        return 0


def _recycle_ngspice() -> None:
    """Replace this process's ngspice child when it is old or large (only when this
    process has used ngspice at all)."""
    module = sys.modules.get("xcheck.engines.ngspice")
    if module is None:
        return
    module.recycle_shared_worker(
        lambda pid, runs: runs >= RECYCLE_AFTER_DECKS or _child_memory(pid) > MEMORY_CEILING_BYTES)


def run_guarded(function: Callable[[Any], Any], index: int, task: Any) -> Any:
    """``function(task)``, or the :class:`TaskError` it raised; then recycle ngspice if due.

    Runs in the worker (or, for the in-process executor, in the caller).
    """
    try:
        return function(task)
    except Exception as exc:  # noqa: BLE001 - every failure becomes data
        return _error_record(index, exc)
    finally:
        _recycle_ngspice()


# --------------------------------------------------------------------------------------
# In-process
# --------------------------------------------------------------------------------------


class InProcessExecutor:
    """Runs every task in the calling process, one after another."""

    workers = 1

    def map(self, function: Callable[[Any], Any], tasks: Sequence[Any],
            progress: Progress | None = None) -> list:
        """See :class:`Executor`."""
        tasks = list(tasks)
        results = []
        if progress is not None:
            progress(0, len(tasks))
        for index, task in enumerate(tasks):
            results.append(run_guarded(function, index, task))
            if progress is not None:
                progress(index + 1, len(tasks))
        return results


# --------------------------------------------------------------------------------------
# Local process pool
# --------------------------------------------------------------------------------------


class _Slot:
    """One worker: a single-process pool, replaced when its process dies."""

    def __init__(self, context: multiprocessing.context.BaseContext) -> None:
        self._context = context
        self._pool: ProcessPoolExecutor | None = None

    def call(self, function: Callable[[Any], Any], index: int, task: Any) -> Any:
        if self._pool is None:
            self._pool = ProcessPoolExecutor(max_workers=1, mp_context=self._context)
        try:
            return self._pool.submit(run_guarded, function, index, task).result()
        except BrokenProcessPool:
            self.close()
            return TaskError(index, "WorkerDied", "the worker process running this task "
                             "exited unexpectedly (killed, out of memory, or crashed in "
                             "compiled code); the other tasks went on in a fresh process. "
                             "When every task fails so and xcheck is called from a script, "
                             "the script's top-level code must sit under 'if __name__ == "
                             "\"__main__\":' (the spawn start method re-imports it)")
        except Exception as exc:  # noqa: BLE001 - e.g. a task or result that cannot be pickled
            return _error_record(index, exc)

    def close(self) -> None:
        pool, self._pool = self._pool, None
        if pool is not None:
            pool.shutdown(wait=True, cancel_futures=True)


class PoolExecutor:
    """A local pool of ``workers`` processes (``spawn`` start method).

    Parameters
    ----------
    workers
        Worker processes (at least 2; use :class:`InProcessExecutor` for one).
    """

    def __init__(self, workers: int) -> None:
        self.workers = workers
        self._context = multiprocessing.get_context("spawn")
        self._slots: list[_Slot] = []

    def map(self, function: Callable[[Any], Any], tasks: Sequence[Any],
            progress: Progress | None = None) -> list:
        """See :class:`Executor`. One task runs in the calling process (no pool)."""
        tasks = list(tasks)
        total = len(tasks)
        if total <= 1:
            return InProcessExecutor().map(function, tasks, progress)
        while len(self._slots) < min(self.workers, total):
            self._slots.append(_Slot(self._context))
        results: list[Any] = [None] * total
        todo: queue.SimpleQueue[int] = queue.SimpleQueue()
        for index in range(total):
            todo.put(index)
        finished: queue.SimpleQueue[int] = queue.SimpleQueue()
        stop = threading.Event()

        def drive(slot: _Slot) -> None:
            while not stop.is_set():
                try:
                    index = todo.get_nowait()
                except queue.Empty:
                    return
                try:
                    results[index] = slot.call(function, index, tasks[index])
                except BaseException as exc:  # noqa: BLE001 - never leave the caller waiting
                    results[index] = _error_record(index, exc)
                finished.put(index)

        threads = [threading.Thread(target=drive, args=(slot,), daemon=True)
                   for slot in self._slots[:min(self.workers, total)]]
        for thread in threads:
            thread.start()
        try:
            if progress is not None:
                progress(0, total)
            for done in range(1, total + 1):
                finished.get()
                if progress is not None:
                    progress(done, total)
        finally:
            stop.set()  # on an interrupt: no new task starts
            for thread in threads:
                thread.join()
        return results

    def close(self) -> None:
        """Stop every worker process."""
        for slot in self._slots:
            slot.close()
        self._slots.clear()


# --------------------------------------------------------------------------------------
# Dask
# --------------------------------------------------------------------------------------


class DaskExecutor:
    """Tasks on a Dask distributed cluster.

    Parameters
    ----------
    address
        The scheduler, ``tcp://host:port``.

    Raises
    ------
    XcheckError
        The address is malformed, dask.distributed is missing, the scheduler cannot be
        reached, or no worker joined it within :data:`CONNECT_TIMEOUT`.
    """

    def __init__(self, address: str) -> None:
        if not _ADDRESS.match(address):
            raise XcheckError(
                f"--cluster {address!r}: not a Dask scheduler address; give it as "
                "tcp://HOST:PORT, e.g. tcp://10.0.0.5:8786 (the address 'dask scheduler' "
                "prints when it starts)")
        try:
            from dask.distributed import Client
        except ImportError as exc:
            raise XcheckError(
                f"--cluster needs dask.distributed, which could not be imported ({exc}); "
                "install it with: pip install 'dask[distributed]'") from None
        try:
            self._client = Client(address, timeout=CONNECT_TIMEOUT, set_as_default=False)
        except (OSError, TimeoutError) as exc:
            raise XcheckError(
                f"--cluster {address}: could not reach a Dask scheduler there within "
                f"{CONNECT_TIMEOUT:g} s ({exc}); start one with 'dask scheduler' on that "
                "machine, check the host and port, or run without --cluster for the local "
                "pool") from None
        try:
            self._client.wait_for_workers(1, timeout=CONNECT_TIMEOUT)
        except (OSError, TimeoutError):
            self._client.close()
            raise XcheckError(
                f"--cluster {address}: the scheduler has no worker after "
                f"{CONNECT_TIMEOUT:g} s; start some with 'dask worker {address}' on each "
                "machine (see the README)") from None
        workers = self._client.scheduler_info(n_workers=-1)["workers"].values()
        self.workers = max(sum(int(w.get("nthreads", 1)) for w in workers), 1)

    def map(self, function: Callable[[Any], Any], tasks: Sequence[Any],
            progress: Progress | None = None) -> list:
        """See :class:`Executor`."""
        from dask.distributed import as_completed

        tasks = list(tasks)
        total = len(tasks)
        if not tasks:
            return []
        futures = self._client.map(run_guarded, [function] * total, range(total), tasks,
                                   pure=False)
        where = {future.key: index for index, future in enumerate(futures)}
        results: list[Any] = [None] * total
        if progress is not None:
            progress(0, total)
        try:
            for done, future in enumerate(as_completed(futures, loop=self._client.loop), 1):
                index = where[future.key]
                if future.status == "finished":
                    results[index] = future.result()
                else:
                    exc = future.exception() if future.status == "error" else None
                    results[index] = (_error_record(index, exc) if exc is not None else
                                      TaskError(index, "Cancelled", "the task was cancelled"))
                future.release()
                if progress is not None:
                    progress(done, total)
        finally:
            self._client.cancel([f for f in futures if not f.done()])
        return results

    def close(self) -> None:
        """Disconnect from the scheduler (the cluster keeps running)."""
        self._client.close()


# --------------------------------------------------------------------------------------
# Choosing one
# --------------------------------------------------------------------------------------


@contextlib.contextmanager
def _opened(executor: Any) -> Iterator[Executor]:
    try:
        yield executor
    finally:
        close = getattr(executor, "close", None)
        if close is not None:
            close()


def open_executor(workers: int | None = None,
                  cluster: str | None = None) -> ContextManager[Executor]:
    """An executor for many tasks, as a context manager that stops it afterwards.

    Parameters
    ----------
    workers
        Local worker processes; default the CPUs this process may use
        (:func:`available_cpus`). 1 runs every task in the calling process.
    cluster
        A Dask scheduler address (``tcp://host:port``): run the tasks there instead
        (``workers`` must then be None).

    Returns
    -------
    context manager of Executor
        ``with open_executor() as executor: results = executor.map(f, tasks)``.

    Raises
    ------
    XcheckError
        ``workers`` below 1, both arguments given, or the cluster cannot be used.
    """
    if cluster is not None:
        if workers is not None:
            raise XcheckError("give either a number of local workers (--workers) or a Dask "
                              "cluster (--cluster), not both: a cluster has its own workers")
        return _opened(DaskExecutor(cluster))
    count = available_cpus() if workers is None else workers
    if isinstance(count, bool) or not isinstance(count, int) or count < 1:
        raise XcheckError(f"--workers {workers!r}: the number of worker processes must be a "
                          "whole number of at least 1")
    return _opened(InProcessExecutor() if count == 1 else PoolExecutor(count))
