"""The electrical half of ``settle``: simulate a few periods with temperatures held fixed.

The deck is the emitter's no-heating form (:func:`heatweave.run.runner.prepare` with
``heating=False``: ``.control`` blocks dropped as ``run`` drops them, heat-only parts with
their sense sources) in which every annotated resistor's behavioural source
``Bhw_<name> a b I = V(a,b)/(R(V(hw_t_<name>)))`` is replaced by a plain resistor card
``Rhw_fix_<name> a b <R(T_k)>``.  A plain R card is the cheaper of the two ways to hold a
temperature for ngspice: it is a constant linear conductance stamped once per time step,
where a behavioural source (even with the temperature written in as a number) is an
expression that ngspice parses into a tree, evaluates and differentiates at every Newton
iteration of every time step.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

import numpy as np
import numpy.typing as npt

from heatweave.emit.emitter import Inputs
from heatweave.emit.names import current_source, held_resistor
from heatweave.errors import ConvergenceError, EmitError, Finding
from heatweave.quantities import format_number
from heatweave.run.prepare import Prepared, RunOptions, prepare, simulate
from heatweave.run.results import RunResults, extract
from heatweave.run.waves import seconds
from heatweave.spice.deck import Card, Deck
from heatweave.spice.grammar import parse_card
from heatweave.spice.syntax import ElementSyntax
from heatweave.spice.transform import map_cards
from heatweave.thermal.circuit import PartPlan, ThermalCircuit

FloatArray = npt.NDArray[np.float64]


def fixed_resistor_deck(deck: Deck, parts: Sequence[PartPlan], temps: Sequence[float]) -> Deck:
    """*deck* (a no-heating emitted deck's tree) with each resistor part's current source
    (:func:`heatweave.emit.names.current_source`, at any depth) a plain R card at R(T)
    between the same two nodes; every other card as it was.  Raises :class:`EmitError`
    when a part's source is not in the deck exactly once."""
    held: dict[str, tuple[PartPlan, str]] = {}
    for part, temp in zip(parts, temps, strict=True):
        assert part.model is not None
        value = format_number(float(part.model.resistance(float(temp))))
        held[current_source(part).lower()] = (part, value)
    found: list[str] = []

    def fix(card: Card) -> Card:
        entry = held.get(card.name)
        if entry is None:
            return card
        found.append(card.name)
        syntax = parse_card(card.logical().text)
        assert isinstance(syntax, ElementSyntax) and len(syntax.nodes) == 2, card.text
        a, b = (node.text for node in syntax.nodes)
        eol = "\r\n" if card.text.endswith("\r\n") else "\n"
        # a deck using the held name is refused when emitted (emit.names.reserved)
        return card.with_text(f"{held_resistor(entry[0])} {a} {b} {entry[1]}{eol}")

    fixed = map_cards(deck, fix)
    for name, (part, _value) in held.items():
        if found.count(name) != 1:
            raise EmitError(f"cannot find the behavioural source of {part.path} to hold it fixed")
    return fixed


def window(time: FloatArray, values: FloatArray, t0: float, t1: float) -> tuple[FloatArray, ...]:
    """Samples of *values* (``samples x signals``) within ``[t0, t1]``, both ends included
    (interpolated), and their times."""
    inside = (time > t0) & (time < t1)
    times = np.concatenate([[t0], time[inside], [t1]])
    columns = [np.interp(times, time, values[:, k]) for k in range(values.shape[1])]
    return times, np.column_stack(columns) if columns else np.zeros((len(times), 0))


def period_stats(times: FloatArray, values: FloatArray) -> tuple[FloatArray, FloatArray]:
    """Mean and RMS of each signal over one window (trapezoidal rule on the samples)."""
    span = float(times[-1] - times[0])
    mean = np.trapezoid(values, times, axis=0) / span
    rms = np.sqrt(np.trapezoid(values * values, times, axis=0) / span)
    return np.asarray(mean), np.asarray(rms)


def repeat_error(time: FloatArray, values: FloatArray, period: float) -> FloatArray:
    """How much each signal's last period differs from the period before, point by point.

    Both periods are put on the union of their time points (linear between samples, as
    the simulator's waveforms are read) and the difference is integrated:
    ``integral |x(t) - x(t - T)| dt / (T max |x|)`` over the last period.  Unlike period
    means, which two different waveforms can share, this is zero only for a waveform that
    repeats; an edge that moves by ``dt`` between the periods counts ``dt / T`` of its
    height, so the simulator's time steps landing differently do not count as a change.
    """
    end = float(time[-1])
    t_last, _ = window(time, values, end - period, end)
    t_prev, _ = window(time, values, end - 2 * period, end - period)
    grid = np.union1d(t_last, t_prev + period)
    errors = []
    for k in range(values.shape[1]):
        now = np.interp(grid, time, values[:, k])
        before = np.interp(grid - period, time, values[:, k])
        scale = max(float(np.max(np.abs(now))), float(np.max(np.abs(before))), 1e-12)
        errors.append(float(np.trapezoid(np.abs(now - before), grid)) / (period * scale))
    return np.array(errors)


@dataclass(frozen=True, slots=True)
class Cycle:
    """One settled period of the electrical waveforms at fixed part temperatures."""

    time: FloatArray = field(repr=False)  # one period, both ends
    power: FloatArray = field(repr=False)  # samples x parts (W)
    mean_power: FloatArray  # per part (W)
    voltages: dict[str, float]  # cycle mean of each circuit node (V)
    periods: int  # periods simulated
    repeat: float  # relative difference of the last two periods (largest signal)
    series: dict[str, FloatArray] = field(default_factory=dict, repr=False)  # node voltages
    #: Per step of ``time`` and part, the trapezoid's integral of the power minus the exact
    #: one of straight-line voltages and currents (J; :mod:`heatweave.run.sampling`); the
    #: first step is the whole simulator step the period starts in.
    excess: FloatArray = field(default_factory=lambda: np.zeros((0, 0)), repr=False)


class Electrical:
    """Simulates a deck at fixed part temperatures and returns its last period."""

    def __init__(
        self,
        inputs: Inputs,
        options: RunOptions,
        period: float,
        tstep: float,
        wave_tol: float,
        start: float = 0.0,
    ) -> None:
        self.inputs = inputs
        self.options = options
        self.period = period
        self.tstep = tstep
        self.wave_tol = wave_tol
        #: The sources repeat from this time on (delays, finished one-shot waveforms): the
        #: two periods compared lie after it.
        self.min_periods = 2 + max(0, math.ceil(start / period - 1e-9))
        self.base: Prepared = prepare(
            inputs, replace(options, analyses=(self.analysis(2),)), heating=False
        )
        circuit = self.base.emitted.circuit
        assert circuit is not None
        self.circuit: ThermalCircuit = circuit
        self.resistors = tuple(p for p in circuit.parts if p.is_resistor)
        self.cycles = 0  # calls of cycle() so far

    @property
    def findings(self) -> list[Finding]:
        """The preparation's findings."""
        return list(self.base.findings)

    def analysis(self, periods: int, tstep: float | None = None) -> str:
        """The transient card of *periods* periods, largest step *tstep* (default: own)."""
        step = tstep or self.tstep
        stop = periods * self.period
        # Keep only the last two periods (and a margin) in memory.
        start = max(0.0, stop - 2.0 * self.period - 2.0 * step)
        numbers = (step, stop, start, step)
        return "tran " + " ".join(format_number(n) for n in numbers)

    def simulate(
        self, temps: Sequence[float], periods: int, tstep: float | None = None
    ) -> RunResults:
        """One transient of *periods* periods with resistor parts at *temps* (degC)."""
        deck = fixed_resistor_deck(self.base.deck, self.resistors, temps)
        analyses = (self.analysis(periods, tstep),)
        prepared = replace(self.base, text=deck.write(), deck=deck, analyses=analyses)
        sim = simulate(prepared, self.options)
        return extract(sim, self.base.emitted, self.inputs.index)

    def cycle(
        self, temps: Sequence[float], periods: int, max_periods: int, tstep: float | None = None
    ) -> Cycle:
        """The last period at *temps*, simulating more periods (doubling, up to
        *max_periods*) until two successive periods agree within the waveform tolerance;
        largest step *tstep* (default: the electrical half's own).

        Raises :class:`ConvergenceError` naming the signal that still changes when they
        never do: the circuit does not repeat with the period (or not yet), and no
        periodic steady state can be reported."""
        fixed = dict(zip((p.path for p in self.resistors), temps, strict=True))
        periods = max(periods, self.min_periods)
        max_periods = max(max_periods, periods)
        while True:
            results = self.simulate(temps, periods, tstep)
            assert results.time is not None
            power, excess = self._power(results, fixed)
            names = sorted(results.voltage_series)
            signals = np.column_stack([power, *(results.voltage_series[n] for n in names)])
            errors = repeat_error(results.time, signals, self.period)
            error = float(np.max(errors, initial=0.0))
            if error <= self.wave_tol or periods >= max_periods:
                break
            periods = min(2 * periods, max_periods)
        self.cycles += 1
        labels = [f"the power of {part.path}" for part in results.parts]
        labels += [f"V({name})" for name in names]
        if error > self.wave_tol:
            worst = labels[int(np.argmax(errors))]
            raise ConvergenceError(
                f"the circuit does not repeat with period {seconds(self.period)}: after "
                f"{periods} periods, {worst} still differs from one period to the next by "
                f"{error:.2g} of its peak (tolerance {self.wave_tol:g})",
                hint="check that every drive repeats with this period; a slow electrical "
                "start-up needs a larger --periods",
            )
        end = float(results.time[-1])
        times, last = window(results.time, signals, end - self.period, end)
        n = power.shape[1]
        means, _rms = period_stats(times, last)
        voltages = {name: float(means[n + k]) for k, name in enumerate(names)}
        series = {name: last[:, n + k] for k, name in enumerate(names)}
        # the steps of the window: from the simulator's step the period starts in
        first = int(np.searchsorted(results.time, end - self.period, side="right")) - 1
        return Cycle(times, last[:, :n], means[:n], voltages, periods, error, series,
                     excess[max(first, 0) :])  # fmt: skip

    def _power(self, results: RunResults, fixed: dict[str, float]) -> tuple[FloatArray, FloatArray]:
        """Each part's instantaneous dissipation (``samples x parts``) and its per-step
        sampling excess (``steps x parts``, :attr:`PartResult.power_excess`).

        ``extract`` computes a resistor's power as V^2 / R(T_node); with heating off the
        hot-spot node sits at ambient, so its R (and the excess with it) is rescaled to
        the resistance held fixed.
        """
        assert results.time is not None
        columns, excesses = [], []
        for part in results.parts:
            assert part.power_series is not None
            series = part.power_series
            excess = part.power_excess
            if excess is None:
                excess = np.zeros(len(results.time) - 1)
            if part.path in fixed and part.resistance_series is not None:
                assert part.plan is not None and part.plan.model is not None
                held = float(part.plan.model.resistance(fixed[part.path]))
                series = series * part.resistance_series / held
                excess = excess * part.resistance_series[:-1] / held
            columns.append(series)
            excesses.append(excess)
        if not columns:
            return np.zeros((0, 0)), np.zeros((0, 0))
        return np.column_stack(columns), np.column_stack(excesses)
