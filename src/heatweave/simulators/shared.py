"""The shared back end: libngspice driven in this process through :mod:`.libngspice`.

The library is found without the user setting paths: ``HEATWEAVE_LIBNGSPICE`` if set, else
Debian's ``/usr/lib/x86_64-linux-gnu/libngspice.so.0``, else whatever
:func:`ctypes.util.find_library` finds.

libngspice keeps one state per process, so runs are serialised by a lock and every run ends
with ``destroy all`` and ``remcirc``: the next deck starts from nothing.  ngspice's output
arrives through the ``SendChar`` callback and becomes the result's log.  Analyses run in
ngspice's background thread (``bg_`` commands) while this thread waits in short polls, so a
timeout or a signal (Ctrl-C, SIGTERM) halts them and the run ends cleanly.

:class:`SharedSession` is the co-simulation's way in: a loaded circuit whose transient runs
to a pause, is altered, and resumes.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import os
import re
import sys
import tempfile
import threading
import time
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import ClassVar

import numpy as np
import numpy.typing as npt

from heatweave import files
from heatweave.errors import LibngspiceMissingError, SimulatorError

from . import diagnose
from .base import (
    INIT_VARIABLES,
    Array,
    FloatArray,
    Plot,
    Progress,
    Session,
    SignalSummary,
    SimResult,
    Simulator,
    check_analysis,
    command_script,
    input_folder,
    place_init_file,
    private_environment,
    summarise,
    timed_out,
    working_folder,
)
from .libngspice import MISSING_HINT, Library, open_library
from .naming import (
    CURRENT,
    FREQUENCY,
    TIME,
    VOLTAGE,
    is_scale_name,
    kind_from_plot_name,
    number_plots,
    vector_name,
)

ENV_LIBRARY = "HEATWEAVE_LIBNGSPICE"
DEBIAN_LIBRARY = "/usr/lib/x86_64-linux-gnu/libngspice.so.0"
# ngspice's simulation_type enum (sharedspice.h): the ones naming.py distinguishes.
_VECTOR_TYPES = {1: TIME, 2: FREQUENCY, 3: VOLTAGE, 4: CURRENT}
#: What ngspice says when a ``stop when`` pauses the transient: not a failure.
PAUSED = re.compile(r"simulation interrupted|condition met: stop|pause requested", re.I)

ENGINE_LOCK = threading.RLock()


def resolve_library(explicit: str | os.PathLike[str] | None = None) -> str:
    """The libngspice path to load, or :class:`LibngspiceMissingError`."""
    candidates: list[str] = []
    if explicit is not None:
        candidates = [str(explicit)]
    elif os.environ.get(ENV_LIBRARY):
        candidates = [os.environ[ENV_LIBRARY]]
    else:
        candidates = [DEBIAN_LIBRARY]
        found = ctypes.util.find_library("ngspice")
        if found:
            candidates.append(found)
    for candidate in candidates:
        if Path(candidate).is_file() or ("/" not in candidate and candidate):
            return candidate
    raise LibngspiceMissingError(
        f"the ngspice shared library was not found (looked for {', '.join(candidates)})",
        hint=MISSING_HINT,
    )


@contextmanager
def stray_stderr(sink: list[str]) -> Iterator[None]:
    """Catch what libngspice writes straight to file descriptor 2 into *sink*.

    A few ngspice messages (parts of failed ``.meas`` reports) bypass the callbacks.  Python's
    own ``sys.stderr`` is pointed at the real terminal meanwhile, so a progress display the
    caller writes from the progress callback still shows.
    """
    sys.stderr.flush()
    saved = os.dup(2)
    python_stderr = sys.stderr
    with tempfile.TemporaryFile() as catch:
        os.dup2(catch.fileno(), 2)
        sys.stderr = open(  # noqa: SIM115 - closed in the finally clause below
            saved, "w", encoding="utf-8", errors="backslashreplace", closefd=False
        )
        try:
            yield
        finally:
            sys.stderr.flush()
            sys.stderr.close()
            sys.stderr = python_stderr
            os.dup2(saved, 2)
            os.close(saved)
            catch.seek(0)
            sink.extend(files.decode(catch.read()).splitlines())


@contextmanager
def inside(folder: Path, input_dir: str | os.PathLike[str] | None = None) -> Iterator[None]:
    """Run the body with *folder* as the working directory and the private environment of
    :func:`private_environment` (so libngspice finds no init file there, in ``HOME``, in
    ``SPICE_USERINIT_DIR`` or in ``SPICE_SCRIPTS``), restoring the old folder and variables
    afterwards."""
    before = os.getcwd()
    wanted = private_environment(folder, input_dir)
    names = set(wanted) | set(INIT_VARIABLES)
    saved = {name: os.environ.get(name) for name in names}
    os.chdir(folder)
    try:
        for name in INIT_VARIABLES:
            os.environ.pop(name, None)
        for name, value in wanted.items():
            if saved[name] != value:
                os.environ[name] = value
        yield
    finally:
        for name, old in saved.items():
            if old is None:
                os.environ.pop(name, None)
            elif os.environ.get(name) != old:
                os.environ[name] = old
        os.chdir(before)


def prepare_library(
    library: Library,
    folder: Path,
    input_dir: str | os.PathLike[str] | None,
    init_file: str | os.PathLike[str] | None,
) -> None:
    """Point the library at *input_dir* for files the deck names (``sourcepath``, which
    the library reads where the program reads ``NGSPICE_INPUT_DIR``; manual 19.4.1.3), or
    at the private *folder*, and ``source`` the *init_file* the user asked for."""
    where = str(folder) if input_dir is None else input_folder(folder, input_dir)
    if not any(ch.isspace() or ch in "()" for ch in where):
        library.command(f"setcs sourcepath = ( {where} )")
    init = place_init_file(init_file, folder)
    if init is not None:
        library.command(f"source {init}")


def raise_failure(log: Sequence[str]) -> None:
    """Raise the error the log shows, if any."""
    error = diagnose.failure(diagnose.log_lines("\n".join(log)))
    if error is not None:
        raise error


def _finish(library: Library, command: str, deadline: float | None, timeout: float | None) -> None:
    """Run *command* in ngspice's background thread and wait for it, halting it at
    *deadline* or when a signal interrupts the wait."""
    library.start(command)
    try:
        finished = library.wait(deadline)
    except BaseException:
        library.halt()
        raise
    if not finished:
        library.halt()
        raise timed_out(timeout)
    if library.exited is not None:
        status, library.exited = library.exited, None
        raise SimulatorError(
            f"ngspice stopped itself (exit status {status})",
            hint="heatweave emit DECK -o hw.cir, then ngspice -b hw.cir, shows ngspice's "
            "own messages",
        )


def _read_plots(library: Library) -> tuple[Plot, ...]:
    """Every plot in memory except ``const``, oldest first, every vector copied out."""
    plot_names = [name for name in library.plots() if name != "const"]
    plot_names.reverse()
    kinds = [kind_from_plot_name(name) for name in plot_names]
    plots = []
    for plot_name, kind, name in zip(plot_names, kinds, number_plots(kinds), strict=True):
        vectors: dict[str, Array] = {}
        scale = None
        for raw in reversed(library.vector_names(plot_name)):
            found = library.vector(f"{plot_name}.{raw}")
            if found is None:
                continue
            vtype, values = _VECTOR_TYPES.get(found[0]), found[1]
            if scale is None and kind != "op" and is_scale_name(raw, vtype):
                scale = vector_name(raw, vtype, scale=True)
                vectors[scale] = np.ascontiguousarray(values.real, dtype=np.float64)
            else:
                vectors[vector_name(raw, vtype)] = values
        if scale is not None:
            vectors = {scale: vectors[scale], **vectors}
        plots.append(Plot(name=name, kind=kind, scale=scale, vectors=vectors))
    return tuple(plots)


def _forward_only(progress: Progress) -> Progress:
    """*progress*, told only of fractions past the furthest so far: ngspice's status line
    can step back a little (a rejected time step), and a progress bar should not."""
    furthest = [0.0]

    def forward(fraction: float) -> None:
        if fraction > furthest[0]:
            furthest[0] = fraction
            progress(fraction)

    return forward


def _deadline(timeout: float | None) -> float | None:
    return None if timeout is None else time.monotonic() + timeout


class SharedSimulator(Simulator):
    """Runs ngspice through its shared library; *library* overrides the path search."""

    name: ClassVar[str] = "shared"

    def __init__(self, library: str | os.PathLike[str] | None = None) -> None:
        self.library = library

    def load(self) -> Library:
        """Load the library now (it is loaded once per process); raises when it cannot.

        libngspice reads spinit and the first ``.spiceinit`` it finds (working folder,
        HOME) when it starts: it starts in an empty folder of its own, with an empty home.
        """
        with ENGINE_LOCK, working_folder(None) as empty, inside(empty.resolve()):
            return open_library(resolve_library(self.library))

    def run(
        self,
        deck: str,
        *,
        analyses: Sequence[str] = (),
        deck_analyses: bool = True,
        save: Sequence[str] = (),
        cwd: str | os.PathLike[str] | None = None,
        workdir: str | os.PathLike[str] | None = None,
        timeout: float | None = None,
        progress: Progress | None = None,
        init_file: str | os.PathLike[str] | None = None,
    ) -> SimResult:
        """See :meth:`Simulator.run`; progress comes from ngspice's status callback.

        The library started without any init file (:meth:`load`); *init_file* is
        ``source``d before the deck is loaded (its settings then stay for later runs of
        this process: one command, one set of options)."""
        script = command_script(analyses, deck_analyses, save)
        deadline = _deadline(timeout)
        with ENGINE_LOCK, working_folder(workdir) as folder:
            library = self.load()
            try:
                library.reset()
                library.log.clear()
                library.progress = None if progress is None else _forward_only(progress)
                with inside(folder.resolve(), cwd):
                    with stray_stderr(library.log):
                        prepare_library(library, folder.resolve(), cwd, init_file)
                        library.load_circuit(deck.splitlines())
                    raise_failure(library.log)
                    with stray_stderr(library.log):
                        for command in script:
                            if command.startswith("save "):
                                library.command(command)
                            else:
                                _finish(library, command, deadline, timeout)
                log = "\n".join(library.log)
                raise_failure(library.log)
                plots = _read_plots(library)
            finally:
                library.progress = None
                library.reset()
                library.log.clear()
        if progress is not None:
            progress(1.0)
        return diagnose.result(plots, log, self.name)

    @contextmanager
    def session(
        self,
        deck: str,
        *,
        cwd: str | os.PathLike[str],
        timeout: float | None = None,
        init_file: str | os.PathLike[str] | None = None,
    ) -> Iterator[Session]:
        """See :meth:`Simulator.session`; ngspice works in a private folder, as in
        :meth:`run`."""
        with ENGINE_LOCK, working_folder(None) as private:
            library = self.load()
            stray: list[str] = []
            folder = private.resolve()
            try:
                library.reset()
                library.log.clear()
                with inside(folder, cwd), stray_stderr(stray):
                    prepare_library(library, folder, cwd, init_file)
                    library.load_circuit(deck.splitlines())
                    raise_failure(library.log)
                    yield SharedSession(library, _deadline(timeout), timeout)
                raise_failure([line for line in stray if not PAUSED.search(line)])
            finally:
                library.reset()
                library.log.clear()


class SharedSession(Session):
    """A circuit loaded in libngspice whose transient runs window by window."""

    def __init__(self, library: Library, deadline: float | None, timeout: float | None) -> None:
        self._library = library
        self._deadline = deadline
        self._timeout = timeout
        self._started = False

    def advance(self, tran: str, until: float | None, land: Sequence[float] = ()) -> None:
        """See :meth:`Session.advance`; *land* goes to ngspice's breakpoint table
        (``ngSpice_SetBkpt``).  Before the start ngspice keeps them aside and adds them when
        the transient starts (manual 19.6.2.2)."""
        library = self._library
        library.command("delete all")
        if until is not None:
            library.command(f"stop when time > {until!r}")
        for instant in land:
            library.breakpoint(instant)
        command = "resume" if self._started else check_analysis(tran)
        self._started = True
        _finish(library, command, self._deadline, self._timeout)
        raise_failure([line for line in library.log if not PAUSED.search(line)])
        library.log.clear()

    def alter(self, device: str, value: float) -> None:
        """See :meth:`Session.alter`."""
        self._library.alter(device, value)

    def samples(self, name: str, start: int = 0, stop: int | None = None) -> FloatArray:
        """See :meth:`Session.samples`."""
        found = self._library.vector(name, start, stop)
        if found is None:
            raise SimulatorError(f"ngspice has no vector {name!r} during the co-simulation")
        return np.ascontiguousarray(found[1].real, dtype=np.float64)

    def read_rows(self, names: Sequence[str], start: int, out: FloatArray) -> None:
        """See :meth:`Session.read_rows`: each row copied once, straight from ngspice's
        memory (:meth:`Library.read_rows`); a vector it cannot copy so takes
        :meth:`samples`."""
        if len(names) != out.shape[0]:
            raise ValueError(f"{len(names)} names for {out.shape[0]} rows")
        for k in self._library.read_rows(names, start, out):
            super().read_rows(names[k : k + 1], start, out[k : k + 1])

    def node_voltages(self) -> dict[str, FloatArray]:
        """See :meth:`Session.node_voltages`."""
        return self._signals(VOLTAGE, "v(")

    def branch_currents(self) -> dict[str, FloatArray]:
        """See :meth:`Session.branch_currents`."""
        return self._signals(CURRENT, "i(")

    def signals_at(self, at: npt.NDArray[np.intp]) -> SignalSummary:
        """See :meth:`Session.signals_at`; read through views of ngspice's memory
        (:meth:`Library.view`), with no copy of the whole vectors."""
        voltages = self._signals(VOLTAGE, "v(", copy=False)
        return summarise((voltages, self._signals(CURRENT, "i(", copy=False)), at)

    def _signals(self, kind: str, head: str, copy: bool = True) -> dict[str, FloatArray]:
        """The real vectors of type *kind* named ``head...)``, by the name inside; copies,
        or views good until ngspice runs again."""
        library = self._library
        plot = library.current_plot()
        out: dict[str, FloatArray] = {}
        for raw in library.vector_names(plot):
            found = library.vector(f"{plot}.{raw}") if copy else library.view(f"{plot}.{raw}")
            if found is None or _VECTOR_TYPES.get(found[0]) != kind:
                continue
            if np.iscomplexobj(found[1]):
                continue
            name = vector_name(raw, kind)
            if name.startswith(head) and name.endswith(")"):
                out[name[len(head) : -1]] = np.asarray(found[1], dtype=np.float64)
        return out

    def stats(self) -> str:
        """See :meth:`Session.stats`."""
        library = self._library
        before = len(library.log)
        library.command("rusage time totiter traniter tranpoints trantime")
        return "\n".join(line.strip() for line in library.log[before:] if line.strip())

    @property
    def log(self) -> str:
        """See :meth:`Session.log`."""
        return "\n".join(self._library.log)
