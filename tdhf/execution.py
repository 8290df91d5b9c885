"""Where independent tasks run: in this process, in a local process pool, or on a Dask cluster.

The numerical core never starts processes: functions with independent pieces of work (the
(system, multipole) responses of a dispersion table, the decks of a series, the systems of a
comparison) take an optional *task map*, a callable ``map_tasks(function, tasks)`` that returns
``function(*task)`` for each task, **in the order of the tasks** (a generator is fine).  This
module supplies the three kinds:

* :func:`tdhf.numerics.tasks.serial`: one after the other, here (what the core does without a map);
* :class:`ProcessPool`: ``workers`` processes on this machine (``--workers N``);
* :class:`DaskCluster`: the workers of an existing Dask distributed scheduler
  (``--scheduler ADDRESS``, the optional extra ``[cluster]``).

Every task is the same computation wherever it runs (each solve pins BLAS to one thread,
:mod:`tdhf.numerics.threads`), so the numbers are bit-identical to ``--workers 1``.  Tasks and
their results must be picklable: module-level functions of frozen dataclasses and arrays.

>>> with task_map(workers=1) as run:
...     list(run(pow, [(2, 3), (3, 2)]))
[8, 9]
"""

from __future__ import annotations

import contextlib
import multiprocessing
import os
import threading
from concurrent.futures import ProcessPoolExecutor
from typing import Any, Callable, Iterator, Sequence

from tdhf.errors import InputError
from tdhf.numerics.tasks import TaskMap, serial

__all__ = ["TaskMap", "serial", "ProcessPool", "start_method", "DaskCluster", "task_map", "default_workers", "CLUSTER_HINT"]

CLUSTER_HINT = "pip install 'tdhf[cluster]'"


def default_workers() -> int:
    """The number of cores this process may use (the default of ``--workers``)."""
    try:
        return max(len(os.sched_getaffinity(0)), 1)
    except AttributeError:  # not on Linux
        return max(os.cpu_count() or 1, 1)


def _check_workers(workers: object) -> int:
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise InputError(f"--workers: {workers!r} is not an integer >= 1; give the number of processes, e.g. 2")
    return workers


def start_method() -> str:
    """How new workers start: "fork" from a single-threaded process, else "spawn".

    A forked worker begins with numpy and tdhf already imported (measured: a Xe deck on two
    workers 5.3 -> 4.4 s wall, 1.5 s less CPU); a spawned one imports them again.  Forking a
    process in which another thread runs can leave the child waiting for ever on a lock that
    thread held, so a process with more than one Python thread spawns.  The BLAS of tdhf runs on
    one thread (:mod:`tdhf.numerics.threads`; the command line says so before numpy loads).
    """
    if "fork" in multiprocessing.get_all_start_methods() and threading.active_count() == 1:
        return "fork"
    return "spawn"


class ProcessPool:
    """A pool of ``workers`` processes on this machine, started at the first tasks (:func:`start_method`).

    Use as a context manager; calling it submits every task at once (before it returns) and
    gives an iterator of the results in task order (put the costliest tasks first for the best
    balance).
    """

    def __init__(self, workers: int) -> None:
        self.workers = _check_workers(workers)
        self._open = False
        self._pool: ProcessPoolExecutor | None = None

    def __enter__(self) -> "ProcessPool":
        self._open = True
        return self

    def __exit__(self, *exc_info: object) -> None:
        self._open = False
        if self._pool is not None:
            # An interrupt must not wait for queued tasks.
            self._pool.shutdown(wait=exc_info[0] is None, cancel_futures=exc_info[0] is not None)
            self._pool = None

    def __call__(self, function: Callable[..., Any], tasks: Sequence[tuple]) -> Iterator[Any]:
        if not self._open:
            raise RuntimeError("ProcessPool is used outside its with block")
        if self._pool is None:  # made at the first tasks: a run that has none starts no process
            self._pool = ProcessPoolExecutor(max_workers=self.workers,
                                             mp_context=multiprocessing.get_context(start_method()))
        futures = [self._pool.submit(function, *task) for task in tasks]  # started now, collected later
        return (future.result() for future in futures)


class DaskCluster:
    """The workers of a running Dask distributed scheduler at ``address`` (e.g. "tcp://host:8786").

    Raises
    ------
    InputError
        If dask.distributed is not installed (naming the install command) or the scheduler
        cannot be reached.
    """

    def __init__(self, address: str, timeout: float = 30.0) -> None:
        self.address = address
        self.timeout = timeout
        self._client = None

    def __enter__(self) -> "DaskCluster":
        try:
            from distributed import Client
        except ImportError:
            raise InputError(f"--scheduler needs dask.distributed, which is not installed; install it with:"
                             f" {CLUSTER_HINT}") from None
        try:
            self._client = Client(self.address, timeout=self.timeout, set_as_default=False)
        except (OSError, TimeoutError) as err:
            raise InputError(f"--scheduler {self.address}: cannot reach the Dask scheduler ({err});"
                             " check the address and that the scheduler runs") from None
        return self

    def __exit__(self, *exc_info: object) -> None:
        if self._client is not None:
            self._client.close()
            self._client = None

    def __call__(self, function: Callable[..., Any], tasks: Sequence[tuple]) -> Iterator[Any]:
        if self._client is None:
            raise RuntimeError("DaskCluster is used outside its with block")
        # pure=False: equal tasks are still separate work (a series may hold two equal decks).
        futures = [self._client.submit(function, *task, pure=False) for task in tasks]
        return (future.result() for future in futures)


@contextlib.contextmanager
def task_map(workers: int | None = None, scheduler: str | None = None) -> Iterator[TaskMap]:
    """The task map of the command-line options: a Dask cluster, a process pool, or serial.

    ``workers`` None means :func:`default_workers`; 1 (or a single core) runs serially here.
    """
    if scheduler:
        with DaskCluster(scheduler) as cluster:
            yield cluster
        return
    count = default_workers() if workers is None else _check_workers(workers)
    if count == 1:
        yield serial
        return
    with ProcessPool(count) as pool:
        yield pool
