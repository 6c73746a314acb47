"""Where sweep corners run: this process, a pool of local processes, or a Dask cluster.

Every executor has one interface, :meth:`Executor.run`: apply a picklable function to each
job and yield ``(position, result)`` pairs as the results arrive, in any order.  The caller
puts them back in order, so what a sweep reports never depends on the executor or the
number of workers.  ngspice's shared library holds one circuit per process, so parallel
corners always run in separate processes (each worker process loads its own library).

* :class:`SerialExecutor`: this process, one job after the other (``-j 1``).
* :class:`ProcessExecutor`: a pool of worker processes on this machine, started from a
  clean fork server (no threads or loaded library inherited from the caller).
* :class:`DaskExecutor`: a Dask distributed cluster at a scheduler address, or a
  ``LocalCluster`` it starts and stops itself (optional dependency ``heatweave[dask]``).
  Workers need the deck's include files at the same paths (a shared file system).
"""

from __future__ import annotations

import importlib
import os
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from typing import Any, Protocol, TypeVar

from heatweave.errors import UsageError

J = TypeVar("J")
R = TypeVar("R")

EXECUTORS = ("local", "dask")


class Executor(Protocol):
    """Runs jobs somewhere and hands back results as they finish."""

    name: str
    workers: int

    def run(self, func: Callable[[J], R], jobs: Sequence[J]) -> Iterator[tuple[int, R]]:
        """``(position in jobs, func(job))`` for every job, in the order they finish."""
        ...

    def close(self) -> None:
        """Release workers, pools and clusters this executor started."""
        ...


def default_jobs() -> int:
    """All the cores this process may use."""
    try:
        return len(os.sched_getaffinity(0))
    except AttributeError:  # not on Linux
        return os.cpu_count() or 1


class SerialExecutor:
    """Jobs in this process, in order."""

    name = "local"
    workers = 1

    def run(self, func: Callable[[J], R], jobs: Sequence[J]) -> Iterator[tuple[int, R]]:
        for position, job in enumerate(jobs):
            yield position, func(job)

    def close(self) -> None:
        return None


def _one_thread_each() -> None:
    """ngspice is built with OpenMP: parallel workers each get one thread, so that N
    workers use N cores rather than fighting over them (Dask's nanny does the same)."""
    os.environ.setdefault("OMP_NUM_THREADS", "1")


class ProcessExecutor:
    """Jobs in *workers* local processes.  A fork server gives each a clean start; it
    imports the *preload* modules once, so workers do not each pay for numpy and friends."""

    name = "local"

    def __init__(self, workers: int, preload: Sequence[str] = ()) -> None:
        import multiprocessing

        self.workers = workers
        context = multiprocessing.get_context("forkserver")
        context.set_forkserver_preload(list(preload))
        self._pool = ProcessPoolExecutor(
            max_workers=workers, mp_context=context, initializer=_one_thread_each
        )

    def run(self, func: Callable[[J], R], jobs: Sequence[J]) -> Iterator[tuple[int, R]]:
        pending: dict[Future[R], int] = {
            self._pool.submit(func, job): position for position, job in enumerate(jobs)
        }
        try:
            while pending:
                done, _ = wait(pending, return_when=FIRST_COMPLETED)
                for future in done:
                    yield pending.pop(future), future.result()
        finally:
            for future in pending:
                future.cancel()

    def close(self) -> None:
        self._pool.shutdown(wait=True, cancel_futures=True)


class DaskExecutor:
    """Jobs on a Dask distributed cluster: at *scheduler* (``tcp://host:8786``), or on a
    ``LocalCluster`` of *workers* single-threaded processes started here when it is
    ``None``."""

    name = "dask"

    def __init__(self, scheduler: str | None, workers: int) -> None:
        try:
            distributed: Any = importlib.import_module("distributed")
        except ImportError:
            raise UsageError(
                "--executor dask needs the dask extra, which is not installed",
                hint="pip install 'heatweave[dask]', or use --executor local",
            ) from None
        self._cluster: Any = None
        try:
            if scheduler is None:
                self._cluster = distributed.LocalCluster(
                    n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=":0"
                )
                self._client: Any = distributed.Client(self._cluster)
            else:
                self._client = distributed.Client(scheduler, timeout="10s")
        except (OSError, TimeoutError) as err:
            self.close()
            raise UsageError(
                f"cannot reach the Dask scheduler {scheduler}: {err}",
                hint="check the address (tcp://HOST:PORT) and that the scheduler is running",
            ) from None
        threads = self._client.nthreads()
        self.workers = sum(threads.values()) or workers

    def run(self, func: Callable[[J], R], jobs: Sequence[J]) -> Iterator[tuple[int, R]]:
        as_completed: Any = importlib.import_module("distributed").as_completed
        # pure=False: two equal jobs are still two runs, never one cached result
        futures = [self._client.submit(func, job, pure=False) for job in jobs]
        positions = {future.key: position for position, future in enumerate(futures)}
        try:
            for future, result in as_completed(futures, with_results=True):
                yield positions[future.key], result
        finally:
            self._client.cancel(futures)

    def close(self) -> None:
        client = getattr(self, "_client", None)
        if client is not None:
            client.close()
        if self._cluster is not None:
            self._cluster.close()


def make_executor(
    kind: str, jobs: int | None, scheduler: str | None = None, preload: Sequence[str] = ()
) -> Executor:
    """The executor for ``--executor KIND -j JOBS [--scheduler ADDRESS]``; local worker
    processes start with the *preload* modules imported."""
    if jobs is not None and jobs < 1:
        raise UsageError(f"-j {jobs}: need at least one worker", hint="give -j 1 or more")
    if scheduler is not None and kind != "dask":
        raise UsageError(
            "--scheduler is for --executor dask", hint="add --executor dask, or drop --scheduler"
        )
    count = jobs or default_jobs()
    if kind == "dask":
        return DaskExecutor(scheduler, count)
    if kind != "local":
        raise UsageError(f"unknown executor {kind!r}", hint="choose local or dask")
    if count == 1:
        return SerialExecutor()
    return ProcessExecutor(count, preload)
