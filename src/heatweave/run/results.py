"""What a run means: temperatures, resistances, dissipation and node voltages per part.

ngspice returns vectors; this module turns them into the quantities a designer asks for,
using the same temperature models the emitted deck evaluates (so R(T) here is R(T) there):

* a part's temperature is its hot-spot node voltage (1 V = 1 degC);
* a resistor's resistance is its model at that temperature, its dissipation V^2/R;
* a heat-only part's dissipation is ``sum (V(k) - V(last)) * I(k)`` over its sensed terminals;
* the change of resistance is against the model's nominal value, R at its own reference
  temperature (:attr:`~heatweave.tempmodels.TempModel.nominal_resistance`: the deck's
  value at ``tref``, or ``r0``/``r25`` where the annotation gives one);
* :func:`build_part` is the one place every method and command (full deck, co-simulation,
  settle, sweep, check) turns a part's waveforms into these keys: ``power`` is the mean
  over the last period of the deck's periodic sources (:mod:`heatweave.run.drive`; the
  final value when none is periodic), ``peak_power`` the instantaneous peak,
  ``nominal_resistance`` the model's value at its reference temperature;
* a temperature outside the range where the part's model is defined
  (:attr:`~heatweave.tempmodels.TempModel.valid_range`) is an extrapolation, and
  :func:`range_findings` says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt

from heatweave.annotation import AMBIENT
from heatweave.emit.emitter import Emitted
from heatweave.emit.names import added_names, own_vectors
from heatweave.errors import Finding, SimulatorError
from heatweave.quantities import HOTTEST_AMBIENT
from heatweave.run.drive import Drive, deck_drive, period_note
from heatweave.run.sampling import sampling_error, step_excess
from heatweave.run.unverified import Disagreement
from heatweave.simulators import Plot, SimResult
from heatweave.spice.hierarchy import (
    DeckIndex,
    device_name,
    global_names,
    top_level_node,
)
from heatweave.thermal.circuit import AMBIENT_NODE, PREFIX, PartPlan, ThermalCircuit, safe

FloatArray = npt.NDArray[np.float64]


@dataclass(frozen=True, slots=True)
class PartResult:
    """One heated part's results; series are ``None`` for an operating point.

    Built by :func:`build_part` only, so each key means the same for every method.
    ``valley_temperature`` is the lowest temperature of a settled period (``settle``)."""

    path: str
    model: str | None
    temperature: float
    power: float
    resistance: float | None
    nominal_resistance: float | None
    peak_temperature: float | None = None
    peak_power: float | None = None
    temperature_series: FloatArray | None = field(default=None, repr=False)
    power_series: FloatArray | None = field(default=None, repr=False)
    resistance_series: FloatArray | None = field(default=None, repr=False)
    plan: PartPlan | None = field(default=None, repr=False, compare=False)
    valley_temperature: float | None = None
    #: How much ``power`` depends on what happens between the simulator's time points (W):
    #: :func:`sampling_error`; ``None`` where not estimated.
    power_error: float | None = None
    #: Per step of ``power_series``'s time (or the samples' time), the trapezoid's
    #: integral of the power minus the exact one of straight-line voltages and currents
    #: (J): what ``power_error`` is summed from (``settle`` sums it over its own period).
    power_excess: FloatArray | None = field(default=None, repr=False, compare=False)

    @property
    def resistance_change(self) -> float | None:
        """Relative change of resistance against the model's nominal value (final point)."""
        if self.resistance is None or not self.nominal_resistance:
            return None
        return self.resistance / self.nominal_resistance - 1.0

    @property
    def hottest(self) -> float:
        """The highest temperature seen: the peak of a transient, else the final value."""
        return self.peak_temperature if self.peak_temperature is not None else self.temperature


@dataclass(frozen=True, slots=True)
class RunResults:
    """Everything a run reports, from one plot (the transient when there is one)."""

    analysis: str
    ambient: float
    parts: tuple[PartResult, ...]
    nodes: dict[str, float]
    voltages: dict[str, float]
    time: FloatArray | None = field(default=None, repr=False)
    node_series: dict[str, FloatArray] = field(default_factory=dict, repr=False)
    voltage_series: dict[str, FloatArray] = field(default_factory=dict, repr=False)
    ambient_series: FloatArray | None = field(default=None, repr=False)
    #: Branch currents (A) of the deck's own devices that have one (voltage sources,
    #: inductors, ...), by device name as ngspice names it (``vamm``, ``v.x1.vs``).
    currents: dict[str, float] = field(default_factory=dict)
    current_series: dict[str, FloatArray] = field(default_factory=dict, repr=False)
    #: The period ``power`` is the mean over (s); ``None``: the final value.
    period: float | None = None
    #: ``(min, max)`` of signals (``v(out)``, ``i(vamm)``) over every time point of the
    #: simulator where the series above are coarser (the co-simulation's window ends).
    extremes: dict[str, tuple[float, float]] = field(default_factory=dict, repr=False)
    #: Figures the run's own numbers do not back (:mod:`heatweave.run.stepcheck`).
    unverified: tuple[Disagreement, ...] = ()

    def part(self, path: str) -> PartResult:
        """A part's results by instance path (case-insensitive)."""
        for part in self.parts:
            if part.path.lower() == path.lower():
                return part
        raise KeyError(path)


def period_mean(time: FloatArray, values: FloatArray, period: float | None) -> float:
    """The mean of *values* over the last *period* seconds of *time* (the whole series
    when it is shorter; the last value without a period or a span).

    The trapezoid over the simulator's own time points, the window's start interpolated
    linearly between its two neighbours: the integral of the waveform ngspice computed,
    never a resampling of it."""
    if period is None or len(time) < 2 or not time[-1] > time[0]:
        return float(values[-1])
    start = float(time[-1]) - period
    if start <= float(time[0]):
        t, v = time, values
    else:
        k = int(np.searchsorted(time, start, side="right"))
        t = np.concatenate(([start], time[k:]))
        v = np.concatenate(([np.interp(start, time, values)], values[k:]))
    return float(np.trapezoid(v, t) / (t[-1] - t[0]))


def build_part(
    plan: PartPlan,
    temperature: FloatArray,
    power: FloatArray,
    *,
    time: FloatArray | None = None,
    resistance: FloatArray | None = None,
    period: float | None = None,
    samples: tuple[FloatArray, FloatArray, float] | None = None,
    temperature_value: float | None = None,
    temperature_peak: float | None = None,
    excess: FloatArray | None = None,
) -> PartResult:
    """One part's result from its waveforms: the one definition of every key.

    *temperature*, *power* (and *resistance*, a resistor's series) are series over *time*,
    or one value each for an operating point.  ``power`` is :func:`period_mean` over
    *period*, ``peak_power`` the largest instantaneous value; ``temperature`` the final
    value and ``peak_temperature`` the largest; ``resistance`` the model's value at the
    reported temperature, ``nominal_resistance`` at its reference temperature.

    *samples* are ``(time, power, peak)`` at the simulator's own time points when *power*
    is a coarser series (the co-simulation's window means): the mean and the peak come
    from them; *temperature_peak* is then the highest temperature at those time points
    (the co-simulation's *temperature* holds its window ends only).  *temperature_value*
    replaces the final temperature where the method reports another one (``settle``: the
    period mean, with ``valley_temperature`` the period's lowest).  *excess* (per step of
    *time*, or of the samples' time) gives ``power_error``, :func:`sampling_error`."""
    transient = time is not None and len(time) > 1
    if samples is not None:
        mean, peak = period_mean(samples[0], samples[1], period), samples[2]
    elif transient:
        assert time is not None
        mean, peak = period_mean(time, power, period), float(np.max(power))
    else:
        mean, peak = float(power[-1]), None
    model = plan.model
    over = samples[0] if samples is not None else time  # the points *excess* is over
    reported = float(temperature[-1]) if temperature_value is None else temperature_value
    return PartResult(
        path=plan.path,
        model=plan.model_name,
        temperature=reported,
        power=mean,
        resistance=None if model is None else float(model.resistance(reported)),
        nominal_resistance=None if model is None else model.nominal_resistance,
        peak_temperature=_peak(temperature, temperature_peak) if transient else None,
        peak_power=peak,
        temperature_series=temperature if transient else None,
        power_series=power if transient else None,
        resistance_series=resistance if transient else None,
        plan=plan,
        valley_temperature=float(np.min(temperature)) if temperature_value is not None else None,
        power_error=(
            sampling_error(over, excess, period)
            if excess is not None and over is not None and transient
            else None
        ),
        power_excess=excess if transient else None,
    )


#: ``RunResults.analysis`` of a settled period (``settle``, and ``check`` on a periodic deck):
#: times are read from the period's start, a rating is derated at the period's warmest local
#: ambient.
SETTLED = "settled period"


def local_ambient(results: RunResults, label: str, ambient: FloatArray) -> FloatArray:
    """The temperature at the cold end of a part's thermal path over the run: *ambient*
    (its series), or the shared node *label*'s; one value for an operating point."""
    if label == AMBIENT:
        return ambient
    series = results.node_series.get(label)
    return series if series is not None else np.array([results.nodes[label]])


def rated_ambient(results: RunResults, label: str, ambient: FloatArray) -> float:
    """The local ambient a part's power rating is derated at, the one value every report
    and ``check`` use: where the run ends, or over a settled period its warmest."""
    local = local_ambient(results, label, ambient)
    return float(np.max(local)) if results.analysis == SETTLED else float(local[-1])


def _peak(series: FloatArray, peak: float | None) -> float:
    """The highest of *series* and of *peak*, the peak between its points where known."""
    top = float(np.max(series))
    return top if peak is None else max(top, float(peak))


def drive_findings(results: RunResults, index: DeckIndex) -> tuple[Finding, ...]:
    """A note when ``power`` of a transient could not be the mean over one common period
    of the drive (:func:`heatweave.run.drive.period_note`)."""
    if results.time is None or len(results.time) < 2:
        return ()
    found = deck_drive(index)
    if results.period is None and not found.unknown:
        return ()  # a source it cannot read is said even where power is the final value
    span = float(results.time[-1] - results.time[0])
    note = period_note(found, span)
    return () if note is None else (note,)


def power_meaning(results: RunResults) -> str:
    """What ``power`` is for *results*, in words (reports and limit details)."""
    if results.time is None:
        return "power at the operating point"
    if results.period is None:
        return "power at the end of the transient (no periodic source)"
    return f"power averaged over the last period, {results.period:.4g} s"


def main_plot(sim: SimResult) -> Plot:
    """The plot results are read from: the last transient, else the last operating point,
    else the last plot of any kind."""
    for kind in ("tran", "op"):
        found = [p for p in sim.plots if p.kind == kind]
        if found:
            return found[-1]
    if not sim.plots:
        raise SimulatorError(
            "ngspice produced no results",
            hint="check that the deck's analysis cards are valid; "
            "heatweave emit DECK -o hw.cir, then ngspice -b hw.cir, shows ngspice's own messages",
        )
    return sim.plots[-1]


def _vector(plot: Plot, name: str) -> FloatArray:
    try:
        return np.real(np.asarray(plot[name])).astype(np.float64)
    except KeyError:
        raise SimulatorError(
            f"ngspice's {plot.name} plot has no vector {name!r}, which heatweave expected",
            hint="heatweave named a node or device unlike ngspice: please report it with "
            "the deck and its annotation file",
        ) from None


def extract(
    sim: SimResult, emitted: Emitted, index: DeckIndex, drive: Drive | None = None
) -> RunResults:
    """Read a simulation of an *emitted* deck back into per-part results; *drive* is the
    deck's (:func:`heatweave.run.drive.deck_drive`, found here when not given).  The node
    voltages and branch currents are the deck's own: every vector but those of the names
    the emitter added (:func:`heatweave.emit.names.own_vectors`)."""
    circuit = emitted.circuit
    assert circuit is not None
    plot = main_plot(sim)
    transient = plot.kind == "tran"
    time = _vector(plot, "time") if transient and "time" in plot else None
    period = None
    if time is not None:
        period = (drive or deck_drive(index)).period
    globals_ = global_names(index) | {AMBIENT_NODE}

    def voltage(node: str) -> FloatArray:
        if node.lower() in ("0", "gnd"):
            return np.zeros(len(plot.scale_values) if plot.scale_values is not None else 1)
        return _vector(plot, f"v({node.lower()})")

    parts = []
    for part in circuit.parts:
        resolved = part.resolved or index.resolve(part.path)
        assert resolved is not None
        temp = _vector(plot, f"v({part.node})")
        nodes = [top_level_node(resolved, n, globals_) for n in part.terminals]
        if part.model is not None:
            r_series = part.model.resistance(temp)
            resistance_series: FloatArray | None = r_series
            drop = voltage(nodes[0]) - voltage(nodes[1])
            power = drop * drop / r_series
            excess = None if time is None else step_excess(drop, drop / r_series, time)
        else:
            resistance_series = None
            power = np.zeros_like(temp)
            excess = None if time is None else np.zeros(max(len(time) - 1, 0))
            name = safe(part.path)
            for k in range(len(nodes) - 1):
                sense = device_name(resolved, f"v{PREFIX}s_{name}_{k + 1}")
                across = voltage(nodes[k]) - voltage(nodes[-1])
                flow = _vector(plot, f"i({sense})")
                power = power + across * flow
                if excess is not None and time is not None:
                    excess = excess + step_excess(across, flow, time)
        found = build_part(
            part, temp, power, time=time, resistance=resistance_series, period=period,
            excess=excess,
        )  # fmt: skip
        parts.append(found)
    nodes_final: dict[str, float] = {}
    node_series: dict[str, FloatArray] = {}
    ambient_values = ambient_of(plot, circuit, time)
    for shared in circuit.nodes:
        # Without a part nothing heats a shared node, and none is emitted: it is the ambient.
        values = _vector(plot, f"v({shared.node})") if circuit.parts else ambient_values
        nodes_final[shared.label] = float(values[-1])
        if transient:
            node_series[shared.label] = values
    voltages: dict[str, float] = {}
    voltage_series: dict[str, FloatArray] = {}
    currents: dict[str, float] = {}
    current_series: dict[str, FloatArray] = {}
    added = own_vectors(index, added_names(circuit, emitted.form, emitted.heating))
    for name, raw in plot.vectors.items():
        if name[:2] not in ("v(", "i(") or not name.endswith(")") or name in added:
            continue
        is_voltage = name[0] == "v"
        finals = voltages if is_voltage else currents
        series = voltage_series if is_voltage else current_series
        key = name[2:-1]
        real = np.real(np.asarray(raw)).astype(np.float64)
        finals[key] = float(real[-1])
        if transient:
            series[key] = real
    return RunResults(
        analysis=plot.kind,
        ambient=float(ambient_values[-1]),
        parts=tuple(parts),
        nodes=nodes_final,
        voltages=voltages,
        time=time,
        node_series=node_series,
        voltage_series=voltage_series,
        ambient_series=ambient_values if transient else None,
        currents=currents,
        current_series=current_series,
        period=period,
    )


def ambient_of(plot: Plot, circuit: ThermalCircuit, time: FloatArray | None) -> FloatArray:
    """The ambient over the run: its source's node, or for a deck without a thermal network
    (no annotated part) the circuit's ambient itself, at each time point of a transient."""
    if circuit.parts:
        return _vector(plot, f"v({AMBIENT_NODE})")
    # No part: nothing was emitted, so a node of that name is the deck's own, not the ambient
    if isinstance(circuit.ambient, tuple):
        times, values = zip(*circuit.ambient, strict=True)
        at = time if time is not None else np.zeros(1)
        profile = np.interp(at, np.asarray(times, float), np.asarray(values, float))
        return np.asarray(profile, dtype=np.float64)
    return np.full(len(time) if time is not None else 1, float(circuit.ambient))


def outside_range(part: PartResult) -> tuple[float, float] | None:
    """``(temperature, bound)`` of the reading furthest past the part's model range, or
    ``None`` when every reading lies inside it (or the model declares no range)."""
    found = part.plan.model.valid_range if part.plan and part.plan.model else None
    if found is None:
        return None
    series = part.temperature_series
    values = series if series is not None else np.array([part.temperature])
    low, high = float(np.min(values)), float(np.max(values))
    if not (np.isfinite(low) and np.isfinite(high)):
        return None  # non-finite results are a failure of their own, not a range question
    if high > found.high:
        return high, found.high
    if low < found.low:
        return low, found.low
    return None


def range_findings(results: RunResults) -> tuple[Finding, ...]:
    """A warning for every part whose temperature left the range its model is defined in:
    the resistance, dissipation and temperature reported there are extrapolations."""
    findings = []
    for part in results.parts:
        past = outside_range(part)
        if past is not None and part.plan is not None:
            findings.append(range_warning(part.plan, *past))
    return tuple(findings)


def range_warning(plan: PartPlan, temperature: float, bound: float) -> Finding:
    """The warning that *plan*'s part reached *temperature*, past *bound* of its model."""
    assert plan.model is not None and plan.model.valid_range is not None
    return Finding(
        "warning",
        f"{plan.path} reaches {temperature:.4g} degC, beyond {bound:g} degC where its "
        f"{plan.model_name} model ends ({plan.model.valid_range.describe()}): its resistance, "
        "dissipation and temperature there are extrapolations of the formula, not physics",
        plan.location,
        "lower the drive or the thermal resistance, or describe the part over that span "
        "with a table model of measured points",
    )


#: Above this (degC) a part temperature is no longer a physical answer but a runaway.
IMPLAUSIBLE_TEMPERATURE = HOTTEST_AMBIENT


def implausible(results: RunResults) -> bool:
    """True when some part's temperature or resistance cannot be physical."""
    for part in results.parts:
        values = [part.temperature, part.hottest]
        if any(not math.isfinite(v) or v > IMPLAUSIBLE_TEMPERATURE for v in values):
            return True
        if part.resistance is not None and not part.resistance > 0:
            return True
        series = part.resistance_series
        if series is not None and not bool(np.all(series > 0)):
            return True
    return False


#: Why a runaway's crossing gets no time when its step check failed.
UNPINNED = "its step is not verified: see the warning"


def growth(results: RunResults) -> str | None:
    """When and where a transient's temperatures left physical values, in words: between
    the two time points that bracket each crossing (what lies between them is not known),
    and no time at all where the run's step check failed (:attr:`RunResults.unverified`)."""
    first = crossing(results)
    if first is None or results.time is None:
        return None
    part = results.parts[first[1]]
    series = part.temperature_series
    assert series is not None
    text = f"{part.path} passed {IMPLAUSIBLE_TEMPERATURE:g} degC"
    if results.unverified:
        return f"{text} at a time this run does not pin down ({UNPINNED})"
    text += " " + bracket(results.time, series, IMPLAUSIBLE_TEMPERATURE)
    tmax = part.plan.tmax if part.plan is not None else None
    if tmax is not None and bool(np.any(series > tmax)):
        text += f" (its tmax {tmax:g} degC {bracket(results.time, series, tmax)})"
    return text


def crossing(results: RunResults) -> tuple[int, int] | None:
    """(time index, part index) where a part's temperature first left physical values."""
    found: tuple[int, int] | None = None
    for k, part in enumerate(results.parts):
        series = part.temperature_series
        if series is None or results.time is None:
            continue
        bad = np.flatnonzero(~np.isfinite(series) | (series > IMPLAUSIBLE_TEMPERATURE))
        if bad.size and (found is None or int(bad[0]) < found[0]):
            found = (int(bad[0]), k)
    return found


def bracket(time: np.ndarray, series: np.ndarray, bound: float) -> str:
    """``at t = ...`` (the first point) or ``between t = ... and ... s``: where *series*
    first passes *bound*, to the time points that bracket it."""
    k = int(np.flatnonzero(~np.isfinite(series) | (series > bound))[0])
    if k == 0:
        return f"at t = {float(time[0]):.5g} s"
    return f"between t = {float(time[k - 1]):.5g} and {float(time[k]):.5g} s"
