"""Ending cleanly: signals become exceptions, child processes die with their parent.

A command that is interrupted (Ctrl-C), terminated (SIGTERM, SIGHUP) or killed must leave
no ngspice process, worker or temporary folder behind:

* :func:`catch_termination` turns SIGTERM and SIGHUP into :class:`Terminated` in the main
  thread, as Python already turns SIGINT into :class:`KeyboardInterrupt`; the exception
  unwinds through every ``finally`` (ngspice halted or killed, folders removed);
* :func:`die_with_parent` (Linux) asks the kernel to signal a process when its parent
  dies, so that a SIGKILL of the command, which no handler sees, still ends its children;
* :func:`leave` exits with the status, without running C exit handlers beside an ngspice
  thread that would not stop.
"""

from __future__ import annotations

import contextlib
import ctypes
import os
import signal
import sys
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from types import FrameType
from typing import NoReturn

#: ``prctl`` option asking for a signal when the parent dies (linux/prctl.h).
_PR_SET_PDEATHSIG = 1
#: The signals a command ends on, besides SIGINT.
ENDING = (signal.SIGTERM, signal.SIGHUP)


class Terminated(BaseException):
    """The process was asked to end by *signum* (a BaseException, like KeyboardInterrupt,
    so that no ``except Exception`` stops it)."""

    def __init__(self, signum: int) -> None:
        super().__init__(f"terminated by signal {signum}")
        self.signum = signum

    @property
    def exit_code(self) -> int:
        """The shell's convention: 128 plus the signal number (143 for SIGTERM)."""
        return 128 + self.signum


def ignore_further() -> None:
    """Ignore SIGINT, SIGTERM and SIGHUP from now on: the process is ending, and a second
    signal must not cut its clean-up short (a pool's manager, say, signals its workers
    again)."""
    for signum in (signal.SIGINT, *ENDING):
        # A handler that does nothing, not SIG_IGN: a signal already on its way would
        # otherwise raise "ignored due to race condition" in the middle of the clean-up.
        signal.signal(signum, _nothing)


def _nothing(signum: int, frame: FrameType | None) -> None:
    return None


def _raise(signum: int, frame: FrameType | None) -> None:
    ignore_further()
    if signum == signal.SIGINT:
        raise KeyboardInterrupt
    raise Terminated(signum)


Handlers = dict[int, Callable[[int, FrameType | None], object] | int | None]


def catch_termination(handler: Callable[[int, FrameType | None], None] = _raise) -> Handlers:
    """SIGINT, SIGTERM and SIGHUP call *handler* (default: raise :class:`KeyboardInterrupt`
    or :class:`Terminated`, once); only the main thread can install handlers, elsewhere this
    does nothing.  An ignored SIGINT (a job started with ``nohup`` or ``&``) stays ignored.
    Returns the handlers replaced, for :func:`restore`."""
    if threading.current_thread() is not threading.main_thread():
        return {}

    def deferrable(signum: int, frame: FrameType | None) -> None:
        if _held is not None:  # the main thread is inside signals_deferred(): later
            _held.append(signum)
            return
        handler(signum, frame)

    previous: Handlers = {}
    for signum in (*ENDING, signal.SIGINT):
        if signum == signal.SIGINT and signal.getsignal(signum) is signal.SIG_IGN:
            continue
        previous[signum] = signal.signal(signum, deferrable)
    return previous


def restore(previous: Handlers) -> None:
    """Put back the handlers :func:`catch_termination` replaced (a command run inside
    another program leaves its handlers as it found them)."""
    for signum, handler in previous.items():
        signal.signal(signum, handler)


#: Signals that reached a :func:`catch_termination` handler while the main thread was
#: inside :func:`signals_deferred` (``None`` outside it).
_held: list[int] | None = None


@contextmanager
def signals_deferred() -> Iterator[None]:
    """Hold SIGINT, SIGTERM and SIGHUP back while the body runs (a child process being
    started, a temporary folder being made and recorded), so that the exception they
    raise comes before or after it, never half-way.  A held signal arrives at the end.

    The thread's signal mask holds them back from this thread and from the processes it
    starts; but the kernel hands a signal sent to the process to any thread that does not
    block it (a numerical library's).  Python then runs the handler in the main thread when
    that thread next takes the interpreter lock, which may be inside the block: the
    handlers :func:`catch_termination` installs keep such a signal for the end of the
    outermost block in the main thread.  A brief sleep at the end takes the lock again, so
    that the handler runs then, not after the next long wait (a child's output, say)."""
    global _held
    blocked = {signal.SIGINT, *ENDING}
    outermost = _held is None and threading.current_thread() is threading.main_thread()
    if outermost:
        _held = []
    signal.pthread_sigmask(signal.SIG_BLOCK, blocked)
    try:
        yield
    finally:
        signal.pthread_sigmask(signal.SIG_UNBLOCK, blocked)
        time.sleep(0)  # lets go of the interpreter lock: a pending handler runs on return
        if outermost:
            held, _held = _held or [], None
            if held:
                signal.raise_signal(held[0])  # to the handler in place now


def die_with_parent(signum: int = signal.SIGKILL) -> None:
    """Have the kernel send *signum* to this process when its parent dies (Linux
    ``PR_SET_PDEATHSIG``; elsewhere nothing).  Safe as a ``preexec_fn``: it starts no
    process and loads nothing (the C library was bound at import).  A child started under
    :func:`signals_deferred` keeps SIGINT, SIGTERM and SIGHUP held back (no Python code may
    run in it between fork and exec); heatweave ends its ngspice with SIGKILL."""
    if _PRCTL is not None:
        _PRCTL(_PR_SET_PDEATHSIG, signum, 0, 0, 0)


def _prctl() -> Callable[..., int] | None:
    """libc's ``prctl``, bound once in the parent (``ctypes.CDLL(None)``: the symbols the
    process already has), or ``None`` off Linux."""
    if not sys.platform.startswith("linux"):
        return None
    try:
        function: Callable[..., int] = ctypes.CDLL(None, use_errno=True).prctl
    except (OSError, AttributeError):
        return None
    return function


_PRCTL = _prctl()


def leave(code: int) -> NoReturn:
    """Exit with *code*.  When a simulator thread of this process would not stop (see
    :func:`heatweave.simulators.libngspice.busy`), the streams are flushed and the process
    ends at once, since C's exit handlers would run beside that thread."""
    engine = sys.modules.get("heatweave.simulators.libngspice")
    busy = getattr(engine, "busy", None)
    if busy is not None and busy():
        for stream in (sys.stdout, sys.stderr):
            with contextlib.suppress(OSError, ValueError):
                stream.flush()
        os._exit(code)
    sys.exit(code)
