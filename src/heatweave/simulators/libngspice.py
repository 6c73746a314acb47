"""A small binding of libngspice's documented C interface (ngspice manual, chapter "ngspice as
shared library"; ``sharedspice.h``), through :mod:`ctypes`.

Only what heatweave uses is bound: ``ngSpice_Init`` with the callbacks for output
(``SendChar``), status (``SendStat``), exit requests (``ControlledExit``) and the background
thread (``BGThreadRunning``); ``ngSpice_Command``, ``ngSpice_Circ``, ``ngSpice_running``,
``ngSpice_CurPlot``, ``ngSpice_AllPlots``, ``ngSpice_AllVecs``, ``ngGet_Vec_Info`` and
``ngSpice_SetBkpt``.  No
data callbacks are registered (``SendData``/``SendInitData`` are NULL), so ngspice does not
call into Python at every time step.

libngspice keeps one simulator state per process, so :func:`open_library` returns the one
:class:`Library` for a path.  Everything above this module (the shared back end, the
co-simulation) talks to ngspice through :class:`Library`'s methods only.
"""

from __future__ import annotations

import ctypes
import os
import threading
import time
from collections.abc import Callable, Sequence
from typing import Any

import numpy as np
import numpy.typing as npt

from heatweave.errors import LibngspiceMissingError, SimulationTimeoutError

#: How often (s) a wait for the background thread wakes to look at the clock and signals.
POLL = 0.02
#: How long (s) a halted background thread may take to stop before it is given up on.
HALT_GRACE = 2.0

_ENCODING = "utf-8"
_DOUBLE = ctypes.sizeof(ctypes.c_double)

_SendChar = ctypes.CFUNCTYPE(ctypes.c_int, ctypes.c_char_p, ctypes.c_int, ctypes.c_void_p)
_SendStat = _SendChar
_ControlledExit = ctypes.CFUNCTYPE(
    ctypes.c_int, ctypes.c_int, ctypes.c_bool, ctypes.c_bool, ctypes.c_int, ctypes.c_void_p
)
_BGThreadRunning = ctypes.CFUNCTYPE(ctypes.c_int, ctypes.c_bool, ctypes.c_int, ctypes.c_void_p)


class _Complex(ctypes.Structure):
    _fields_ = [("cx_real", ctypes.c_double), ("cx_imag", ctypes.c_double)]


class _VectorInfo(ctypes.Structure):
    """``struct vector_info`` of sharedspice.h."""

    _fields_ = [
        ("v_name", ctypes.c_char_p),
        ("v_type", ctypes.c_int),
        ("v_flags", ctypes.c_short),
        ("v_realdata", ctypes.POINTER(ctypes.c_double)),
        ("v_compdata", ctypes.POINTER(_Complex)),
        ("v_length", ctypes.c_int),
    ]


class _VectorAddresses(ctypes.Structure):
    """``struct vector_info`` with its data pointers as plain addresses (for copying)."""

    _fields_ = [
        ("v_name", ctypes.c_void_p),
        ("v_type", ctypes.c_int),
        ("v_flags", ctypes.c_short),
        ("v_realdata", ctypes.c_void_p),
        ("v_compdata", ctypes.c_void_p),
        ("v_length", ctypes.c_int),
    ]


_Strings = ctypes.POINTER(ctypes.c_char_p)


def text_of(raw: bytes | None) -> str:
    """ngspice's bytes as text: UTF-8, anything else replaced (ngspice may print any byte)."""
    return "" if raw is None else raw.decode(_ENCODING, "replace")


def _strings(array: Any) -> list[str]:
    """The strings of a NULL-terminated ``char **`` (an empty list for a NULL array)."""
    if not array:
        return []
    out = []
    index = 0
    while array[index] is not None:
        out.append(text_of(array[index]))
        index += 1
    return out


class Library:
    """One loaded and initialised libngspice.

    ``log`` collects what ngspice prints (one entry a line, its ``stdout``/``stderr``
    prefix removed); ``progress`` hears the fraction done from ngspice's status line.
    """

    def __init__(self, path: str) -> None:
        self._lib = _loadable(path)
        self._bind()
        self.path = path
        self.log: list[str] = []
        self.progress: Callable[[float], None] | None = None
        self.exited: int | None = None
        #: True once a background run would not stop: the library cannot be used again.
        self.stuck = False
        self._ended = threading.Event()
        # ctypes callbacks must stay referenced as long as ngspice may call them.
        self._callbacks = (
            _SendChar(self._send_char),
            _SendStat(self._send_stat),
            _ControlledExit(self._controlled_exit),
            _BGThreadRunning(self._thread_running),
        )
        send_char, send_stat, controlled_exit, thread_running = self._callbacks
        status = self._lib.ngSpice_Init(
            send_char, send_stat, controlled_exit, None, None, thread_running, None
        )
        if status != 0:
            raise LibngspiceMissingError(
                f"the ngspice shared library {path} could not be started (status {status})",
                hint=MISSING_HINT,
            )

    def _bind(self) -> None:
        lib = self._lib
        lib.ngSpice_Init.restype = ctypes.c_int
        lib.ngSpice_Init.argtypes = [
            _SendChar, _SendStat, _ControlledExit, ctypes.c_void_p, ctypes.c_void_p,
            _BGThreadRunning, ctypes.c_void_p,
        ]  # fmt: skip
        lib.ngSpice_Command.restype = ctypes.c_int
        lib.ngSpice_Command.argtypes = [ctypes.c_char_p]
        lib.ngSpice_Circ.restype = ctypes.c_int
        lib.ngSpice_Circ.argtypes = [_Strings]
        lib.ngSpice_running.restype = ctypes.c_bool
        lib.ngSpice_running.argtypes = []
        lib.ngSpice_CurPlot.restype = ctypes.c_char_p
        lib.ngSpice_CurPlot.argtypes = []
        lib.ngSpice_AllPlots.restype = _Strings
        lib.ngSpice_AllPlots.argtypes = []
        lib.ngSpice_AllVecs.restype = _Strings
        lib.ngSpice_AllVecs.argtypes = [ctypes.c_char_p]
        lib.ngGet_Vec_Info.restype = ctypes.POINTER(_VectorInfo)
        lib.ngGet_Vec_Info.argtypes = [ctypes.c_char_p]
        lib.ngSpice_SetBkpt.restype = ctypes.c_bool
        lib.ngSpice_SetBkpt.argtypes = [ctypes.c_double]
        # The same function once more, its answer read as addresses (lib[name] is a new
        # function object, so the binding above keeps its own types).
        self._addresses = lib["ngGet_Vec_Info"]
        self._addresses.restype = ctypes.POINTER(_VectorAddresses)
        self._addresses.argtypes = [ctypes.c_char_p]

    # --- callbacks (called from ngspice, possibly in its background thread) -----------

    def _send_char(self, message: bytes | None, ident: int, user: Any) -> int:
        _, _, text = text_of(message).partition(" ")
        self.log.append(text)
        return 0

    def _send_stat(self, message: bytes | None, ident: int, user: Any) -> int:
        text = text_of(message)
        head, _, percent = text.rpartition(":")
        if self.progress is not None and head:
            try:
                fraction = float(percent.strip().rstrip("%")) / 100.0
            except ValueError:
                return 0
            self.progress(min(max(fraction, 0.0), 1.0))
        return 0

    def _controlled_exit(
        self, status: int, unload: bool, on_quit: bool, ident: int, user: Any
    ) -> int:
        self.exited = status
        return status

    def _thread_running(self, no_thread: bool, ident: int, user: Any) -> int:
        # The flag is false while the background thread runs and true once it has ended
        # (manual 19.3.3.6, and what ngspice 39 does; 19.3.2.1 words it the other way).
        if no_thread:
            self._ended.set()
        return 0

    # --- commands -------------------------------------------------------------------

    def command(self, text: str) -> int:
        """Run one ngspice command in the caller's thread (``ngSpice_Command``)."""
        return int(self._lib.ngSpice_Command(text.encode(_ENCODING, "surrogateescape")))

    def load_circuit(self, lines: Sequence[str]) -> None:
        """Hand a deck to ngspice line by line (``ngSpice_Circ``).

        ngspice takes the deck as complete only at an ``.end`` line (a file needs none); a
        second ``.end`` after the deck's own is harmless.
        """
        self.usable()
        encoded = [line.encode(_ENCODING, "surrogateescape") for line in lines]
        encoded.append(b".end")
        array = (ctypes.c_char_p * (len(encoded) + 1))(*encoded, None)
        self._lib.ngSpice_Circ(ctypes.cast(array, _Strings))

    def running(self) -> bool:
        """True while ngspice's background thread runs (``ngSpice_running``)."""
        return bool(self._lib.ngSpice_running())

    def usable(self) -> None:
        """Raise when an earlier run would not stop: ngspice is still busy with it."""
        if self.stuck:
            raise SimulationTimeoutError(
                "ngspice is still busy with a run it would not stop, so no other can start",
                hint="give the run a longer --timeout, or run each deck in its own process",
            )

    def start(self, command: str) -> None:
        """Run *command* in ngspice's background thread (``bg_`` prefix); see :meth:`wait`."""
        self.usable()
        self._ended.clear()
        self.command("bg_" + command)

    def wait(self, deadline: float | None, idle_grace: float = 1.0) -> bool:
        """Wait for the background command to end; ``False`` when *deadline* (monotonic
        clock) passed first.  Wakes every :data:`POLL` s, so signals reach Python."""
        idle_since: float | None = None
        while True:
            ended = self._ended.wait(POLL)
            busy = self.running()
            if not busy and ended:
                return True
            if ended:
                # The word came (perhaps late, from an earlier thread) while ngspice still
                # runs: sleep instead of waiting on a set event, which would spin.
                time.sleep(POLL)
            now = time.monotonic()
            if deadline is not None and now > deadline:
                return False
            if busy:
                idle_since = None
            elif idle_since is None:
                idle_since = now
            elif now - idle_since > idle_grace:
                return True

    def halt(self) -> bool:
        """Stop the background thread (``bg_halt``); ``False`` if it would not stop
        within :data:`HALT_GRACE` (some loops inside ngspice never look at the request):
        the library is then marked :attr:`stuck`."""
        if self.stuck:
            return False
        if not self.running():
            return True
        self.command("bg_halt")
        end = time.monotonic() + HALT_GRACE
        while self.running():
            if time.monotonic() > end:
                self.stuck = True
                return False
            time.sleep(POLL)
        return True

    def alter(self, device: str, value: float) -> None:
        """Set an element's value between two parts of a paused transient (``alter``)."""
        self.command(f"alter {device} = {float(value)!r}")

    def breakpoint(self, time: float) -> bool:
        """Make a paused transient land on *time* (``ngSpice_SetBkpt``, manual 19.6.2.2: a
        time after the current one, set while the background thread is not running);
        ``False`` when ngspice refused it."""
        return bool(self._lib.ngSpice_SetBkpt(float(time)))

    def reset(self) -> None:
        """Forget every circuit and plot, so that the next deck starts from nothing (a
        stuck library is left alone: :meth:`usable` refuses its next run)."""
        if not self.halt():
            return
        self.command("destroy all")
        self.command("remcirc")

    # --- results ----------------------------------------------------------------------

    def current_plot(self) -> str:
        """The name of the current plot (``ngSpice_CurPlot``)."""
        return text_of(self._lib.ngSpice_CurPlot())

    def plots(self) -> list[str]:
        """Every plot in memory, newest first (``ngSpice_AllPlots``)."""
        return _strings(self._lib.ngSpice_AllPlots())

    def vector_names(self, plot: str) -> list[str]:
        """The vectors of *plot*, newest first (``ngSpice_AllVecs``)."""
        return _strings(self._lib.ngSpice_AllVecs(plot.encode(_ENCODING, "surrogateescape")))

    def vector(
        self, name: str, start: int = 0, stop: int | None = None
    ) -> tuple[int, npt.NDArray[np.float64] | npt.NDArray[np.complex128]] | None:
        """``(ngspice vector type, copy of values [start:stop])`` of vector *name* (``plot.vec``
        or a name in the current plot), or ``None`` when there is no such vector."""
        pointer = self._lib.ngGet_Vec_Info(name.encode(_ENCODING, "surrogateescape"))
        if not pointer:
            return None
        info = pointer.contents
        length = int(info.v_length)
        end = length if stop is None else min(stop, length)
        begin = min(max(start, 0), end)
        if info.v_compdata:
            raw = ctypes.cast(info.v_compdata, ctypes.POINTER(ctypes.c_double))
            pairs = np.ctypeslib.as_array(raw, shape=(2 * length,)) if length else np.zeros(0)
            values = pairs.view(np.complex128)[begin:end].copy()
            return int(info.v_type), values
        if not info.v_realdata or length == 0:
            return int(info.v_type), np.zeros(0)
        data = np.ctypeslib.as_array(info.v_realdata, shape=(length,))
        return int(info.v_type), np.array(data[begin:end], dtype=np.float64)

    def view(
        self, name: str
    ) -> tuple[int, npt.NDArray[np.float64] | npt.NDArray[np.complex128]] | None:
        """What :meth:`vector` gives for all samples, but the values are a read-only view
        of ngspice's own memory, not a copy: good only until ngspice next runs or frees
        the vector, so to be read at once (the co-simulation's summary of every signal)."""
        pointer = self._addresses(name.encode(_ENCODING, "surrogateescape"))
        if not pointer:
            return None
        info = pointer.contents
        length = int(info.v_length)
        values: npt.NDArray[Any]
        if info.v_compdata and length:
            pairs = (ctypes.c_double * (2 * length)).from_address(info.v_compdata)
            values = np.ctypeslib.as_array(pairs).view(np.complex128)
        elif info.v_realdata and length and not info.v_compdata:
            values = np.ctypeslib.as_array((ctypes.c_double * length).from_address(info.v_realdata))
        else:
            values = np.zeros(0, dtype=np.complex128 if info.v_compdata else np.float64)
        values.flags.writeable = False
        return int(info.v_type), values

    def read_rows(
        self, names: Sequence[str], start: int, out: npt.NDArray[np.float64]
    ) -> list[int]:
        """Copy samples ``start .. start + out.shape[1]`` of each real vector of *names*
        into the rows of *out* (float64, C order, a row per name), straight from ngspice's
        memory: the co-simulation reads hundreds of vectors at every window.  Returns the
        positions of the names it could not copy so (no such real vector, fewer samples),
        their rows untouched."""
        if out.dtype != np.float64 or not out.flags.c_contiguous or start < 0:
            return list(range(len(names)))
        count = int(out.shape[1])
        base, stride, size = int(out.ctypes.data), int(out.strides[0]), count * _DOUBLE
        offset = start * _DOUBLE
        locate = self._addresses
        missed = []
        for k, name in enumerate(names):
            pointer = locate(name.encode(_ENCODING, "surrogateescape"))
            info = pointer.contents if pointer else None
            usable = info is not None and info.v_realdata and not info.v_compdata
            if info is None or not usable or start + count > info.v_length:
                missed.append(k)
            elif size:
                ctypes.memmove(base + k * stride, info.v_realdata + offset, size)
        return missed


MISSING_HINT = (
    "install it with 'apt-get install libngspice0-dev', set HEATWEAVE_LIBNGSPICE to the "
    "library's path, or use --backend batch"
)


def _loadable(path: str) -> ctypes.CDLL:
    """The library at *path* with every function heatweave binds, or the error saying why not."""
    try:
        lib = ctypes.CDLL(path)
        for name in _FUNCTIONS:
            getattr(lib, name)
    except (OSError, AttributeError) as exc:
        raise LibngspiceMissingError(
            f"the ngspice shared library {path} cannot be loaded: {exc}", hint=MISSING_HINT
        ) from exc
    return lib


_FUNCTIONS = (
    "ngSpice_Init", "ngSpice_Command", "ngSpice_Circ", "ngSpice_running", "ngSpice_CurPlot",
    "ngSpice_AllPlots", "ngSpice_AllVecs", "ngGet_Vec_Info",
)  # fmt: skip
_LOCK = threading.Lock()
_OPEN: dict[str, Library] = {}


def open_library(path: str) -> Library:
    """The process's one :class:`Library`, loaded from *path* on first use.

    libngspice holds one state per process: a second, different library is refused.
    """
    key = os.path.realpath(path) if os.sep in path else path
    with _LOCK:
        if key in _OPEN:
            return _OPEN[key]
        if _OPEN:
            _loadable(path)
            raise LibngspiceMissingError(
                f"another ngspice library is already loaded ({next(iter(_OPEN.values())).path})",
                hint="use one library per process",
            )
        library = Library(path)
        _OPEN[key] = library
        return library


def busy() -> bool:
    """True when a library of this process runs a thread that would not stop; the
    process should then end with :func:`os._exit`, since C's exit handlers would run
    beside it."""
    return any(library.stuck for library in _OPEN.values())
