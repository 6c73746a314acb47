"""Simulator back ends: run a prepared deck with ngspice and return immutable results.

``get_simulator("shared")`` drives libngspice in this process (our own ctypes binding of its
documented C interface, :mod:`.libngspice`),
``get_simulator("batch")`` runs ``ngspice -b`` in a subprocess, and ``"auto"`` (the default)
picks the shared library when it loads and the batch program otherwise.  Both return the
same :class:`SimResult` for the same deck.  The co-simulation's pause/alter/resume is
:meth:`Simulator.session` (shared library only).  Nothing outside this package touches ngspice.
"""

from __future__ import annotations

import os

from heatweave.errors import LibngspiceMissingError, UsageError

from .base import Plot, Progress, Session, SimResult, Simulator, timed_out
from .batch import BatchSimulator
from .shared import SharedSimulator

BACKENDS = ("auto", "shared", "batch")

__all__ = [
    "BACKENDS",
    "BatchSimulator",
    "Plot",
    "Progress",
    "Session",
    "SharedSimulator",
    "SimResult",
    "Simulator",
    "get_simulator",
    "timed_out",
]


def get_simulator(
    name: str = "auto",
    *,
    executable: str | None = None,
    library: str | os.PathLike[str] | None = None,
) -> Simulator:
    """The back end called *name*: ``"shared"``, ``"batch"`` or ``"auto"``.

    ``executable`` is the ngspice program for the batch back end (default:
    ``HEATWEAVE_NGSPICE``, then ``ngspice`` on the PATH), ``library`` the libngspice
    path for the shared one (default: ``HEATWEAVE_LIBNGSPICE``, then the usual places).
    ``"shared"`` loads the library at once, so a missing one is reported here.
    """
    if name == "batch":
        return BatchSimulator(executable)
    if name == "shared":
        simulator = SharedSimulator(library)
        simulator.load()
        return simulator
    if name == "auto":
        try:
            return get_simulator("shared", library=library)
        except LibngspiceMissingError:
            return BatchSimulator(executable)
    raise UsageError(
        f"unknown simulator back end {name!r}", hint="choose one of: " + ", ".join(BACKENDS)
    )
