"""``settle``: the thermal steady state of a periodically driven circuit, without
simulating every switching period until the temperatures stop moving.

Method: relaxation between the two time scales, the averaged-power (quasi-static)
coupling of electrothermal co-simulation by simulator coupling: an electrical simulator and
a thermal network solver exchange dissipated powers and temperatures until they agree.
Reference, from memory (check before quoting): S. Wünsche, C. Clauß, P. Schwarz and
F. Winkler, "Electro-thermal circuit simulation using simulator coupling", IEEE
Transactions on VLSI Systems, 1997.  The electrical waveform settles within a few
switching periods while the temperatures take many thermal time constants, so the two are
solved in turn:

1. hold every part at a temperature ``T_k`` (each annotated resistor becomes a plain
   resistor at ``R(T_k)``) and simulate periods until two successive periods agree;
2. take each part's dissipation averaged over the last period;
3. solve the linear thermal network for its steady state under those powers;
4. repeat from 1 with the new temperatures until the largest change is below ``tol``.

The fixed point ``T = G(T)`` (``G``: temperatures -> averaged powers -> steady
temperatures) is solved with Broyden's method (C. G. Broyden, "A class of methods for
solving nonlinear simultaneous equations", Mathematics of Computation, 1965; from
memory).  It begins as the plain relaxation step and turns into a secant (quasi-Newton)
step, so loop gains close to 1, where plain relaxation crawls, take a handful of
iterations.  A loop gain ``dG/dT`` of 1 or more means each kelvin of warming raises the
dissipation enough to warm the part by a kelvin or more: there is no stable operating
point, and ``settle`` reports thermal runaway.

The ripple within a period is the periodic steady state of the thermal network driven by
the instantaneous power of the last settled period (exact, see
:func:`heatweave.settle.thermal.periodic`).  The method assumes that
ripple is small enough that resistances do not change noticeably within a period.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field, replace

import numpy as np
import numpy.typing as npt

from heatweave.emit.emitter import Inputs, load_inputs
from heatweave.errors import ConvergenceError, Finding, ThermalRunawayError, UsageError
from heatweave.run.prepare import RunOptions, with_deadline
from heatweave.run.results import (
    IMPLAUSIBLE_TEMPERATURE,
    SETTLED,
    PartResult,
    RunResults,
    range_warning,
)
from heatweave.run.unverified import Disagreement
from heatweave.run.verify import NoSteadyStateError
from heatweave.run.waves import DrivePeriod, drive_period, seconds
from heatweave.settle.electrical import Cycle, Electrical
from heatweave.settle.thermal import periodic
from heatweave.settle.vetting import (
    disagreements,
    late_warning,
    settled_parts,
    vet_cycle,
    vetting_tolerances,
)
from heatweave.settle.warmup import Envelope, warm_up
from heatweave.thermal.balance import Verdict, check_state
from heatweave.thermal.solver import ThermalSystem, assemble

FloatArray = npt.NDArray[np.float64]

#: Temperature step (K) of the finite differences that measure a reported loop gain.
GAIN_STEP = 0.1


@dataclass(frozen=True, slots=True)
class Step:
    """What one iteration did, for progress lines and the JSON history."""

    iteration: int
    change: float  # largest temperature change (K)
    hottest: str
    temperature: float  # the hottest part's new temperature (degC)
    periods: int
    gain: float | None  # dominant loop gain dG/dT (signed), once two evaluations exist


@dataclass(frozen=True, slots=True)
class SettleOptions:
    """How to settle: the drive period (``None``: the deck's sources' common period) and
    the iteration's tolerances."""

    period: float | None = None
    periods: int = 4
    tstep: float | None = None
    tol: float = 0.01
    max_iter: int = 30
    wave_tol: float = 1e-4
    max_periods: int = 256
    envelope: float | None = None
    envelope_points: int = 30
    #: Also simulate the settled period without self-heating (every part at ambient), the
    #: reference of drift limits.
    baseline: bool = False
    ambient: float | None = None
    backend: str = "auto"
    allow_control: bool = False
    timeout: float | None = None
    init_file: str | None = None
    progress: Callable[[Step], None] | None = field(default=None, compare=False)

    def run_options(self) -> RunOptions:
        """The options of each electrical simulation."""
        return RunOptions(
            ambient=self.ambient,
            backend=self.backend,
            allow_control=self.allow_control,
            timeout=self.timeout,
            init_file=self.init_file,
        )


@dataclass(frozen=True, slots=True)
class Settled:
    """The result of :func:`settle`; ``drive`` says where the period comes from.

    ``parts`` are :func:`~heatweave.run.results.build_part`'s results over the settled period,
    so every key means what it means for ``run``: ``temperature`` is the period mean,
    ``peak_temperature`` and ``valley_temperature`` the period's extremes, ``power`` the
    period-mean dissipation, ``resistance`` the model's value at the mean temperature."""

    period: float
    ambient: float
    parts: tuple[PartResult, ...]
    nodes: dict[str, float]
    node_peaks: dict[str, float]
    node_valleys: dict[str, float]
    voltages: dict[str, float]
    iterations: int
    final_change: float
    periods: int
    gain: float | None
    history: tuple[Step, ...]
    findings: tuple[Finding, ...]
    envelope: Envelope | None = None
    drive: DrivePeriod | None = None
    #: The last settled period's node voltages (V), on the parts' power sample times.
    voltage_series: dict[str, FloatArray] = field(default_factory=dict, repr=False)
    #: Each part's dissipation over the settled period (samples x parts, W) and the times
    #: of those samples from the period's start (s).
    time: FloatArray | None = field(default=None, repr=False)
    power: FloatArray | None = field(default=None, repr=False)
    #: Temperatures over the settled period (samples x outputs: parts, then nodes; degC).
    temperatures: FloatArray | None = field(default=None, repr=False)
    #: With ``SettleOptions.baseline``: the period without self-heating, its times from the
    #: period's start and node voltages.
    baseline: tuple[FloatArray, dict[str, FloatArray]] | None = field(default=None, repr=False)
    #: Figures the settled period's own numbers do not back (:mod:`heatweave.settle.vetting`).
    unverified: tuple[Disagreement, ...] = ()

    def as_results(self) -> RunResults:
        """The settled period as the results of a run over that one period (analysis
        :data:`~heatweave.run.results.SETTLED`, times from the period's start), so reports
        and limits read it as any run."""
        assert self.time is not None and self.temperatures is not None
        n = len(self.parts)
        node_series = {label: self.temperatures[:, n + j] for j, label in enumerate(self.nodes)}
        return RunResults(
            SETTLED, self.ambient, self.parts, dict(self.nodes), dict(self.voltages),
            self.time, node_series, dict(self.voltage_series), period=self.period,
            unverified=self.unverified,
        )  # fmt: skip


def _ambient(inputs: Inputs, options: SettleOptions) -> float:
    if options.ambient is not None:
        return options.ambient
    if inputs.annotation.ambient.profile is not None:
        raise UsageError(
            "settle needs a fixed ambient temperature; the annotation gives a profile",
            hint="pass --ambient DEGC for the temperature to settle at",
        )
    return inputs.annotation.ambient.temperature


def check_options(options: SettleOptions) -> None:
    """Refuse option values the method cannot use."""
    if options.period is not None and not options.period > 0:
        raise UsageError("--period must be greater than zero", hint="e.g. --period 1m")
    if options.periods < 2:
        raise UsageError(
            "--periods must be at least 2", hint="two periods are needed to see them repeat"
        )
    if options.tstep is not None and not 0 < options.tstep < (options.period or math.inf):
        raise UsageError(
            "--tstep must be positive and shorter than --period",
            hint="leave it out for period/400",
        )
    if not options.tol > 0:
        raise UsageError("--tol must be greater than zero", hint="e.g. --tol 0.01 (kelvin)")
    if options.max_iter < 1:
        raise UsageError("--max-iter must be at least 1", hint="e.g. --max-iter 30")


class _Loop:
    """The fixed-point iteration over the resistor parts' temperatures (Broyden)."""

    def __init__(self, electrical: Electrical, system: ThermalSystem, ambient: float,
                 options: SettleOptions) -> None:  # fmt: skip
        self.electrical = electrical
        self.system = system
        self.ambient = ambient
        self.options = options
        parts = electrical.circuit.parts
        self.index = [k for k, p in enumerate(parts) if p.is_resistor]
        self.names = [parts[k].path for k in self.index]
        self.periods = options.periods
        self.evaluations = 0
        self.settled_at = np.zeros(len(self.index))

    def evaluate(self, temps: FloatArray) -> tuple[Cycle, FloatArray]:
        """Averaged powers at *temps* and the steady temperatures they give (all outputs)."""
        limit = max(self.options.max_periods, self.periods)
        cycle = self.electrical.cycle(list(temps), self.periods, limit)
        self.periods = cycle.periods
        self.evaluations += 1
        return cycle, steady(self.system, cycle.mean_power, self.ambient)

    def runaway(self, gain: FloatArray, temps: FloatArray, why: str) -> ThermalRunawayError:
        """The error naming the part that carries the dominant loop gain."""
        values, vectors = np.linalg.eig(gain)
        k = int(np.argmax(values.real))
        part = int(np.argmax(np.abs(vectors[:, k])))
        plan = self.electrical.circuit.parts[self.index[part]]
        return ThermalRunawayError(
            f"thermal runaway: {plan.path} has loop gain {values[k].real:.3f} "
            f"(at {temps[part]:.1f} degC): {why}",
            plan.location,
            "lower the drive, voltage or duty, improve its thermal path (smaller rth), or "
            "choose a part whose resistance changes less with temperature",
        )

    def bounds(self) -> tuple[FloatArray, FloatArray]:
        """Per resistor part, the temperatures the iteration may try: its model's range
        (where the formula holds), else up to :data:`IMPLAUSIBLE_TEMPERATURE`."""
        lo, hi = [], []
        for k in self.index:
            model = self.electrical.circuit.parts[k].model
            found = model.valid_range if model is not None else None
            lo.append(found.low if found else -273.15)
            hi.append(min(found.high if found else math.inf, IMPLAUSIBLE_TEMPERATURE))
        return np.array(lo), np.array(hi)

    def measured_gain(self, temps: FloatArray, out: FloatArray) -> FloatArray:
        """``dG/dT`` at *temps* (where ``G`` gave *out*) by backward differences of
        :data:`GAIN_STEP`, one evaluation per part: the loop gain where it is reported,
        not the secant estimate of the iteration so far."""
        n = len(self.index)
        gain = np.zeros((n, n))
        for j in range(n):
            shifted = temps.copy()
            shifted[j] -= GAIN_STEP
            _, lower = self.evaluate(shifted)
            gain[:, j] = (out[self.index] - lower[self.index]) / GAIN_STEP
        return gain

    def run(self, start: FloatArray | None = None) -> tuple[Cycle, list[Step]]:
        """Iterate from ambient (or *start*) until settled: the last period and every step
        taken.

        Steps are kept inside :meth:`bounds`.  A part held at its bound whose heating
        pushes it past the bound is examined there: with a loop gain of 1 or more it runs
        away out of the range; below 1 (a hot part, not a runaway) a model range is left
        open and the iteration goes on beyond it, reported by :func:`range_warnings`."""
        n = len(self.index)
        temps = np.full(n, self.ambient) if start is None else start
        low, high = self.bounds()
        steps: list[Step] = []
        jac = -np.eye(n)  # Broyden's estimate of d(G(T) - T)/dT; -I = plain relaxation
        last: tuple[FloatArray, FloatArray] | None = None
        for iteration in range(1, self.options.max_iter + 1):
            cycle, out = self.evaluate(temps)
            residual = out[self.index] - temps
            change = float(np.max(np.abs(residual), initial=0.0))
            if last is not None:
                step, moved = temps - last[0], residual - last[1]
                norm = float(step @ step)
                if norm > 0:
                    jac = jac + np.outer(moved - jac @ step, step) / norm
            gain = jac + np.eye(n) if last is not None else None
            steps.append(self._step(iteration, change, out, gain))
            if self.options.progress is not None:
                self.options.progress(steps[-1])
            pushed = (temps >= high) & (residual > 0) | (temps <= low) & (residual < 0)
            if np.any(pushed):
                # Held at a bound and pushed past it: judged by the gain measured there.
                low, high = self.past_bound(temps, out, pushed, low, high)
            elif gain is not None and n and float(np.max(np.linalg.eigvals(gain).real)) >= 1.0:
                raise self.runaway(
                    gain, temps, "each kelvin it warms raises its dissipation enough to warm "
                    "it by a kelvin or more, so there is no stable operating point",
                )  # fmt: skip
            if change < self.options.tol:
                self.settled_at = temps  # the temperatures the last period was run at
                return cycle, steps
            last = (temps, residual)
            proposed = temps - np.linalg.solve(jac, residual)
            # Heating alone keeps every part above absolute zero: a step below it is a
            # secant gone astray, so take the plain relaxation step instead.
            proposed = proposed if float(np.min(proposed)) > -273.15 else out[self.index]
            if not np.all(np.isfinite(proposed)):
                raise self.runaway(
                    self.measured_gain(temps, out), temps, "its temperature heads to "
                    "values that are not numbers",
                )  # fmt: skip
            temps = np.clip(proposed, low, high)
        raise ConvergenceError(
            f"the temperatures did not settle within {self.options.max_iter} iterations "
            f"(last change {steps[-1].change:.3g} K, tolerance {self.options.tol:g} K)",
            hint="raise --max-iter, loosen --tol, or check the waveform repeats (--periods)",
        )

    def past_bound(self, temps: FloatArray, out: FloatArray, pushed: npt.NDArray[np.bool_],
                   low: FloatArray, high: FloatArray) -> tuple[FloatArray, FloatArray]:  # fmt: skip
        """Parts at their bound (*temps*) pushed past it: a runaway error when the loop
        gain there is 1 or more, or at :data:`IMPLAUSIBLE_TEMPERATURE`; otherwise the
        bounds with those parts' model ranges opened."""
        gain = self.measured_gain(temps, out)
        parts = self.electrical.circuit.parts
        j = int(np.flatnonzero(pushed)[0])
        model = parts[self.index[j]].model
        found = model.valid_range if model is not None else None
        at_range = found is not None and temps[j] in (found.low, found.high)
        if float(np.max(np.linalg.eigvals(gain).real)) >= 1.0 and at_range:
            assert found is not None
            raise self.runaway(
                gain, temps, f"there its {parts[self.index[j]].model_name} model's range ends "
                f"({found.describe()}) and it still heats faster than its path cools it, so "
                "no steady state exists inside that range",
            )  # fmt: skip
        if not at_range:
            raise self.runaway(
                gain, temps, f"its temperature heads beyond {IMPLAUSIBLE_TEMPERATURE:g} degC"
            )
        opened = pushed & ((temps == low) | (temps == high))
        return np.where(opened, -273.15, low), np.where(opened, IMPLAUSIBLE_TEMPERATURE, high)

    def _step(self, iteration: int, change: float, out: FloatArray,
              gain: FloatArray | None) -> Step:  # fmt: skip
        parts = self.electrical.circuit.parts
        hottest = int(np.argmax(out[: len(parts)])) if parts else 0
        rho = None
        if gain is not None and gain.size:
            values = np.linalg.eigvals(gain)
            rho = float(values[int(np.argmax(np.abs(values)))].real)
        return Step(
            iteration, change, parts[hottest].path if parts else "",
            float(out[hottest]) if parts else self.ambient, self.periods, rho,
        )  # fmt: skip


def settle(
    deck_path: str,
    annotation_path: str,
    options: SettleOptions,
    *,
    inputs: Inputs | None = None,
) -> Settled:
    """The periodic electrothermal steady state of a deck driven with period
    ``options.period``, or the common period of its sources (see the module docstring for
    the method and :mod:`heatweave.run.waves` for the period)."""
    check_options(options)
    inputs = inputs or load_inputs(deck_path, annotation_path)
    if not inputs.bound:
        raise UsageError(
            f"no annotated parts: {inputs.annotation_path} names no part of the deck, so "
            "there is no temperature to settle (settle finds the annotated parts' periodic "
            "steady state)",
            hint="add a [part.NAME] table for each element whose self-heating you want, or "
            "use run to see the deck's node values at the ambient",
        )
    ambient = _ambient(inputs, options)
    drive = drive_period(inputs.index, options.period)
    period = drive.period
    if options.tstep is not None and not options.tstep < period:
        raise UsageError(
            f"--tstep must be shorter than the period ({seconds(period)})",
            hint="leave it out for period/400",
        )
    # Every source's period sampled finely, however many of them the period holds.
    tstep = options.tstep or min(period / 400.0, (drive.shortest or period) / 100.0)
    run_options = with_deadline(options.run_options())  # one limit for every period run
    electrical = Electrical(inputs, run_options, period, tstep, options.wave_tol, drive.start)
    circuit = electrical.circuit
    system = assemble(circuit)
    loop = _Loop(electrical, system, ambient, options)
    cycle, steps = loop.run()
    # run's sampling check; a finer step found, the iteration goes on with it
    tolerances = vetting_tolerances(electrical.base.text)
    done, found = vet_cycle(electrical, system, loop.settled_at, cycle,
                            (loop.periods, options.max_periods), ambient, tolerances)  # fmt: skip
    if done.kept is not None:
        electrical.tstep = done.kept[0]
        cycle, more = loop.run(loop.settled_at)
        steps += [replace(step, iteration=len(steps) + step.iteration) for step in more]
    ripple = periodic(system, cycle.time, cycle.power, ambient)
    verdict = verify_settled(loop, ripple.mean, cycle.mean_power)
    parts = settled_parts(circuit, cycle, ripple, period)
    unverified = done.found
    if done.kept is not None:  # the period reported is the last iteration's: checked again
        unverified = disagreements(system, circuit, cycle, ripple, period, tolerances)
    kept = done.findings if unverified else tuple(f for f in done.findings if f.severity == "note")
    checked = kept + late_warning(found, done, unverified, electrical.tstep)
    n = len(circuit.parts)
    labels = [node.label for node in circuit.nodes]
    envelope = None
    if options.envelope is not None:
        envelope = warm_up(
            system, ambient, circuit, lambda temps: loop.evaluate(temps[loop.index])[0].mean_power,
            options.envelope, options.envelope_points,
        )  # fmt: skip
    rho = steps[-1].gain
    baseline = None
    if options.baseline:
        cold = electrical.cycle([ambient] * len(loop.index), loop.periods, options.max_periods)
        baseline = (cold.time - cold.time[0], cold.series)
    return Settled(
        period=period,
        ambient=ambient,
        parts=tuple(parts),
        nodes={label: float(ripple.mean[n + j]) for j, label in enumerate(labels)},
        node_peaks={label: float(ripple.peak[n + j]) for j, label in enumerate(labels)},
        node_valleys={label: float(ripple.valley[n + j]) for j, label in enumerate(labels)},
        voltages=cycle.voltages,
        iterations=len(steps),
        final_change=steps[-1].change,
        periods=cycle.periods,
        gain=rho,
        history=tuple(steps),
        findings=(*electrical.findings, *checked, *range_warnings(parts), *verdict.warnings),
        envelope=envelope,
        drive=drive,
        voltage_series=cycle.series,
        time=cycle.time - cycle.time[0],
        power=cycle.power,
        temperatures=ripple.outputs,
        baseline=baseline,
        unverified=unverified,
    )


def verify_settled(loop: _Loop, mean: FloatArray, power: FloatArray) -> Verdict:
    """The mean state's heat balance (:func:`~heatweave.thermal.balance.check_state`), with
    the resistor parts at the temperatures their powers were computed at; a state that fails
    is refused (exit 7), never reported."""
    circuit = loop.electrical.circuit
    state = np.array(mean, dtype=float)
    state[loop.index] = loop.settled_at
    verdict = check_state(circuit, state, power, loop.ambient, accuracy=loop.options.tol)
    if not verdict.ok:
        raise NoSteadyStateError(
            f"no verified periodic steady state: {verdict.reason()}",
            hint="tighten --tol, or run a transient from cold (heatweave run --tran) to see "
            "where the temperatures go",
        )
    return verdict


def range_warnings(parts: list[PartResult]) -> list[Finding]:
    """A warning for each part whose settled period leaves its model's range."""
    found = []
    for part in parts:
        model = part.plan.model if part.plan is not None else None
        span = model.valid_range if model is not None else None
        if part.plan is None or span is None or part.valley_temperature is None:
            continue
        if part.hottest > span.high:
            found.append(range_warning(part.plan, part.hottest, span.high))
        elif part.valley_temperature < span.low:
            found.append(range_warning(part.plan, part.valley_temperature, span.low))
    return found


def steady(system: ThermalSystem, power: FloatArray, ambient: float) -> FloatArray:
    """Temperatures (parts, then shared nodes) at rest under constant *power*."""
    state = system.steady_state(power, ambient)
    return system.temperatures(state, system.inputs(power, ambient))
