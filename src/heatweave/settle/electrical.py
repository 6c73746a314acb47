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

import re
from collections.abc import Sequence
from dataclasses import dataclass, field, replace

import numpy as np
import numpy.typing as npt

from heatweave.emit.emitter import Inputs
from heatweave.errors import EmitError, Finding
from heatweave.quantities import format_number
from heatweave.run.prepare import Prepared, RunOptions, prepare, simulate
from heatweave.run.results import RunResults, extract
from heatweave.thermal.circuit import PREFIX, PartPlan, ThermalCircuit, safe

FloatArray = npt.NDArray[np.float64]


def fixed_resistor_deck(text: str, parts: Sequence[PartPlan], temps: Sequence[float]) -> str:
    """*text* (a no-heating emitted deck) with each resistor part a plain R card at R(T)."""
    for part, temp in zip(parts, temps, strict=True):
        assert part.model is not None
        name = f"{PREFIX}{safe(part.path)}"
        held = f"R{PREFIX}fix_{safe(part.path)}"
        pattern = re.compile(rf"^B{re.escape(name)}[ \t]+(\S+)[ \t]+(\S+)[ \t]+I[ \t]*=.*$", re.M)
        value = format_number(float(part.model.resistance(float(temp))))
        if re.search(rf"\b{held}\b", text, re.I):
            raise EmitError(f"the deck already uses the name {held!r}, which settle reserves")
        text, count = pattern.subn(rf"{held} \g<1> \g<2> {value}", text, count=1)
        if count != 1:
            raise EmitError(f"cannot find the behavioural source of {part.path} to hold it fixed")
    return text


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


def repeat_error(time: FloatArray, values: FloatArray, period: float) -> float:
    """How much the last period differs from the one before, relative to the signals' size.

    Compares each signal's period mean and period RMS (exact integrals of the samples, so
    different time points in the two periods do not matter); the result is the largest
    difference divided by that signal's peak magnitude in the last period.
    """
    end = float(time[-1])
    t_last, last = window(time, values, end - period, end)
    t_prev, prev = window(time, values, end - 2 * period, end - period)
    mean_a, rms_a = period_stats(t_last, last)
    mean_b, rms_b = period_stats(t_prev, prev)
    scale = np.maximum(np.max(np.abs(last), axis=0, initial=0.0), 1e-12)
    worst = np.maximum(np.abs(mean_a - mean_b), np.abs(rms_a - rms_b)) / scale
    return float(np.max(worst, initial=0.0))


@dataclass(frozen=True, slots=True)
class Cycle:
    """One settled period of the electrical waveforms at fixed part temperatures."""

    time: FloatArray = field(repr=False)  # one period, both ends
    power: FloatArray = field(repr=False)  # samples x parts (W)
    mean_power: FloatArray  # per part (W)
    voltages: dict[str, float]  # cycle mean of each circuit node (V)
    periods: int  # periods simulated
    repeat: float  # relative difference of the last two periods


class Electrical:
    """Simulates a deck at fixed part temperatures and returns its last period."""

    def __init__(
        self,
        inputs: Inputs,
        options: RunOptions,
        period: float,
        tstep: float,
        wave_tol: float,
    ) -> None:
        self.inputs = inputs
        self.options = options
        self.period = period
        self.tstep = tstep
        self.wave_tol = wave_tol
        self.base: Prepared = prepare(
            inputs, replace(options, analyses=(self._analysis(2),)), heating=False
        )
        circuit = self.base.emitted.circuit
        assert circuit is not None
        self.circuit: ThermalCircuit = circuit
        self.resistors = tuple(p for p in circuit.parts if p.is_resistor)
        self.cycles = 0  # calls of cycle() so far
        self.unsettled: list[tuple[float, int]] = []  # (repeat error, periods) above wave_tol

    @property
    def findings(self) -> list[Finding]:
        """The preparation's findings, then one warning if any cycle never repeated.

        Every cycle of a run sees the same unsuitable drive (a wrong ``--period``), so the
        warning is given once, for the largest difference seen, not once per cycle.
        """
        findings = list(self.base.findings)
        if self.unsettled:
            error, periods = max(self.unsettled)
            findings.append(
                Finding(
                    "warning",
                    f"the electrical waveform still changes by {error:.2g} (relative) from "
                    f"one period to the next after {periods} periods (in "
                    f"{len(self.unsettled)} of {self.cycles} cycles simulated)",
                    None,
                    "pass a larger --periods, or check that the drive really is periodic "
                    "with --period",
                )
            )
        return findings

    def _analysis(self, periods: int) -> str:
        stop = periods * self.period
        # Keep only the last two periods (and a margin) in memory.
        start = max(0.0, stop - 2.0 * self.period - 2.0 * self.tstep)
        numbers = (self.tstep, stop, start, self.tstep)
        return "tran " + " ".join(format_number(n) for n in numbers)

    def simulate(self, temps: Sequence[float], periods: int) -> RunResults:
        """One transient of *periods* periods with resistor parts at *temps* (degC)."""
        text = fixed_resistor_deck(self.base.text, self.resistors, temps)
        prepared = replace(self.base, text=text, analyses=(self._analysis(periods),))
        sim = simulate(prepared, self.options)
        return extract(sim, self.circuit, self.inputs.index)

    def cycle(self, temps: Sequence[float], periods: int, max_periods: int) -> Cycle:
        """The last period at *temps*, simulating more periods (doubling, up to
        *max_periods*) until two successive periods agree within the waveform tolerance."""
        fixed = dict(zip((p.path for p in self.resistors), temps, strict=True))
        while True:
            results = self.simulate(temps, periods)
            assert results.time is not None
            power = self._power(results, fixed)
            names = sorted(results.voltage_series)
            signals = np.column_stack([power, *(results.voltage_series[n] for n in names)])
            error = repeat_error(results.time, signals, self.period)
            if error <= self.wave_tol or periods >= max_periods:
                break
            periods = min(2 * periods, max_periods)
        self.cycles += 1
        if error > self.wave_tol:
            self.unsettled.append((error, periods))
        end = float(results.time[-1])
        times, last = window(results.time, signals, end - self.period, end)
        n = power.shape[1]
        means, _rms = period_stats(times, last)
        voltages = {name: float(means[n + k]) for k, name in enumerate(names)}
        return Cycle(times, last[:, :n], means[:n], voltages, periods, error)

    def _power(self, results: RunResults, fixed: dict[str, float]) -> FloatArray:
        """Each part's instantaneous dissipation (``samples x parts``).

        ``extract`` computes a resistor's power as V^2 / R(T_node); with heating off the
        hot-spot node sits at ambient, so its R is rescaled to the resistance held fixed.
        """
        columns = []
        for part in results.parts:
            assert part.power_series is not None
            series = part.power_series
            if part.path in fixed and part.resistance_series is not None:
                assert part.plan is not None and part.plan.model is not None
                held = float(part.plan.model.resistance(fixed[part.path]))
                series = series * part.resistance_series / held
            columns.append(series)
        return np.column_stack(columns) if columns else np.zeros((0, 0))
