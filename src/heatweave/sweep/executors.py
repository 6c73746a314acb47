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
import multiprocessing
import multiprocessing.forkserver
import multiprocessing.resource_tracker
import multiprocessing.util
import os
import select
import shutil
import signal
import threading
import time
from collections.abc import Callable, Iterator, Sequence
from concurrent.futures import FIRST_COMPLETED, Future, ProcessPoolExecutor, wait
from types import FrameType
from typing import Any, Protocol, TypeVar

from heatweave.errors import UsageError
from heatweave.processes import (
    ENDING,
    Terminated,
    catch_termination,
    ignore_further,
    signals_deferred,
)

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

    def abort(self) -> None:
        """End every worker now, running jobs included (on Ctrl-C or SIGTERM)."""
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

    def abort(self) -> None:
        return None


#: The signals a command ends on, held back in the fork server for its whole life.
_HELD = {signal.SIGINT, *ENDING}

#: True while a worker process runs a job (see :func:`_end_worker`).
_IN_JOB = False


def _end_worker(signum: int, frame: FrameType | None) -> None:
    """A worker asked to end: inside a job, unwind it (ngspice killed, its folder removed)
    and exit in :func:`_call`; between jobs, exit at once."""
    ignore_further()
    if _IN_JOB:
        raise Terminated(signum)
    os._exit(128 + signum)


def _start_worker(command: int, folder: str) -> None:
    """Set a worker process up.  ngspice is built with OpenMP: each worker gets one
    thread, so that N workers use N cores rather than fighting over them (Dask's nanny
    does the same).  The worker ends on SIGTERM, SIGHUP and SIGINT, which the command
    coordinates, and when the *command* process dies, even by SIGKILL (a worker's parent
    is the fork server, which lives as long as its workers do); then it removes the
    command's multiprocessing *folder*, which the killed command could not."""
    os.environ.setdefault("OMP_NUM_THREADS", "1")
    catch_termination(_end_worker)
    threading.Thread(target=_watch, args=(command, folder), daemon=True).start()
    # Born with the signals held back (see ProcessExecutor): from here on they end it.
    signal.pthread_sigmask(signal.SIG_UNBLOCK, _HELD)


def _watch(pid: int, folder: str) -> None:
    """SIGTERM to this worker once process *pid* has ended, after removing *folder*.  The
    command only ends before its workers when it was killed (it ends them first
    otherwise), so the folder it named is stale then.  The thread takes no signal
    itself: they go to the main thread, which holds them back while it starts ngspice."""
    signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT, signal.SIGTERM, signal.SIGHUP})
    try:
        handle = os.pidfd_open(pid)
    except (AttributeError, OSError):  # not Linux 5.3+: poll the pid instead
        handle = None
    while True:
        if handle is not None:
            if select.select([handle], [], [], None)[0]:
                break
        else:
            time.sleep(0.5)
            try:
                os.kill(pid, 0)
            except ProcessLookupError:
                break
            except PermissionError:
                pass
    shutil.rmtree(folder, ignore_errors=True)  # another worker may be at it too
    os.kill(os.getpid(), signal.SIGTERM)


def _call(func: Callable[[J], R], job: J) -> R:
    """*func(job)* in a worker, leaving the process when a signal ended the job."""
    global _IN_JOB
    _IN_JOB = True
    try:
        return func(job)
    except Terminated as ended:
        os._exit(ended.exit_code)
    finally:
        _IN_JOB = False


#: Seconds the command sleeps at most while waiting for a job (a signal waits this long).
WAKE_EVERY = 0.25

#: Seconds workers have to clean up after SIGTERM before they are killed.
ABORT_GRACE = 5.0

#: Seconds the pool's manager thread has to end once its workers are gone.
MANAGER_GRACE = 10.0


class ProcessExecutor:
    """Jobs in *workers* local processes.  A fork server gives each a clean start; it
    imports the *preload* modules once, so workers do not each pay for numpy and friends."""

    name = "local"

    def __init__(self, workers: int, preload: Sequence[str] = ()) -> None:
        self.workers = workers
        context = multiprocessing.get_context("forkserver")
        context.set_forkserver_preload(list(preload))
        # The fork server starts with SIGINT, SIGTERM and SIGHUP held back, and keeps them
        # so: a Ctrl-C to the whole group during its imports would print their traceback.
        # It ends when this process does (its end of a pipe closes).  Workers inherit the
        # held signals until _start_worker has its handlers in place.  The resource
        # tracker starts first: starting it unblocks SIGINT and SIGTERM on its way out.
        multiprocessing.resource_tracker.ensure_running()
        with signals_deferred():
            multiprocessing.forkserver.ensure_running()
        # The folder the fork server's socket lives in (removed at a normal exit).
        folder = multiprocessing.util.get_temp_dir()
        self._aborted = False
        self._pool = ProcessPoolExecutor(
            max_workers=workers,
            mp_context=context,
            initializer=_start_worker,
            initargs=(os.getpid(), folder),
        )

    def run(self, func: Callable[[J], R], jobs: Sequence[J]) -> Iterator[tuple[int, R]]:
        # Submitting starts the workers: a signal waits until every one is recorded, so
        # abort() ends them all (one half started would outlive the command and fail).
        with signals_deferred():
            pending: dict[Future[R], int] = {
                self._pool.submit(_call, func, job): position for position, job in enumerate(jobs)
            }
        # Jobs left when the caller stops early are dropped by close() or abort().
        while pending:
            # A signal the kernel hands to another thread (a BLAS thread) does not wake a
            # main thread asleep in a lock: its handler runs when the wait times out.
            done, _ = wait(pending, timeout=WAKE_EVERY, return_when=FIRST_COMPLETED)
            for future in done:
                yield pending.pop(future), future.result()

    def close(self) -> None:
        """Wait for the pool to end; after :meth:`abort`, only as long as it takes."""
        self._pool.shutdown(wait=not self._aborted, cancel_futures=True)

    def abort(self) -> None:
        """SIGTERM to every worker (each unwinds its job and exits), SIGKILL to any still
        running after :data:`ABORT_GRACE` seconds.

        Queued jobs are dropped by the pool's own manager thread (``shutdown`` with
        ``cancel_futures``), never cancelled from here: Python 3.11's manager, finding a
        worker gone, sets an error on every job it still holds and raises
        ``InvalidStateError`` (a traceback on stderr) for one already cancelled."""
        self._aborted = True
        workers = list((getattr(self._pool, "_processes", None) or {}).values())
        # shutdown() forgets the manager thread: take it first, to wait for it below.
        manager = getattr(self._pool, "_executor_manager_thread", None)
        self._pool.shutdown(wait=False, cancel_futures=True)
        for worker in workers:
            worker.terminate()
        deadline = time.monotonic() + ABORT_GRACE
        for worker in workers:
            worker.join(max(deadline - time.monotonic(), 0.0))
            if worker.is_alive():
                worker.kill()
                worker.join(1.0)
        # The manager notices the workers are gone and ends, closing its wakeup pipe.  One
        # still running at interpreter exit races the pool's exit hook, which writes to
        # that pipe ("Exception ignored ... Bad file descriptor" on stderr).
        if manager is not None:
            manager.join(max(deadline - time.monotonic(), 0.0) + MANAGER_GRACE)


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

    def abort(self) -> None:
        self.close()

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
