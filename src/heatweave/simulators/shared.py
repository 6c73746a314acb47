"""The shared back end: PySpice's ``NgSpiceShared`` driving libngspice inside this process.

The library is found without the user setting paths: ``HEATWEAVE_LIBNGSPICE`` if set, else
Debian's ``/usr/lib/x86_64-linux-gnu/libngspice.so.0``, else whatever
:func:`ctypes.util.find_library` finds.  PySpice only looks for ``libngspice.so``, so its
``LIBRARY_PATH`` is set before the one instance is created.

libngspice keeps one state per process, so runs are serialised by a lock and every run ends
with ``destroy all`` and ``remcirc``: the next deck starts from nothing.  ngspice's output
arrives through the ``send_char`` callback and becomes the result's log; PySpice's logging
(its version warning, its copies of ngspice's stderr) is silenced while we call it.
Analyses run in ngspice's background thread (``bg_`` commands) so a timeout can halt them.
"""

from __future__ import annotations

import ctypes
import ctypes.util
import logging
import os
import re
import sys
import tempfile
import threading
import time
from collections.abc import Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any, ClassVar

import numpy as np

from heatweave import files
from heatweave.errors import LibngspiceMissingError

from . import diagnose
from .base import (
    Array,
    Plot,
    Progress,
    SimResult,
    Simulator,
    command_script,
    timed_out,
    working_folder,
)
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
MISSING_HINT = (
    f"install it with 'apt-get install libngspice0-dev', set {ENV_LIBRARY} to the library's "
    "path, or use the batch back end"
)
# ngspice's simulation_type enum (sharedspice.h): the ones naming.py distinguishes.
_VECTOR_TYPES = {1: TIME, 2: FREQUENCY, 3: VOLTAGE, 4: CURRENT}
_PERCENT = re.compile(r"(\d+(?:\.\d+)?)\s*%")
_IDLE_GRACE = 1.0
_POLL = 0.02

ENGINE_LOCK = threading.RLock()
_LOADED: dict[str, Any] = {}


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
def quiet_pyspice() -> Iterator[None]:
    """PySpice's loggers off, so its warnings and ngspice echoes stay out of user output."""
    loggers = [logging.getLogger("PySpice")] + [
        logging.getLogger(name)
        for name in list(logging.root.manager.loggerDict)
        if name.startswith("PySpice.")
    ]
    previous = [logger.disabled for logger in loggers]
    for logger in loggers:
        logger.disabled = True
    try:
        yield
    finally:
        for logger, state in zip(loggers, previous, strict=True):
            logger.disabled = state


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
def inside(folder: Path) -> Iterator[None]:
    """Run the body with *folder* as the working directory (ngspice resolves includes
    against it), restoring the old one afterwards."""
    before = os.getcwd()
    os.chdir(folder)
    try:
        yield
    finally:
        os.chdir(before)


def _engine(path: str) -> Any:
    """The process's one PySpice ngspice instance for library *path*."""
    if path in _LOADED:
        return _LOADED[path]
    try:
        ctypes.CDLL(path)
    except OSError as exc:
        raise LibngspiceMissingError(
            f"the ngspice shared library {path} cannot be loaded: {exc}", hint=MISSING_HINT
        ) from exc
    if _LOADED:
        raise LibngspiceMissingError(
            f"another ngspice library is already loaded ({next(iter(_LOADED))})",
            hint="use one library per process",
        )
    try:
        from PySpice.Spice.NgSpice.Shared import NgSpiceShared, ffi
    except ImportError as exc:
        raise LibngspiceMissingError(
            f"PySpice is not installed: {exc}", hint="pip install PySpice"
        ) from exc

    class Engine(NgSpiceShared):  # type: ignore[misc]
        """NgSpiceShared whose callbacks feed a log and a progress function."""

        def __init__(self, **kwargs: Any) -> None:
            # The callbacks fire during PySpice's own __init__ already.
            self.heatweave_log: list[str] = []
            self.heatweave_progress: Progress | None = None
            self.heatweave_done = threading.Event()
            self.heatweave_ffi = ffi
            super().__init__(**kwargs)

        def send_char(self, message: str, ngspice_id: int) -> int:
            _, _, text = message.partition(" ")
            self.heatweave_log.append(text)
            return 0

        def send_stat(self, message: str, ngspice_id: int) -> int:
            match = _PERCENT.search(message)
            if match and self.heatweave_progress is not None:
                self.heatweave_progress(min(float(match.group(1)) / 100.0, 1.0))
            return 0

        @staticmethod
        def _background_thread_running(no_thread: bool, ngspice_id: int, user_data: Any) -> int:
            # PySpice's own version returns None, which cffi reports on stderr.  The flag is
            # false while the background thread runs, true once it has ended (manual
            # 19.3.3.6, and what ngspice 39 does; 19.3.2.1 words it the other way round).
            self = ffi.from_handle(user_data)
            if no_thread:
                self.heatweave_done.set()
            return 0

    Engine.LIBRARY_PATH = path.replace("{", "{{").replace("}", "}}")
    with quiet_pyspice():
        try:
            engine = Engine(ngspice_id=0, send_data=False)
        except (OSError, NameError) as exc:
            raise LibngspiceMissingError(
                f"the ngspice shared library {path} could not be started: {exc}",
                hint=MISSING_HINT,
            ) from exc
    _LOADED[path] = engine
    return engine


class SharedSimulator(Simulator):
    """Runs ngspice through its shared library; *library* overrides the path search."""

    name: ClassVar[str] = "shared"

    def __init__(self, library: str | os.PathLike[str] | None = None) -> None:
        self.library = library

    def load(self) -> Any:
        """Load the library now (it is loaded once per process); raises when it cannot."""
        with ENGINE_LOCK:
            return _engine(resolve_library(self.library))

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
    ) -> SimResult:
        """See :meth:`Simulator.run`; progress comes from ngspice's status callback."""
        script = command_script(analyses, deck_analyses, save)
        with ENGINE_LOCK, working_folder(workdir) as folder, quiet_pyspice():
            engine = self.load()
            deadline = None if timeout is None else time.monotonic() + timeout
            try:
                _command(engine, "destroy all")
                engine.heatweave_log.clear()
                engine.heatweave_progress = progress
                with inside(Path(cwd) if cwd is not None else folder):
                    with stray_stderr(engine.heatweave_log):
                        load_deck(engine, deck)
                    raise_failure(engine.heatweave_log)
                    with stray_stderr(engine.heatweave_log):
                        for command in script:
                            _run_command(engine, command, deadline, timeout)
                log = "\n".join(engine.heatweave_log)
                raise_failure(engine.heatweave_log)
                plots = _read_plots(engine)
            finally:
                engine.heatweave_progress = None
                _command(engine, "destroy all")
                _command(engine, "remcirc")
                engine.heatweave_log.clear()
        if progress is not None:
            progress(1.0)
        return diagnose.result(plots, log, self.name)


def raise_failure(log: list[str]) -> None:
    """Raise the error the log shows, if any."""
    error = diagnose.failure(diagnose.log_lines("\n".join(log)))
    if error is not None:
        raise error


def _command(engine: Any, command: str) -> int:
    return int(engine._ngspice_shared.ngSpice_Command(command.encode("utf-8")))


def load_deck(engine: Any, deck: str) -> None:
    """Hand *deck* to the shared library line by line (``ngSpice_Circ``)."""
    ffi = engine.heatweave_ffi
    keep = [ffi.new("char[]", files.encode(line)) for line in deck.splitlines()]
    # ngSpice_Circ takes the deck as complete only at an ``.end`` line (a file does not need
    # one); a second ``.end`` after the deck's own is harmless.
    keep += [ffi.new("char[]", b".end"), ffi.NULL]
    engine._ngspice_shared.ngSpice_Circ(ffi.new("char *[]", keep))


def _run_command(engine: Any, command: str, deadline: float | None, timeout: float | None) -> None:
    """One script command; analyses in ngspice's background thread, watched for *deadline*."""
    if command.startswith("save "):
        _command(engine, command)
        return
    engine.heatweave_done.clear()
    _command(engine, "bg_" + command)
    idle_since = None
    lib = engine._ngspice_shared
    while True:
        finished = engine.heatweave_done.wait(_POLL)
        if not lib.ngSpice_running():
            if finished:
                return
        elif finished:
            # The thread has said it ended (or an earlier one's word came late) while ngspice
            # still runs: wait without the event, which would return at once and spin.
            time.sleep(_POLL)
        now = time.monotonic()
        if deadline is not None and now > deadline:
            _command(engine, "bg_halt")
            engine.heatweave_done.wait(5.0)
            raise timed_out(timeout)
        if lib.ngSpice_running():
            idle_since = None
        elif idle_since is None:
            idle_since = now
        elif now - idle_since > _IDLE_GRACE:
            return


def c_strings(ffi: Any, array: Any) -> list[str]:
    """The strings of a NULL-terminated C array of ``char *`` (vector and plot names)."""
    names = []
    index = 0
    while array[index] != ffi.NULL:
        names.append(ffi.string(array[index]).decode("utf-8", "replace"))
        index += 1
    return names


def _read_plots(engine: Any) -> tuple[Plot, ...]:
    """Every plot in memory except ``const``, oldest first, every vector copied out."""
    ffi = engine.heatweave_ffi
    lib = engine._ngspice_shared
    plot_names = [name for name in c_strings(ffi, lib.ngSpice_AllPlots()) if name != "const"]
    plot_names.reverse()
    kinds = [kind_from_plot_name(name) for name in plot_names]
    plots = []
    for plot_name, kind, name in zip(plot_names, kinds, number_plots(kinds), strict=True):
        vectors: dict[str, Array] = {}
        scale = None
        for raw in reversed(c_strings(ffi, lib.ngSpice_AllVecs(plot_name.encode("utf-8")))):
            info = lib.ngGet_Vec_Info(f"{plot_name}.{raw}".encode())
            vtype = _VECTOR_TYPES.get(int(info.v_type))
            values = _values(ffi, info)
            if scale is None and kind != "op" and is_scale_name(raw, vtype):
                scale = vector_name(raw, vtype, scale=True)
                vectors[scale] = np.ascontiguousarray(values.real, dtype=np.float64)
            else:
                vectors[vector_name(raw, vtype)] = values
        if scale is not None:
            vectors = {scale: vectors[scale], **vectors}
        plots.append(Plot(name=name, kind=kind, scale=scale, vectors=vectors))
    return tuple(plots)


def _values(ffi: Any, info: Any) -> Array:
    length = int(info.v_length)
    if info.v_compdata != ffi.NULL:
        buffer = ffi.buffer(info.v_compdata, length * 16)
        return np.frombuffer(buffer, dtype=np.complex128).copy()
    buffer = ffi.buffer(info.v_realdata, length * 8)
    return np.frombuffer(buffer, dtype=np.float64).copy()
