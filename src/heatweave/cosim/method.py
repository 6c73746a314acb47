"""When the windowed co-simulation is accurate, and the transient it runs.

The co-simulation holds every resistance constant over a window and advances the thermal
network with the window's mean power, which is accurate when the thermal time constants
are far longer than the electrical ones.  :func:`choose_method` picks ``"cosim"`` only then,
and ``"full"`` (the emitted electrothermal deck) otherwise, and says why.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from heatweave.quantities import parse_number
from heatweave.spice.grammar import CardSyntaxError, parse_card
from heatweave.spice.syntax import Call, ElementSyntax, Value
from heatweave.thermal.circuit import ThermalCircuit
from heatweave.thermal.solver import Propagator, ThermalAssemblyError, assemble

#: The fastest thermal time constant must exceed the slowest electrical time scale this
#: many times: the temperature ripple at the electrical time scale is then below about
#: 1/(2 pi SEPARATION) of the rise, and so is the resistance ripple the co-simulation drops.
SEPARATION = 20.0

_PERIODIC = frozenset({"sin", "pulse", "sffm", "am"})


@dataclass(frozen=True, slots=True)
class Transient:
    """A ``tran tstep tstop [tstart [tmax]] [uic]`` request."""

    tstep: float
    tstop: float
    tstart: float = 0.0
    tmax: float | None = None
    uic: bool = False

    @classmethod
    def parse(cls, text: str) -> Transient | None:
        """The request in *text* (``tran ...`` or ``.tran ...``), or ``None`` if it is not one."""
        words = text.split()
        if not words or words[0].lower().lstrip(".") != "tran":
            return None
        uic = any(w.lower() == "uic" for w in words[1:])
        numbers = _numbers(w for w in words[1:] if w.lower() != "uic")
        if (
            numbers is None
            or len(numbers) < 2
            or len(numbers) > 4
            or numbers[0] <= 0
            or numbers[1] <= 0
        ):
            return None
        tstart = numbers[2] if len(numbers) > 2 else 0.0
        tmax = numbers[3] if len(numbers) > 3 else None
        return cls(numbers[0], numbers[1], tstart, tmax, uic)

    def command(self) -> str:
        """The ngspice command for this request."""
        parts = [f"tran {self.tstep!r} {self.tstop!r} {self.tstart!r}"]
        if self.tmax is not None:
            parts.append(repr(self.tmax))
        if self.uic:
            parts.append("uic")
        return " ".join(parts)


def source_time_scale(cards: Sequence[str]) -> float | None:
    """The slowest period of the deck's periodic or pulsed independent sources (s).

    *cards* are logical card texts; each V and I card's transient function is read with
    the grammar (:meth:`heatweave.spice.syntax.ElementSyntax.source`):
    ``SIN(vo va freq ...)`` (period 1/freq), ``PULSE(v1 v2 td tr tf pw per)`` (its
    period, else rise + width + fall), ``SFFM``/``AM`` (the slowest frequency given).
    A function with a value that is not a plain number (``{expr}``) is not read.
    ``None`` when no source has a time scale.
    """
    slowest: float | None = None
    for text in cards:
        if text[:1].lower() not in ("v", "i"):
            continue
        function = _function(text)
        if function is None or function.name.key not in _PERIODIC:
            continue
        values = [a.number if isinstance(a, Value) else None for a in function.args]
        numbers = [v for v in values if v is not None]
        scale = _scale(function.name.key, numbers) if len(numbers) == len(values) else None
        if scale is not None and scale > 0:
            slowest = scale if slowest is None else max(slowest, scale)
    return slowest


def _function(text: str) -> Call | None:
    """The transient function of source card *text*; ``None`` without one, or for a card
    the grammar does not read (lint reports it)."""
    try:
        syntax = parse_card(text)
    except CardSyntaxError:
        return None
    return syntax.source(text).function if isinstance(syntax, ElementSyntax) else None


def _numbers(words: Iterable[str]) -> list[float] | None:
    """The words as numbers, or ``None`` if one is not a plain SPICE number."""
    out = []
    for word in words:
        value = parse_number(word)
        if value is None:
            return None
        out.append(value)
    return out


def _scale(kind: str, values: list[float]) -> float | None:
    if kind == "sin" and len(values) >= 3 and values[2] > 0:
        return 1.0 / values[2]
    if kind == "pulse":
        if len(values) >= 7 and values[6] > 0:
            return values[6]
        return sum(values[3:6]) or None
    # SFFM(vo va fc mdi fs ...) and AM(va vo mf fc td ...): only these words are
    # frequencies (ngspice manual, independent sources); mdi is an index, td a delay.
    at = _FREQUENCY_WORDS.get(kind, ())
    freqs = [values[i] for i in at if i < len(values) and values[i] > 0]
    return 1.0 / min(freqs) if freqs else None


_FREQUENCY_WORDS: dict[str, tuple[int, ...]] = {"sffm": (2, 4), "am": (2, 3)}


def choose_method(
    circuit: ThermalCircuit,
    analyses: Sequence[str],
    electrical: float | None = None,
) -> tuple[str, str]:
    """``("cosim", why)`` when the co-simulation is accurate for this run, else
    ``("full", why)``.

    *analyses* are the requests to run (``tran 10u 1``); *electrical* is the slowest
    electrical time scale known (s), e.g. :func:`source_time_scale` of the deck; without
    one, ten transient steps stand in for it.  The co-simulation needs: exactly one
    transient (a tstart is run from 0 and reported from there, as the full deck saves
    it); resistors only (heat-only parts need their V*I, which needs the full deck); a
    fixed ambient; a cold start; every part and node with heat capacity (no
    instant temperature feedback); and the fastest thermal time constant at least
    :data:`SEPARATION` times the electrical time scale.
    """
    if len(analyses) != 1:
        return (
            "full",
            f"the co-simulation runs one transient; this run has {len(analyses)} analyses",
        )
    tran = Transient.parse(analyses[0])
    if tran is None:
        return "full", f"'{analyses[0]}' is not a transient; the full deck is cheap for it"
    heat_only = [p.path for p in circuit.parts if not p.is_resistor]
    if heat_only:
        return "full", f"heat-only parts ({', '.join(heat_only[:3])}) need the full deck"
    if not circuit.parts:
        return "full", "no annotated parts"
    if isinstance(circuit.ambient, tuple):
        return "full", "the ambient profile is not supported by the co-simulation"
    if circuit.start != "cold":
        return "full", f"start = {circuit.start!r} is not supported by the co-simulation"
    try:
        system = assemble(circuit)
    except ThermalAssemblyError as err:
        return "full", f"the thermal network could not be assembled: {err.message}"
    if system.has_feedthrough:
        return "full", "a part or node without heat capacity follows its power instantly"
    if Propagator(system).modes is None:
        return "full", (
            "the thermal network's modes are too ill-conditioned for the co-simulation's "
            "exact solution between ngspice's time points"
        )
    tau_min = float(system.time_constants[0])
    scale = electrical if electrical is not None else 10.0 * tran.tstep
    what = "the slowest source period" if electrical is not None else "ten transient steps"
    ratio = tau_min / scale
    if ratio < SEPARATION:
        return "full", (
            f"the fastest thermal time constant ({tau_min:.3g} s) is only {ratio:.3g} times "
            f"{what} ({scale:.3g} s); the co-simulation needs {SEPARATION:g} times"
        )
    return "cosim", (
        f"thermal and electrical time scales separate: fastest thermal time constant "
        f"{tau_min:.3g} s = {ratio:.3g} x {what} ({scale:.3g} s)"
    )
