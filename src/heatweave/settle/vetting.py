"""Is a settled period resolved finely enough?  ``run``'s sampling check, applied to ``settle``.

``settle``'s mean power is the trapezoid of the power over the simulator's points within
the last period, and its peak and valley temperatures the network's periodic response to
the straight lines through those points.  A ramp or a corner crossed in one or two steps
makes both depend on what happens between the points.  The checks are ``run``'s
(:mod:`heatweave.run.stepcheck`, README "How a result is verified"):

* *sampling*: each part's ``power_error`` (:func:`heatweave.run.sampling.sampling_error`
  over the period, from the cycle's per-step excess) at most ``2 reltol`` of its mean;
* *ripple*: how far the peak and valley may move for the same difference of the power
  (:func:`heatweave.settle.thermal.ripple_bound`) at most ngspice's accuracy on a node
  voltage, ``reltol |T| + vntol``.

A period that fails is simulated again with a smaller step (:func:`heatweave.run.stepcheck.
refine`, as ``run`` does); what still fails is listed (``settle --check`` fails it).
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt

from heatweave.errors import Finding
from heatweave.run.results import SETTLED, PartResult, RunResults, build_part
from heatweave.run.stepcheck import Refined, refine, sampling, step_hint, unverified_finding
from heatweave.run.unverified import Disagreement
from heatweave.run.verify import solver_tolerances
from heatweave.run.waves import seconds
from heatweave.settle.electrical import Cycle, Electrical
from heatweave.settle.thermal import Periodic, periodic, ripple_bound
from heatweave.thermal.balance import ABSTOL_T
from heatweave.thermal.circuit import ThermalCircuit
from heatweave.thermal.solver import ThermalSystem

FloatArray = npt.NDArray[np.float64]


def settled_parts(
    circuit: ThermalCircuit, cycle: Cycle, ripple: Periodic, period: float
) -> list[PartResult]:
    """Each part's result over the settled period (:func:`build_part`): the cycle mean is
    the settled temperature, peak and valley its extremes, ``power_error`` the sampling
    error of the mean power over the period."""
    time = cycle.time - cycle.time[0]
    return [
        build_part(
            plan, ripple.outputs[:, k], cycle.power[:, k], time=time, period=period,
            temperature_value=float(ripple.mean[k]), excess=cycle.excess[:, k],
        )
        for k, plan in enumerate(circuit.parts)
    ]  # fmt: skip


def disagreements(
    system: ThermalSystem, circuit: ThermalCircuit, cycle: Cycle, ripple: Periodic,
    period: float, tolerances: tuple[float, float],
) -> tuple[Disagreement, ...]:  # fmt: skip
    """Every part (and shared node) of a settled period whose figures fail the checks of
    the module docstring; *tolerances* are ``(reltol, vntol)`` of the deck."""
    reltol, vntol = tolerances
    parts = tuple(settled_parts(circuit, cycle, ripple, period))
    time = cycle.time - cycle.time[0]
    results = RunResults(SETTLED, 0.0, parts, {}, {}, time, period=period)
    found = list(sampling(results, reltol))
    bound = ripple_bound(system, period, cycle.excess, cycle.time)
    if bound is None:
        return tuple(found)
    names = [p.path for p in circuit.parts] + [f"node {n.label}" for n in circuit.nodes]
    for k, name in enumerate(names):
        top = float(np.max(np.abs(ripple.outputs[:, k])))
        allowed = reltol * top + vntol
        if bound[k] > allowed:
            found.append(Disagreement(name, "ripple", float(bound[k]), allowed))
    return tuple(found)


def vet_cycle(
    electrical: Electrical, system: ThermalSystem, temps: FloatArray, cycle: Cycle,
    limits: tuple[int, int], ambient: float, tolerances: tuple[float, float],
) -> tuple[Refined[tuple[float, Cycle]], tuple[Disagreement, ...]]:  # fmt: skip
    """*cycle* (simulated at *temps*, ``limits``: periods and most periods) checked, and
    while it fails simulated again with smaller steps (:func:`refine`): what was done,
    and what *cycle* fails.  ``kept`` is the step reached and the period simulated with
    it; ``found`` what still fails there."""

    def check(ran: Cycle) -> tuple[Disagreement, ...]:
        ripple = periodic(system, ran.time, ran.power, ambient)
        circuit = electrical.circuit
        return disagreements(system, circuit, ran, ripple, electrical.period, tolerances)

    found = check(cycle)
    if not found:
        return Refined(None, (), ()), ()

    def again(step: float) -> tuple[tuple[float, Cycle], tuple[Disagreement, ...]]:
        ran = electrical.cycle(list(temps), limits[0], limits[1], step)
        return (step, ran), check(ran)

    def snap(step: float) -> float:
        # a whole fraction of the period (to 4 digits): the points of successive periods
        # line up, as the repeat check compares them (a sine sampled at other phases
        # differs by the interpolation's (w h)^2 / 8 from one period to the next); the
        # exact fraction in full digits can land a rounding error past a source's corner,
        # and ngspice's points then differ from period to period (1 ms / 13 on a PULSE)
        return float(f"{electrical.period / math.ceil(electrical.period / step - 1e-9):.4g}")

    analyses = (electrical.analysis(limits[0]),)
    allow = electrical.options.allow_control
    return refine(analyses, allow, False, found, again, "--tstep", snap), found


def vetting_tolerances(deck_text: str) -> tuple[float, float]:
    """``(reltol, vntol)`` the simulated deck ran with (as ``run``'s check reads them)."""
    reltol, extra = solver_tolerances(deck_text)
    return reltol, ABSTOL_T + extra


def late_warning(
    found: tuple[Disagreement, ...], done: Refined[tuple[float, Cycle]],
    unverified: tuple[Disagreement, ...], step: float,
) -> tuple[Finding, ...]:  # fmt: skip
    """The warning for *unverified*, the figures of the period reported (simulated with
    *step* once the iteration went on with the step :func:`vet_cycle` reached), where
    :func:`vet_cycle`'s findings do not already say it; and ``()`` without them."""
    if not unverified or done.found or not found:
        return ()
    why = "the period settled again with it still fails"
    return (unverified_finding(unverified, seconds(step), why, step_hint("--tstep")),)
