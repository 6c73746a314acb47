"""Limits: does a run stay inside what the annotation file allows?

Three kinds of limit are checked, each giving one :class:`LimitResult`:

* ``tmax`` of a part: its temperature (the peak of a transient) must not exceed it;
* ``power_rating`` of a part, derated by IEC 60115-1 (:func:`heatweave.annotation.ratings.
  derated_power`: full power up to ``derating_knee``, zero at ``tmax``).  The temperature
  the rating is derated at is that of the node the part's thermal path ends on: the ambient
  for a part tied to ambient, the shared node's temperature (its terminal or local ambient,
  e.g. the board area) for a part sitting on a shared node.  IEC 60115-1 rates continuous
  load, so the rating is held against the part's ``power``, the mean dissipation over the
  last period of the deck's drive (the final value when it is DC), at the local ambient
  where the run ends; ``tmax`` catches the peak temperature;
* ``[limit."V(out)"]`` tables on the deck's own nodes: ``min`` and ``max`` on the value
  (every point of a transient), ``max_drift_ppm`` on ``|V_hot / V_base - 1|`` where
  ``V_base`` is the same deck run without self-heating (:func:`heatweave.run.runner.
  run_baseline`).  Over a transient the baseline is interpolated onto the heated run's
  time points; points where the baseline is below :data:`DRIFT_FLOOR` of its own peak
  magnitude are skipped, since a ratio there measures numerical noise, not drift.
"""

from __future__ import annotations

import math
import re
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from heatweave.annotation import Annotation, LimitSpec
from heatweave.annotation.fields import closest
from heatweave.annotation.ratings import derated_power
from heatweave.errors import AnnotationError
from heatweave.run.results import (
    SETTLED,
    PartResult,
    RunResults,
    power_meaning,
    rated_ambient,
)
from heatweave.run.runner import RunOutcome
from heatweave.settle.periodic import Settled
from heatweave.spice.hierarchy import DeckIndex, global_names, top_level_node
from heatweave.spice.netlist import card_nodes
from heatweave.spice.private import is_private, private_words
from heatweave.thermal.circuit import AMBIENT_NODE

FloatArray = npt.NDArray[np.float64]

#: Baseline points below this share of the baseline's peak magnitude are left out of drift.
DRIFT_FLOOR = 1e-6
#: A value this close to its bound, relatively, is on it: a few units in the last place of a
#: double (2.2e-16 relative), far below any simulator's tolerance (reltol 1e-3 by default).
ROUND_OFF = 1e-12

_SIGNAL = re.compile(r"^\s*v\s*\(\s*([^,()\s]+)\s*(?:,\s*([^,()\s]+)\s*)?\)\s*$", re.IGNORECASE)
_GROUND = frozenset({"0", "gnd"})


@dataclass(frozen=True, slots=True)
class LimitResult:
    """One limit checked: what, against which bound, with how much room left.

    ``upper`` is true for a ceiling (``value <= bound``), false for a floor.
    """

    subject: str  # part path, or a signal as the annotation spells it ("V(out)")
    limit: str  # "tmax", "power_rating", "max_drift_ppm", "min", "max"
    value: float
    bound: float
    unit: str
    upper: bool = True
    detail: str = ""
    #: The value as read, where the limit judges its magnitude: a drift of -1200 ppm is
    #: judged as 1200 ppm against ``max_drift_ppm`` but printed with its sign.
    signed: float | None = None

    @property
    def margin(self) -> float:
        """Room left before the bound (negative: by how much it is exceeded)."""
        return self.bound - self.value if self.upper else self.value - self.bound

    @property
    def passed(self) -> bool:
        """True when the value is inside the bound, or on it up to floating-point round-off
        (a node held at exactly its limit may come back one bit above it)."""
        return self.margin >= 0 or math.isclose(self.value, self.bound, rel_tol=ROUND_OFF)

    def message(self, where: str = "") -> str:
        """One line naming the subject, the limit, the value and the margin; *where* (a
        sweep corner) follows the limit as ``at WHERE``."""
        verdict = "ok  " if self.passed else "FAIL"
        room = "margin" if self.passed else ("over by" if self.upper else "under by")
        side = "at most" if self.upper else "at least"
        value = _num(self.value)
        if self.signed is not None:
            value, side = f"{self.signed:+.5g}", f"magnitude {side}"
        at = f" at {where}" if where else ""
        text = (
            f"{verdict} {self.subject} {self.limit}{at}: {value} {self.unit}, "
            f"{side} {_num(self.bound)} {self.unit}, {room} {_num(abs(self.margin))} {self.unit}"
        )
        return f"{text} ({self.detail})" if self.detail else text

    def as_dict(self) -> dict[str, str | float | bool]:
        """The result as plain data (JSON reports): ``subject``, ``limit``, ``value`` (what
        the bound judges: a drift's magnitude), ``signed_value`` (the value with its sign),
        ``bound``, ``unit``, ``upper`` (a ceiling), ``margin``, ``passed``, ``detail``."""
        signed = self.value if self.signed is None else self.signed
        return {
            "subject": self.subject, "limit": self.limit, "value": self.value,
            "signed_value": signed, "bound": self.bound, "unit": self.unit,
            "upper": self.upper, "margin": self.margin, "passed": self.passed,
            "detail": self.detail,
        }  # fmt: skip


def _num(value: float) -> str:
    return f"{value:.5g}"


@dataclass(frozen=True, slots=True)
class Signal:
    """A limit's signal resolved against the deck: ``V(a)`` or ``V(a,b)``."""

    spec: LimitSpec
    plus: str
    minus: str  # "0" for a node voltage

    def series(self, results: RunResults) -> FloatArray:
        """The signal over the run (one value for an operating point)."""
        return _node_values(results, self.plus) - _node_values(results, self.minus)


def _node_values(results: RunResults, node: str) -> FloatArray:
    if node in _GROUND:
        return np.zeros(len(results.time) if results.time is not None else 1)
    if results.time is not None:
        return results.voltage_series[node]
    return np.array([results.voltages[node]])


def deck_nodes(index: DeckIndex) -> set[str]:
    """Every node of the deck as ngspice names it at the top level (lower case)."""
    globals_ = global_names(index)
    found: set[str] = set()
    for path in index.element_paths():
        resolved = index.resolve(path)
        if resolved is None:
            continue
        for node in card_nodes(resolved.card, index):
            found.add(top_level_node(resolved, node, globals_))
    return found  # the plain deck's: a node named like heatweave's (thw_1) is the user's


def resolve_limits(annotation: Annotation, index: DeckIndex) -> tuple[Signal, ...]:
    """The annotation's signal limits checked against the deck's nodes.

    Raises :class:`AnnotationError` at the limit table for a signal that is not ``V(node)``
    or ``V(node,node)`` or names a node the deck does not have (with the closest name).
    """
    nodes = deck_nodes(index)
    signals = []
    for spec in annotation.limits:
        match = _SIGNAL.match(spec.signal)
        if match is None:
            raise AnnotationError(
                f'limit "{spec.signal}" is not a node voltage',
                spec.location,
                'name a node voltage such as "V(out)" or a difference such as "V(a,b)"',
            )
        plus, minus = match[1].lower(), (match[2] or "0").lower()
        for node in (plus, minus):
            if node not in nodes and node not in _GROUND:
                hidden = private_words(index.project)  # no hint names their words
                near = closest(node, sorted(n for n in nodes if not is_private(n, hidden)))
                raise AnnotationError(
                    f'limit "{spec.signal}" names node "{node}", which the deck does not have',
                    spec.location,
                    f'did you mean "V({near})"?' if near else "name one of the deck's nodes",
                )
        signals.append(Signal(spec, plus, minus))
    return tuple(signals)


def part_limits(results: RunResults, ambient: FloatArray) -> list[LimitResult]:
    """``tmax`` and derated ``power_rating`` of every part that states them."""
    out: list[LimitResult] = []
    for part in results.parts:
        plan = part.plan
        if plan is None:
            continue
        if plan.tmax is not None:
            detail = "peak of the transient" if part.peak_temperature is not None else ""
            if results.analysis == SETTLED:
                detail = "peak within the settled period"
            out.append(
                LimitResult(part.path, "tmax", part.hottest, plan.tmax, "degC", True, detail)
            )
        if plan.power_rating is not None:
            out.append(_power_limit(part, results, ambient))
    # A figure the run's own numbers do not back fails, whatever the part's ratings say.
    for item in results.unverified:
        out.append(LimitResult(item.subject, item.kind, item.value, item.bound, item.unit, True,
                               item.limit_detail()))  # fmt: skip
    return out


def _power_limit(part: PartResult, results: RunResults, ambient: FloatArray) -> LimitResult:
    plan = part.plan
    assert plan is not None and plan.power_rating is not None
    rating = plan.power_rating
    where = "ambient" if plan.to == AMBIENT_NODE else f'node "{plan.to_label}"'
    # IEC 60115-1 rates continuous load: the mean dissipation (the result's power), at the
    # local ambient every report derates at (heatweave.run.results.rated_ambient).
    settled = results.analysis == SETTLED
    at_local = rated_ambient(results, plan.to_label, ambient)
    allowed = derated_power(rating, at_local, plan.derating_knee, plan.tmax)
    at = f"{_num(at_local)} degC at {where}"
    if plan.tmax is None:  # no upper category temperature: no curve to derate along
        detail = f"rating {_num(rating)} W, not derated: no tmax given ({at})"
    else:
        detail = f"rating {_num(rating)} W derated for {at}"
    if settled:
        detail = f"mean over the settled period; {detail}, its warmest in the period"
    else:
        if results.time is not None:
            detail += " " + _when(results, -1)
        detail += "; " + power_meaning(results)
    return LimitResult(part.path, "power_rating", part.power, allowed, "W", True, detail)


def signal_limits(
    signals: Sequence[Signal], results: RunResults, baseline: RunResults | None
) -> list[LimitResult]:
    """``min``, ``max`` and ``max_drift_ppm`` of every signal limit."""
    out: list[LimitResult] = []
    for signal in signals:
        spec = signal.spec
        values = signal.series(results)
        name = spec.signal
        if spec.min is not None:
            at = int(np.argmin(values))
            out.append(
                LimitResult(
                    name, "min", float(values[at]), spec.min, "V", False, _when(results, at)
                )
            )
        if spec.max is not None:
            at = int(np.argmax(values))
            out.append(
                LimitResult(name, "max", float(values[at]), spec.max, "V", True, _when(results, at))
            )
        if spec.max_drift_ppm is not None:
            assert baseline is not None
            out.append(_drift(signal, values, results, baseline))
    return out


def _when(results: RunResults, at: int) -> str:
    if results.time is None:
        return ""
    if results.analysis == SETTLED:
        return f"at {float(results.time[at]):.4g} s into the settled period"
    return f"at t = {float(results.time[at]):.4g} s"


def _drift(
    signal: Signal, hot: FloatArray, results: RunResults, baseline: RunResults
) -> LimitResult:
    spec = signal.spec
    assert spec.max_drift_ppm is not None
    base = signal.series(baseline)
    if results.time is not None and baseline.time is not None:
        base = np.interp(results.time, baseline.time, base)
    else:
        hot, base = hot[-1:], base[-1:]
    floor = DRIFT_FLOOR * float(np.max(np.abs(base)))
    usable = np.abs(base) > floor
    # A period may well end where the signal is 0 V; a run's final value must not.
    ends_at_zero = results.analysis != SETTLED and abs(float(base[-1])) <= floor
    if not usable.any() or ends_at_zero:
        raise AnnotationError(
            f'drift of "{spec.signal}" is undefined: without self-heating it is 0 V',
            spec.location,
            "limit it with min/max instead of max_drift_ppm",
        )
    signed = np.where(usable, (hot / np.where(usable, base, 1.0) - 1.0) * 1e6, 0.0)
    drift = np.abs(signed)
    worst = int(np.argmax(drift))
    detail = f"{_num(float(hot[worst]))} V heated vs {_num(float(base[worst]))} V unheated"
    if results.time is not None and baseline.time is not None:
        detail += " " + _when(results, worst)
    return LimitResult(
        spec.signal, "max_drift_ppm", float(drift[worst]), spec.max_drift_ppm, "ppm", True, detail,
        signed=float(signed[worst]),
    )  # fmt: skip


def ambient_series(results: RunResults) -> FloatArray:
    """The ambient temperature over the run (as the results read it: the ambient source's
    node, or the circuit's ambient where no part is annotated)."""
    if results.ambient_series is not None:
        return results.ambient_series
    return np.array([results.ambient], dtype=np.float64)


def evaluate(
    outcome: RunOutcome, signals: Sequence[Signal], baseline: RunOutcome | None = None
) -> tuple[LimitResult, ...]:
    """Every limit of a run: part limits first (deck order), then signal limits."""
    return evaluate_results(outcome.results, signals, baseline.results if baseline else None)


def evaluate_results(
    results: RunResults, signals: Sequence[Signal], baseline: RunResults | None = None
) -> tuple[LimitResult, ...]:
    """:func:`evaluate` on results however they were found (the co-simulation's too)."""
    found = part_limits(results, ambient_series(results))
    found += signal_limits(signals, results, baseline)
    return tuple(found)


def refuse_window_ends(signals: Sequence[Signal]) -> None:
    """The co-simulation keeps node voltages at the ends of its windows only, so a signal
    limit (its extremes, its drift over time) cannot be held to it: refused at the table."""
    if signals:
        spec = signals[0].spec
        raise AnnotationError(
            f'[limit."{spec.signal}"] needs the signal at every time point, and the '
            "co-simulation keeps node voltages only at the ends of its windows",
            spec.location,
            "check it with --method full, or auto",
        )


def needs_baseline(signals: Sequence[Signal]) -> bool:
    """True when some limit is a drift, which needs the run without self-heating."""
    return any(s.spec.max_drift_ppm is not None for s in signals)


def summary(results: Sequence[LimitResult]) -> str:
    """``N limits checked, M violated``."""
    failed = sum(not r.passed for r in results)
    noun = "limit" if len(results) == 1 else "limits"
    return f"{len(results)} {noun} checked, {failed} violated"


def evaluate_settled(settled: Settled, signals: Sequence[Signal]) -> tuple[LimitResult, ...]:
    """Every limit over a settled period, as :func:`evaluate` reads a run: ``tmax`` against
    the peak temperature within the period, ``power_rating`` against the period's mean
    dissipation (continuous load, IEC 60115-1) derated at the warmest temperature of the
    part's local ambient within the period, signal limits on every point of the period
    and drifts against the same period without self-heating (``settled.baseline``)."""
    results = settled.as_results()
    baseline = None
    if settled.baseline is not None:
        time, voltages = settled.baseline
        baseline = RunResults(SETTLED, settled.ambient, (), {}, {}, time, {}, voltages)
    ambient = np.full(len(results.time if results.time is not None else [0]), settled.ambient)
    found = part_limits(results, ambient)
    found += signal_limits(signals, results, baseline)
    return tuple(found)
