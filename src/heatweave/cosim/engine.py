"""The windowed loop: ngspice runs the plain circuit, the thermal network advances between.

One transient runs in libngspice, paused at every window boundary (``stop when time >``
the boundary; ngspice pauses at its first accepted time point past it, which becomes the
boundary).  While it is paused, the loop reads the new samples of the resistor terminals,
takes each resistor's dissipation at every one of ngspice's time points in the window,
advances the thermal network exactly for it (:class:`heatweave.thermal.sampled.
SampledResponse`, which also gives every temperature at those points, so the peaks are
the instantaneous ones), sets every resistance to its value at the predicted mid-window
temperature of the next window (``alter``), and lets ngspice ``resume``.  A resumed
transient continues from its own state, so the electrical solution is never restarted or
approximated.
"""

from __future__ import annotations

import time as clock
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np
import numpy.typing as npt

from heatweave.run.edges import SourceCorners
from heatweave.simulators import Session, SharedSimulator
from heatweave.thermal.circuit import PartPlan
from heatweave.thermal.sampled import SampledResponse
from heatweave.thermal.solver import Propagator, ThermalSystem

from .bank import ModelBank
from .method import Transient
from .windows import MAX_LOOP_GAIN, WindowRule, error_rate, loop_gain, window_power

FloatArray = npt.NDArray[np.float64]

#: An alter is skipped when the resistance moved by less than this fraction since the last.
ALTER_THRESHOLD = 1e-9


#: A corner counts as landed on when a time point is this close, as a fraction of ngspice's
#: largest step (ngspice merges breakpoints 1e-10 of its largest step apart).
LANDING = 1e-9


#: At most this many corners are handed to ngspice per window (each insertion into its
#: breakpoint table costs the table's length): a window that would hold more ends at the
#: last of them.  Handing over only the next one or two does not do: ngspice 39 does not
#: always carry on a PULSE's breakpoints from one it was given, and never a repeating PWL's.
MAX_LANDING = 4096


class MissedCorner(Exception):
    """ngspice stepped across a corner of a PULSE or PWL source after a resume."""

    def __init__(self, source: str, time: float, before: float, after: float) -> None:
        super().__init__(
            f"ngspice stepped across {source} corner at {time:.6g} s (time points "
            f"{before:.6g} s and {after:.6g} s) after the co-simulation resumed it"
        )
        self.source = source
        self.time = time


class StrongFeedback(Exception):
    """The electrothermal loop gain got too high for the co-simulation to be accurate."""

    def __init__(self, gain: float, time: float) -> None:
        super().__init__(f"electrothermal loop gain {gain:.2f} at {time:.4g} s")
        self.gain = gain
        self.time = time


@dataclass(frozen=True, slots=True)
class Probe:
    """Where one resistor sits in ngspice: its device name and terminal vectors."""

    device: str
    node_a: str | None  # ngspice vector name; None for ground
    node_b: str | None


@dataclass(frozen=True, slots=True)
class Trace:
    """What the loop produced, on the window grid ``time`` (s, from 0, or from the
    transient's tstart: what comes before it is run but not reported, as ngspice saves it).

    ``temperatures`` has one row per output of the thermal system (parts, then shared
    nodes), ``power`` and ``resistance`` one row per part: the mean dissipation over the
    window ending at each time (column 0 repeats the first window) and the resistance at
    each time's temperature.  ``voltages`` are every node voltage at the window ends,
    ``currents`` every branch current (voltage sources, inductors) there.
    ``profile`` says where the wall-clock time went (s), ``stats`` is ngspice's ``rusage``.
    ``tail_time`` and ``tail_power`` (parts x samples) are the instantaneous dissipation at
    ngspice's own time points over the last drive period (:attr:`Plan.period`; the last
    point without one), ``peak_power`` each part's instantaneous peak over the run: what
    :func:`heatweave.run.results.build_part` takes ``power`` and ``peak_power`` from.
    ``peak_temperature`` is each output's highest temperature at any of ngspice's time
    points (not only at window ends), ``first_time`` ngspice's first time point (above 0
    when a ``uic`` transient leaves t = 0 out), ``extremes`` every node voltage's and
    branch current's ``(min, max)`` over all of ngspice's time points (``v(out)``,
    ``i(vamm)``).
    """

    time: FloatArray
    temperatures: FloatArray
    power: FloatArray
    resistance: FloatArray
    voltages: dict[str, FloatArray]
    log: str
    profile: dict[str, float] = field(default_factory=dict)
    stats: str = ""
    currents: dict[str, FloatArray] = field(default_factory=dict)
    tail_time: FloatArray = field(default_factory=lambda: np.zeros(0), repr=False)
    tail_power: FloatArray = field(default_factory=lambda: np.zeros((0, 0)), repr=False)
    peak_power: FloatArray = field(default_factory=lambda: np.zeros(0), repr=False)
    peak_temperature: FloatArray = field(default_factory=lambda: np.zeros(0), repr=False)
    first_time: float = 0.0
    extremes: dict[str, tuple[float, float]] = field(default_factory=dict, repr=False)

    @property
    def windows(self) -> int:
        """Number of windows run."""
        return int(self.time.shape[0] - 1)


class _Clock:
    def __init__(self) -> None:
        self.spent: dict[str, float] = {}
        self.mark = clock.perf_counter()

    def lap(self, what: str) -> None:
        now = clock.perf_counter()
        self.spent[what] = self.spent.get(what, 0.0) + now - self.mark
        self.mark = now


@dataclass(frozen=True, slots=True)
class Plan:
    """What one co-simulation needs besides the deck: the resistor parts and where they
    sit in ngspice, the assembled thermal system, the ambient, the transient and the
    temperature tolerance (K) of the window rule."""

    parts: Sequence[PartPlan]
    probes: Sequence[Probe]
    system: ThermalSystem
    ambient: float
    tran: Transient
    tolerance: float
    period: float | None = None  # the drive's period (heatweave.run.drive)
    corners: SourceCorners | None = None  # the PULSE/PWL corners ngspice must land on


def cosimulate(
    deck: str,
    cwd: str | Path,
    plan: Plan,
    timeout: float | None = None,
    init_file: str | Path | None = None,
) -> Trace:
    """Run the windowed co-simulation of *deck* (the plain circuit, no analysis cards);
    *timeout* (s) bounds the whole run, windows included.  *cwd* is where files the deck
    names are found; ngspice reads no init file but *init_file* (see the back end)."""
    simulator = SharedSimulator()
    with simulator.session(deck, cwd=cwd, timeout=timeout, init_file=init_file) as session:
        return _Loop(session, plan).run()


def rows(index: Sequence[int]) -> slice | npt.NDArray[np.intp]:
    """Row numbers to pick: a slice (a view, no copy) when they run consecutively."""
    found = np.array(index, dtype=np.intp)
    if found.shape[0] and np.array_equal(found, np.arange(found[0], found[0] + found.shape[0])):
        return slice(int(found[0]), int(found[0]) + found.shape[0])
    return found


class _Loop:
    """One co-simulation's state between windows."""

    def __init__(self, session: Session, plan: Plan) -> None:
        parts, probes, system, tran = plan.parts, plan.probes, plan.system, plan.tran
        self.session = session
        self.bank = ModelBank([p.model for p in parts if p.model is not None])
        self.probes = probes
        self.system = system
        self.ambient = plan.ambient
        self.tran = tran
        self.response = SampledResponse(Propagator(system))  # ValueError: no modes
        tau_min = float(system.time_constants[0])
        self.rule = WindowRule(plan.tolerance, tau_min, min_window=tran.tstep)
        # The terminals read at every window: first ends in the resistors' order, then the
        # second ends not among them, then ground; a chain of resistors then takes its
        # drops as the difference of two blocks of rows, without gathering any.
        ends = [p.node_a for p in probes] + [p.node_b for p in probes]
        self.nodes = list(dict.fromkeys(n for n in ends if n is not None))
        row = {name: k for k, name in enumerate(self.nodes)}
        ground = len(self.nodes)
        self.index_a = rows([row[p.node_a] if p.node_a else ground for p in probes])
        self.index_b = rows([row[p.node_b] if p.node_b else ground for p in probes])
        self.held = np.zeros(self.bank.size)
        self.period = plan.period
        self.corners = plan.corners
        self.max_step = tran.tmax or min(tran.tstep, (tran.tstop - tran.tstart) / 50)
        # A tstart: ngspice runs from 0 with the step it would take for the deck's card and
        # lands on tstart; what is reported is what the full deck saves, [tstart, tstop].
        self.command = tran.command()
        if tran.tstart > 0.0:
            self.command = replace(tran, tstart=0.0, tmax=self.max_step).command()
        self.saved = tran.tstart * (1 - 1e-12)  # reported from here on
        self.tail_time = np.zeros(0)
        self.tail_power = np.zeros((self.bank.size, 0))
        self.peak = np.full(self.bank.size, -np.inf)
        self.hottest = np.full(len(system.outputs), -np.inf)
        self.clock = _Clock()

    def keep(self, t: FloatArray, power: FloatArray) -> None:
        """Record a window's instantaneous dissipation (*power* at its time points *t*):
        its peak, and the samples of the last drive period (one sample before the period's
        start too, to interpolate it); what lies before tstart is not reported."""
        if t.shape[0] and t[-1] < self.saved:
            return
        if t[0] < self.saved:
            t, power = (
                t[np.searchsorted(t, self.saved) :],
                power[:, np.searchsorted(t, self.saved) :],
            )
        if power.size:
            self.peak = np.maximum(self.peak, power.max(axis=1))
        held = max(self.tail_time.shape[0] - 1, 0)  # a window starts at the last one's end
        if held:
            t = np.concatenate((self.tail_time[:-1], t))
        first = t.shape[0] - 1
        if self.period is not None:
            first = max(int(np.searchsorted(t, t[-1] - self.period, side="right")) - 1, 0)
        if first >= held:  # the window alone holds the period: join nothing
            power = power[:, first - held :]
        else:
            power = np.concatenate((self.tail_power[:, first:-1], power), axis=1)
        self.tail_time, self.tail_power = t[first:].copy(), np.array(power)

    def landing(self, now: float, until: float | None) -> FloatArray:
        """The corners the next part of the transient must land on: those after *now* up to
        where it may pause (one step past *until*)."""
        high = self.tran.tstop if until is None else min(until + self.max_step, self.tran.tstop)
        found = (
            np.zeros(0)
            if self.corners is None
            else self.corners.between(now + LANDING * self.max_step, high)[0]
        )
        if now < self.saved <= high:  # a time point on tstart, where the results start
            found = np.union1d(found, [self.tran.tstart])
        return found

    def end_before_crowding(self, now: float, target: float) -> float:
        """*target*, or earlier: the :data:`MAX_LANDING`-th corner after *now*, so that no
        window holds more corners than are handed to ngspice."""
        if self.corners is None:
            return target
        ahead = self.corners.first(now + LANDING * self.max_step, MAX_LANDING)
        if ahead.shape[0] < MAX_LANDING:
            return target
        return min(target, max(float(ahead[-1]), now + self.tran.tstep))

    def landed(self, t: FloatArray) -> None:
        """Raise :class:`MissedCorner` when a corner inside the window of time points *t*
        has no time point on it: ngspice then steps straight across a source's edge."""
        if self.corners is None:
            return
        times, owners = self.corners.between(float(t[0]), float(t[-1]))
        if not times.shape[0]:
            return
        at = np.clip(np.searchsorted(t, times), 1, t.shape[0] - 1)
        gap = np.minimum(np.abs(t[at] - times), np.abs(t[at - 1] - times))
        missed = np.flatnonzero(gap > LANDING * self.max_step)
        if missed.shape[0]:
            k = int(missed[0])
            raise MissedCorner(owners[k], float(times[k]), float(t[at[k] - 1]), float(t[at[k]]))

    def hold(self, values: FloatArray, threshold: FloatArray | float = ALTER_THRESHOLD) -> None:
        """``alter`` every resistor whose held value moved by more than *threshold*."""
        changed = np.abs(values - self.held) > threshold * np.abs(self.held)
        for j in np.flatnonzero(changed).tolist():
            self.session.alter(self.probes[j].device, float(values[j]))
        self.held = np.where(changed, values, self.held)
        self.clock.lap("alter")

    def tail(self, name: str, start: int, length: int | None = None) -> FloatArray:
        """Samples *start* onwards of vector *name* (*length* of them, or all)."""
        return self.session.samples(name, start, None if length is None else start + length)

    def run(self) -> Trace:
        system, n_parts, bank = self.system, self.bank.size, self.bank
        z = system.rest_state(self.ambient)
        power = np.zeros(n_parts)
        temps = system.temperatures(z, system.inputs(power, self.ambient))
        self.hold(bank.resistance(temps[:n_parts]))
        times, rows, powers, ohms = [0.0], [temps], [power], [bank.resistance(temps[:n_parts])]
        if not self.saved > 0.0:
            self.hottest = temps.copy()
        first = None
        ends = [0]
        h, start, now = self.rule.first(), 0, 0.0
        gain = system.dc_gain[:n_parts, :n_parts]
        while now < self.tran.tstop * (1 - 1e-12):
            target = self.end_before_crowding(now, now + h)
            if now < self.saved < target:  # a window ends on tstart
                target = self.tran.tstart
            until = target if target < self.tran.tstop * (1 - 1e-9) else None
            self.session.advance(self.command, until, self.landing(now, until).tolist())
            self.clock.lap("ngspice")
            t = self.tail("time", start)
            if t.shape[0] < 2:
                break
            self.landed(t)
            if first is None and t[-1] >= self.saved:
                first = float(t[np.searchsorted(t, self.saved)])
            inputs = self._inputs(start, t.shape[0])
            self.clock.lap("read")
            drops = inputs[:n_parts]
            power = window_power(t, drops, self.held)
            samples = np.divide(drops, self.held[:, None], out=drops)  # squared by then
            self.keep(t, samples)
            step = float(t[-1] - t[0])
            u = system.inputs(power, self.ambient)
            if t[0] < self.saved <= t[-1]:  # the window holding tstart: peaks from there on
                z, at_samples = self.response.run(z, t, inputs)
                later = at_samples[:, np.searchsorted(t, self.saved) :]
                self.hottest = np.maximum(self.hottest, later.max(axis=1))
                temps = at_samples[:, -1].copy()
            else:
                z, temps, top = self.response.peaks(z, t, inputs)
                if t[-1] >= self.saved:
                    self.hottest = np.maximum(self.hottest, top)
            now, start = float(t[-1]), start + t.shape[0] - 1
            times.append(now)
            ends.append(start)
            rows.append(temps)
            powers.append(power)
            part_temps = temps[:n_parts]
            ohms.append(bank.resistance(part_temps))
            rate = system.c[:n_parts] @ system.derivative(z, u)
            log_slope = bank.slope(part_temps) / ohms[-1]
            loop = loop_gain(gain, power, log_slope)
            if loop > MAX_LOOP_GAIN:
                raise StrongFeedback(loop, now)
            h = self.rule.next(step, error_rate(gain, power, log_slope, rate))
            mid = part_temps + rate * min(h, self.tran.tstop - now) / 2
            self.clock.lap("thermal")
            self.hold(bank.resistance(mid), self.rule.alter_threshold(gain, power))
        if self.saved > 0.0:  # the window grid from tstart on (a window ends there)
            kept = int(np.searchsorted(np.array(times), self.saved))
            times, rows, powers = times[kept:], rows[kept:], powers[kept:]
            ohms, ends = ohms[kept:], ends[kept:]
        powers[0] = powers[1] if len(powers) > 1 else powers[0]
        voltages, currents, extremes = self._signals(np.array(ends))
        self.clock.lap("read")
        stats = self._stats()
        return Trace(
            np.array(times),
            np.array(rows).T,
            np.array(powers).T,
            np.array(ohms).T,
            voltages,
            self.session.log,
            dict(self.clock.spent),
            stats,
            currents,
            self.tail_time,
            self.tail_power,
            self.peak,
            self.hottest,
            0.0 if first is None else first,
            extremes,
        )

    def _inputs(self, start: int, length: int) -> FloatArray:
        """The thermal inputs' array for the window's *length* samples from *start*: the
        voltage across every resistor (one row each), then the ambient."""
        matrix = np.empty((len(self.nodes) + 1, length))
        matrix[-1] = 0.0  # ground
        self.session.read_rows(self.nodes, start, matrix[:-1])
        inputs = np.empty((len(self.probes) + 1, length))
        np.subtract(matrix[self.index_a], matrix[self.index_b], out=inputs[:-1])
        inputs[-1] = self.ambient
        return inputs

    def _signals(
        self, ends: npt.NDArray[np.intp]
    ) -> tuple[dict[str, FloatArray], dict[str, FloatArray], dict[str, tuple[float, float]]]:
        """Every node voltage and branch current of the transient at the window ends, and
        each one's ``(min, max)`` over every time point from the first end on, where the
        results start (keys ``v(NAME)``, ``i(NAME)``)."""
        return self.session.signals_at(ends)

    def _stats(self) -> str:
        return self.session.stats()
