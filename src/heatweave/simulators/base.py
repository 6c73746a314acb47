"""The interface every simulator back end offers, and the immutable results it returns.

A back end takes the complete text of a deck (already prepared by the caller), optionally
analyses to run instead of or after the deck's own, and returns a :class:`SimResult`: the
plots in the order ngspice ran them, the simulator's log, its warnings and ``.meas`` results.
Both back ends drive ngspice with the same command script (:func:`command_script`), so the
same deck gives the same plots, names and numbers.
"""

from __future__ import annotations

import os
import re
import shutil
import tempfile
from abc import ABC, abstractmethod
from collections.abc import Callable, Iterator, Mapping, Sequence
from contextlib import AbstractContextManager, contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import ClassVar

import numpy as np
import numpy.typing as npt

from heatweave.errors import SimulationTimeoutError, SimulatorError, UsageError
from heatweave.files import read_bytes
from heatweave.processes import signals_deferred

from .naming import vector_name

Array = npt.NDArray[np.float64] | npt.NDArray[np.complex128]
FloatArray = npt.NDArray[np.float64]
Progress = Callable[[float], None]

ANALYSIS_COMMANDS = frozenset(
    {"op", "tran", "ac", "dc", "noise", "tf", "sens", "pz", "disto", "sp"}
)
_UNSAFE = re.compile(r"[\r\n;]")


def _frozen(values: Mapping[str, Array]) -> Mapping[str, Array]:
    for array in values.values():
        array.setflags(write=False)
    return MappingProxyType(dict(values))


@dataclass(frozen=True, slots=True)
class Plot:
    """One analysis result: ``name`` like ``tran1``, ``kind`` like ``tran``.

    ``scale`` names the x-axis vector (``time``, ``frequency``, ``v-sweep``) or is ``None``
    for plots without one (``op``).  ``vectors`` maps normalised names to read-only arrays:
    float64, or complex128 for ``ac`` and other complex plots.
    """

    name: str
    kind: str
    scale: str | None
    vectors: Mapping[str, Array]

    def __post_init__(self) -> None:
        object.__setattr__(self, "vectors", _frozen(self.vectors))

    def __getitem__(self, name: str) -> Array:
        """A vector by normalised name; ``"out"`` and ``"V(OUT)"`` both find ``v(out)``."""
        key = name.strip().lower()
        if key in self.vectors:
            return self.vectors[key]
        for vector_type in ("voltage", "current"):
            alias = vector_name(key, vector_type)
            if alias in self.vectors:
                return self.vectors[alias]
        raise KeyError(f"plot {self.name} has no vector {name!r}")

    def __contains__(self, name: object) -> bool:
        if not isinstance(name, str):
            return False
        try:
            self[name]
        except KeyError:
            return False
        return True

    @property
    def scale_values(self) -> Array | None:
        """The scale vector, or ``None``."""
        return None if self.scale is None else self.vectors[self.scale]


@dataclass(frozen=True, slots=True)
class SimResult:
    """Everything one simulator run produced."""

    plots: tuple[Plot, ...]
    log: str
    warnings: tuple[str, ...] = ()
    measurements: Mapping[str, float] = field(default_factory=dict)
    backend: str = ""

    def __post_init__(self) -> None:
        object.__setattr__(self, "measurements", MappingProxyType(dict(self.measurements)))

    def plot(self, kind: str, index: int = 0) -> Plot:
        """The *index*-th plot (0-based, run order) of analysis *kind*."""
        found = [plot for plot in self.plots if plot.kind == kind]
        if index >= len(found):
            raise KeyError(f"no {kind} plot number {index + 1} (have {len(found)})")
        return found[index]


def check_analysis(command: str) -> str:
    """An analysis request such as ``tran 1u 1m uic`` checked and normalised to one line."""
    words = command.split()
    if (
        not words
        or words[0].lower().lstrip(".") not in ANALYSIS_COMMANDS
        or _UNSAFE.search(command)
    ):
        raise UsageError(
            f"not an analysis request: {command!r}",
            hint="give one analysis per request, e.g. 'op', 'tran 1u 10m' or 'ac dec 10 1 1meg'",
        )
    return " ".join([words[0].lower().lstrip("."), *words[1:]])


def command_script(analyses: Sequence[str], deck_analyses: bool, save: Sequence[str]) -> list[str]:
    """The ngspice commands both back ends issue after loading the deck, in order."""
    script = []
    if save:
        for name in save:
            if _UNSAFE.search(name) or not name.strip():
                raise UsageError(f"not a vector to save: {name!r}", hint="e.g. v(out) or i(v1)")
        script.append("save " + " ".join(name.strip() for name in save))
    if deck_analyses:
        script.append("run")
    script.extend(check_analysis(command) for command in analyses)
    return script


def timed_out(timeout: float | None) -> SimulationTimeoutError:
    """The error for a run stopped after *timeout* seconds (same wording in every back end)."""
    return SimulationTimeoutError(
        f"ngspice did not finish within {timeout or 0:.3g} s and was stopped",
        hint="give a longer --timeout, or a shorter or coarser analysis"
        + (
            " (SPICE scale factors: 1m is a millisecond; write 60 for a minute)"
            if timeout is not None and timeout < 1.0
            else ""
        ),
        limit=timeout,
    )


@contextmanager
def working_folder(workdir: str | os.PathLike[str] | None) -> Iterator[Path]:
    """*workdir* as given (kept), or a fresh temporary folder removed afterwards."""
    if workdir is not None:
        path = Path(workdir)
        path.mkdir(parents=True, exist_ok=True)
        yield path
        return
    made: list[Path] = []
    try:
        with signals_deferred():  # a signal must not fall between making and recording
            made.append(Path(tempfile.mkdtemp(prefix="heatweave-sim-")))
        yield made[0]
    finally:
        for path in made:
            shutil.rmtree(path, ignore_errors=True)


#: The name ngspice looks for in its working folder at start-up (manual 16.6).
INIT_NAME = ".spiceinit"
#: Variables that lead ngspice to a user's init file (manual 16.6, 16.7) or to a spinit
#: other than the installation's own (16.5, 16.7.1): never passed on.
INIT_VARIABLES = ("SPICE_USERINIT_DIR", "USERPROFILE", "SPICE_SCRIPTS", "SPICE_LIB_DIR")
INPUT_VARIABLE = "NGSPICE_INPUT_DIR"


def private_environment(
    folder: Path, input_dir: str | os.PathLike[str] | None, base: Mapping[str, str] | None = None
) -> dict[str, str]:
    """The environment ngspice runs in: *base* (default: this process's) with ``HOME`` an
    empty folder inside *folder* and no variable naming another init folder, so that no
    ``.spiceinit`` or ``spice.rc`` of the user's or of a deck's folder is read; files named
    by the deck (an XSPICE ``file=``) are still found in *input_dir* (``NGSPICE_INPUT_DIR``)."""
    env = {k: v for k, v in (os.environ if base is None else base).items()}
    for name in INIT_VARIABLES:
        env.pop(name, None)
    home = folder / "home"
    home.mkdir(exist_ok=True)
    env["HOME"] = str(home)
    if input_dir is not None:
        env[INPUT_VARIABLE] = input_folder(folder, input_dir)
    return env


#: What ngspice cannot read in ``NGSPICE_INPUT_DIR``: the program makes it the command
#: ``set sourcepath = ( ... )``, which splits at blanks, ends at a parenthesis or a newline,
#: and reads quotes, back quotes and ``$`` itself ("bad set form" for a folder ``Jo's``).
_UNREADABLE_FOLDER = re.compile(r"[\s()'\"`$;\\]|[^\x20-\x7e]")
INPUT_LINK = "input"


def input_folder(folder: Path, input_dir: str | os.PathLike[str]) -> str:
    """*input_dir* as ngspice can read it: as it is, or, when its path holds a character
    ngspice cannot take, a symbolic link to it inside the private *folder*."""
    where = os.path.abspath(input_dir)
    if not _UNREADABLE_FOLDER.search(where):
        return where
    link = folder / INPUT_LINK
    if not link.is_symlink():
        link.symlink_to(where, target_is_directory=True)
    return str(link)


def place_init_file(init_file: str | os.PathLike[str] | None, folder: Path) -> Path | None:
    """Copy the init file the user asked for into *folder* as ``.spiceinit``; its path."""
    if init_file is None:
        return None
    source = Path(init_file)
    try:
        data = read_bytes(source)  # a regular file only: not a pipe, not /dev/zero
    except OSError as err:
        raise UsageError(
            f"cannot read the init file {source}: {err.strerror or err}",
            hint="name an existing ngspice init file with --init-file",
        ) from None
    target = folder / INIT_NAME
    target.write_bytes(data)
    return target


class Simulator(ABC):
    """A way to run ngspice on a deck."""

    name: ClassVar[str]

    @abstractmethod
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
        """Simulate *deck* and return every plot it produced.

        ``analyses`` are extra analysis commands (``op``, ``tran 1u 1m``) run after the
        deck's own analysis cards, or instead of them when ``deck_analyses`` is false.
        ``save`` limits the vectors kept (ngspice's ``save``).  ``cwd`` is the folder where
        files the deck names are looked for (``NGSPICE_INPUT_DIR``; the caller inlines the
        includes, :mod:`heatweave.run.safedeck`).  ngspice itself runs in the working folder,
        with an empty home there, so that it reads no init file: ``workdir`` keeps its files
        in that folder (a folder of heatweave's own); by default a temporary one is used and
        removed.  ``init_file`` is an ngspice init file the user asked to have read.
        ``timeout`` in seconds stops a run that takes too long.
        ``progress(fraction)`` is called with the fraction done when the back end knows it.
        Raises :class:`heatweave.errors.SimulatorError` or one of its subclasses.
        """

    def session(
        self,
        deck: str,
        *,
        cwd: str | os.PathLike[str],
        timeout: float | None = None,
        init_file: str | os.PathLike[str] | None = None,
    ) -> AbstractContextManager[Session]:
        """A :class:`Session` on *deck* (a plain circuit without analysis cards) whose
        transient can be paused, altered and resumed: the co-simulation's way of driving
        ngspice.  ``timeout`` bounds the whole session.  Back ends that cannot pause a
        transient raise :class:`heatweave.errors.UsageError`.
        """
        raise UsageError(
            f"the {self.name} back end cannot pause a transient",
            hint="the co-simulation needs the ngspice shared library (--backend shared)",
        )


#: Node voltages and branch currents at chosen samples (by node or device name), and every
#: signal's ``(min, max)`` keyed ``v(NAME)`` or ``i(NAME)``.
SignalSummary = tuple[dict[str, FloatArray], dict[str, FloatArray], dict[str, tuple[float, float]]]


def summarise(
    tables: tuple[Mapping[str, FloatArray], Mapping[str, FloatArray]], at: npt.NDArray[np.intp]
) -> SignalSummary:
    """The :data:`SignalSummary` of node voltages and branch currents *tables* (each
    name's samples): copies of the samples *at*, clipped to the last, and the extremes
    from the first of *at* on (a transient reported from its tstart)."""
    found: tuple[dict[str, FloatArray], dict[str, FloatArray]] = ({}, {})
    extremes: dict[str, tuple[float, float]] = {}
    since = int(at[0]) if at.shape[0] else 0
    for kind, table, out in zip("vi", tables, found, strict=True):
        for name, values in table.items():
            out[name] = values[np.minimum(at, values.shape[0] - 1)]
            kept = values[since:]
            if kept.shape[0]:
                extremes[f"{kind}({name})"] = (float(kept.min()), float(kept.max()))
    return found[0], found[1], extremes


class Session(ABC):
    """A loaded circuit whose transient runs in parts: :meth:`advance` to a pause,
    :meth:`alter` element values, :meth:`advance` again (ngspice's ``resume``)."""

    @abstractmethod
    def advance(self, tran: str, until: float | None, land: Sequence[float] = ()) -> None:
        """Run the transient *tran* (``tran TSTEP TSTOP``; the first call starts it, later
        ones resume it) until the first accepted time point past *until*, or to its end
        when *until* is ``None``, placing a time point on each instant of *land* (after
        the current time).
        Raises the simulator's error, or a timeout."""

    @abstractmethod
    def alter(self, device: str, value: float) -> None:
        """Set element *device*'s value (ngspice's ``alter``) while the transient pauses."""

    @abstractmethod
    def samples(self, name: str, start: int = 0, stop: int | None = None) -> FloatArray:
        """Samples ``[start:stop]`` of vector *name* of the running transient (a copy)."""

    def read_rows(self, names: Sequence[str], start: int, out: FloatArray) -> None:
        """Samples ``start .. start + out.shape[1]`` of each vector of *names* into the
        rows of *out*, in order (raises as :meth:`samples` does, or when one is shorter)."""
        stop = start + int(out.shape[1])
        for row, name in zip(out, names, strict=True):
            values = self.samples(name, start, stop)
            if values.shape[0] != row.shape[0]:
                raise SimulatorError(
                    f"ngspice's vector {name!r} has {start + values.shape[0]} samples during "
                    f"the co-simulation, not the {stop} its time has"
                )
            row[:] = values

    def signals_at(self, at: npt.NDArray[np.intp]) -> SignalSummary:
        """Every node voltage and branch current at the samples *at* (clipped to each
        one's last sample), and each one's ``(min, max)`` over its samples from the first
        of *at* on (:func:`summarise`)."""
        return summarise((self.node_voltages(), self.branch_currents()), at)

    @abstractmethod
    def node_voltages(self) -> dict[str, FloatArray]:
        """Every node voltage of the transient so far, by node name (a copy)."""

    @abstractmethod
    def branch_currents(self) -> dict[str, FloatArray]:
        """Every branch current of the transient so far (voltage sources, inductors), by
        device name (a copy)."""

    @abstractmethod
    def stats(self) -> str:
        """The simulator's own statistics of the run (ngspice's ``rusage``)."""

    @property
    @abstractmethod
    def log(self) -> str:
        """The simulator's output since the last pause."""
