"""Is a transient resolved finely enough?  Two checks on ngspice's own time points.

ngspice's maximum step defaults to the deck's ``TSTEP``, which a designer picks for the
plot, not for the heat.  Two things then go wrong without a word from ngspice:

* *integration*: the thermal capacitors are fed by heat sources quadratic in the circuit's
  voltages, which ngspice linearises about the previous time point, short by ``dV^2 / R``
  at every step (README, "How exact ``--method full`` is").  Where the power changes a lot
  per step the temperatures fall far below the heat the deck's own powers deliver.  Check:
  the thermal network is linear, so its exact response to the powers at ngspice's points
  (:func:`heatweave.thermal.replay.network_response`) must agree with ngspice's
  temperatures at every point, to ngspice's own accuracy on a node voltage
  (``reltol |T| + vntol``, the heat balance's ``eps``);
* *sampling*: the period mean of the power is a trapezoid over ngspice's points; a ramp or
  a corner crossed in one or two steps makes it depend on what happens between them.
  Check: :attr:`heatweave.run.results.PartResult.power_error` (the trapezoid against the
  exact mean of straight-line voltages and currents between the same points) must be at
  most ``2 reltol`` of the mean power (the balance's accuracy on a power).

A figure that fails either is not verified: :func:`disagreements` lists them, and
:func:`heatweave.run.runner.run` runs again with a smaller maximum step.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Generic, TypeVar

import numpy as np

from heatweave.errors import Finding, SimulationTimeoutError, SimulatorError
from heatweave.run.maxstep import the_tran, with_max_step
from heatweave.run.prepare import Prepared, RunOptions, deck_analyses_of, simulate
from heatweave.run.results import RunResults, crossing, extract, period_mean
from heatweave.run.unverified import Disagreement
from heatweave.run.verify import Verified, solver_tolerances, verify_run
from heatweave.run.waves import seconds
from heatweave.thermal.balance import ABSTOL_P, ABSTOL_T
from heatweave.thermal.circuit import ThermalCircuit
from heatweave.thermal.replay import network_response

if TYPE_CHECKING:
    from heatweave.emit.emitter import Inputs
    from heatweave.simulators import SimResult

Kept = TypeVar("Kept")

#: At most this many runs again, each with a smaller maximum step.
MAX_RERUNS = 4
#: A maximum step is never set below the transient's span over this many steps.
MAX_STEPS = 5_000_000
#: Each run again divides the step by at least 2 and at most 32.
SHRINK = (1 / 32, 1 / 2)


def disagreements(
    results: RunResults, circuit: ThermalCircuit, reltol: float, vntol: float
) -> tuple[Disagreement, ...]:
    """Every part (and shared node) of a transient whose figures fail the checks of the
    module docstring; ``()`` for an operating point, or a transient that does not start at
    0 (its thermal state at the first point is not known here)."""
    time = results.time
    if time is None or len(time) < 2 or float(time[0]) != 0.0 or not circuit.parts:
        return ()
    return sampling(results, reltol) + integration(results, circuit, reltol, vntol, len(time))


def integration(
    results: RunResults, circuit: ThermalCircuit, reltol: float, vntol: float, end: int
) -> tuple[Disagreement, ...]:
    """The integration check of the module docstring over the first *end* time points."""
    time = results.time
    by_path = {p.path: p for p in results.parts}
    series = [by_path[p.path].power_series for p in circuit.parts]
    ambient = results.ambient_series
    if time is None or end < 2 or any(s is None for s in series) or ambient is None:
        return ()
    powers = np.vstack([s[:end] for s in series if s is not None])
    exact = network_response(circuit, time[:end], powers, ambient[:end])
    if exact is None:
        return ()
    names = [p.path for p in circuit.parts] + [n.label for n in circuit.nodes]
    own = [by_path[p.path].temperature_series for p in circuit.parts]
    own += [results.node_series.get(n.label) for n in circuit.nodes]
    found = []
    for k, (name, simulated) in enumerate(zip(names, own, strict=True)):
        if simulated is None:
            continue
        gap = np.abs(simulated[:end] - exact[k])
        allowed = reltol * np.abs(simulated[:end]) + vntol
        worst = int(np.argmax(gap - allowed))
        if gap[worst] > allowed[worst]:
            subject = name if k < len(circuit.parts) else f"node {name}"
            found.append(Disagreement(subject, "integration", float(gap[worst]),
                                      float(allowed[worst]), float(time[worst])))  # fmt: skip
    return tuple(found)


def sampling(results: RunResults, reltol: float) -> tuple[Disagreement, ...]:
    """Every part whose mean power depends on what lies between the simulator's time
    points by more than ``2 reltol`` of itself (:attr:`PartResult.power_error`), over the
    window ``power`` is averaged over (the whole run without a periodic source)."""
    time = results.time
    if time is None or len(time) < 2:
        return ()
    found = []
    for part in results.parts:
        if part.power_error is None:
            continue
        mean = abs(part.power)
        if results.period is None and part.power_series is not None:
            mean = abs(period_mean(time, part.power_series, float(time[-1] - time[0])))
        bound = 2 * reltol * mean + ABSTOL_P
        if part.power_error > bound:
            found.append(Disagreement(part.path, "sampling", part.power_error, bound,
                                      reference=mean))  # fmt: skip
    return tuple(found)


HINT = (
    "give the transient a smaller maximum step (--max-step, or the .tran card's TMAX): "
    "ngspice's default is the deck's TSTEP"
)


def step_hint(option: str) -> str:
    """The warning's hint for a command whose step *option* sets (``--max-step``: run's)."""
    return HINT if option == "--max-step" else f"give a smaller step with {option}"


def unverified_finding(
    found: tuple[Disagreement, ...], step: str, why: str, hint: str = HINT
) -> Finding:
    """The warning that the figures of *found* are not verified with maximum step *step*
    (in words: ``the deck's 250 us``); *why* says why no smaller step was tried."""
    return _about("warning", found, hint, lambda said: (
        f"not verified with {step} maximum step: {said}; the temperatures and powers "
        f"reported for these parts are not backed by the run's own numbers ({why})"
    ))  # fmt: skip


def _about(
    severity: str, found: tuple[Disagreement, ...], hint: str | None, told: Callable[[str], str]
) -> Finding:
    """A finding about *found*: *told* puts the disagreements, in words, into its message."""
    return Finding(severity, told("; ".join(item.words() for item in found)), None, hint)


def check_run(results: RunResults, prepared: Prepared) -> tuple[Disagreement, ...]:
    """:func:`disagreements` of *results*, to the tolerances the deck ran with."""
    circuit = prepared.emitted.circuit
    assert circuit is not None
    reltol, extra = solver_tolerances(prepared.text)
    return disagreements(results, circuit, reltol, ABSTOL_T + extra)


@dataclass(frozen=True, slots=True)
class Vetted:
    """A transient's results once their step is verified (or said not to be)."""

    prepared: Prepared
    sim: SimResult
    results: RunResults
    findings: tuple[Finding, ...]


def vet(inputs: Inputs, options: RunOptions, prepared: Prepared, verified: Verified) -> Vetted:
    """*verified*'s results when :func:`check_run` finds nothing; else the transient run
    again with smaller maximum steps (:func:`refine`; the deck is not changed).  Figures
    still unverified are listed on the results (``check`` fails them) and in a warning.
    The findings are those of the run kept (*verified*'s, or the last run again's), with
    what was done."""
    found = check_run(verified.results, prepared)
    if not found:
        return Vetted(prepared, verified.sim, verified.results, verified.findings)

    def again(step: float) -> tuple[Vetted, tuple[Disagreement, ...]]:
        analyses = with_max_step(analyses_of(prepared), step)
        assert analyses is not None  # refine read the transient
        ran = replace(prepared, analyses=analyses, deck_analyses=False)
        sim = simulate(ran, options)
        checked = verify_run(inputs, options, ran, sim, extract(sim, ran.emitted, inputs.index))
        return Vetted(ran, checked.sim, checked.results, checked.findings), check_run(
            checked.results, ran
        )

    own = not options.analyses and options.max_step is None
    done = refine(analyses_of(prepared), options.allow_control, own, found, again)
    last = done.kept or Vetted(prepared, verified.sim, verified.results, verified.findings)
    results = replace(last.results, unverified=done.found) if done.found else last.results
    return Vetted(last.prepared, last.sim, results, last.findings + done.findings)


def check_growth(results: RunResults, prepared: Prepared) -> tuple[Disagreement, ...]:
    """The integration check (to the deck's tolerances) of a transient that runs away, over
    its points up to the first past :data:`IMPLAUSIBLE_TEMPERATURE`: the times it reports
    there hold only where ngspice's temperatures agree with its own powers."""
    first = crossing(results)
    circuit = prepared.emitted.circuit
    if first is None or circuit is None or results.time is None or float(results.time[0]):
        return ()
    reltol, extra = solver_tolerances(prepared.text)
    end = first[0] + 1
    return heat_sampling(results, reltol, end) + integration(
        results, circuit, reltol, ABSTOL_T + extra, end
    )


def heat_sampling(results: RunResults, reltol: float, end: int) -> tuple[Disagreement, ...]:
    """Every part whose heat over the first *end* time points depends on what lies between
    them (:attr:`PartResult.power_excess`, summed in size) by more than ``2 reltol`` of
    itself: the temperatures there integrate that heat."""
    time = results.time
    if time is None or end < 2:
        return ()
    span = float(time[end - 1] - time[0])
    found = []
    for part in results.parts:
        excess, power = part.power_excess, part.power_series
        if excess is None or power is None or len(excess) != len(time) - 1 or not span > 0:
            continue
        mean = abs(float(np.trapezoid(power[:end], time[:end]))) / span
        value = float(np.sum(np.abs(excess[: end - 1]))) / span
        bound = 2 * reltol * mean + ABSTOL_P
        if value > bound:
            found.append(Disagreement(part.path, "sampling", value, bound,
                                      float(time[end - 1]), mean))  # fmt: skip
    return tuple(found)


def vet_growth(
    inputs: Inputs, options: RunOptions, prepared: Prepared, results: RunResults
) -> tuple[RunResults, tuple[Finding, ...]]:
    """A runaway transient's results whose crossing times hold (:func:`check_growth`): run
    again with smaller maximum steps where they do not, as :func:`vet` does; results still
    unverified carry :attr:`RunResults.unverified`, so no time is told.  With the note and
    warning of what was done."""
    found = check_growth(results, prepared)
    if not found:
        return results, ()

    def again(step: float) -> tuple[RunResults, tuple[Disagreement, ...]]:
        analyses = with_max_step(analyses_of(prepared), step)
        assert analyses is not None  # refine read the transient
        ran = replace(prepared, analyses=analyses, deck_analyses=False)
        rerun = extract(simulate(ran, options), ran.emitted, inputs.index)
        return rerun, check_growth(rerun, ran)

    own = not options.analyses and options.max_step is None
    done = refine(analyses_of(prepared), options.allow_control, own, found, again)
    if done.kept is None or crossing(done.kept) is None:  # no run again passed it
        return replace(results, unverified=done.found or found), done.findings
    return replace(done.kept, unverified=done.found), done.findings


@dataclass(frozen=True, slots=True)
class Refined(Generic[Kept]):
    """What :func:`refine` ran: the last run again (``None``: none ran), what still fails
    there (or in the first run), and the note and warning to print."""

    kept: Kept | None
    found: tuple[Disagreement, ...]
    findings: tuple[Finding, ...]


def refine(
    analyses: tuple[str, ...],
    allow_control: bool,
    own: bool,
    found: tuple[Disagreement, ...],
    again: Callable[[float], tuple[Kept, tuple[Disagreement, ...]]],
    option: str = "--max-step",
    snap: Callable[[float], float] | None = None,
) -> Refined[Kept]:
    """Run *again* with smaller maximum steps (:func:`next_step`) until it finds nothing,
    at most :data:`MAX_RERUNS` times and never below :data:`MAX_STEPS` steps over the
    span.  *found* fails with the step of *analyses* (the deck's own when *own*);
    *option* is the command's option that sets the step, named in the warning, and
    *snap* moves each step chosen to one the command can use (``settle``: a whole
    fraction of its period)."""
    tran = the_tran(analyses)
    first, step = found, tran.max_step if tran is not None else None
    said = "the deck's" if own else "a"
    said = f"{said} {seconds(step)}" if step is not None else said
    why = f"{MAX_RERUNS} runs again with smaller steps did not reach it"
    kept: Kept | None = None
    for _ in range(MAX_RERUNS):
        smaller, stop = next_step(analyses, allow_control, found, option)
        if smaller is None:
            why = stop
            break
        smaller = snap(smaller) if snap is not None else smaller
        try:
            kept, found = again(smaller)
        except (SimulatorError, SimulationTimeoutError) as err:
            why = f"the run again with maximum step {seconds(smaller)} failed: {err.message}"
            break
        analyses, step = with_max_step(analyses, smaller) or analyses, smaller
        if not found:
            break
    notes: tuple[Finding, ...] = ()
    if kept is not None and step is not None:
        notes = (rerun_note(first, said, step),)
    if found:
        where = seconds(step) if kept is not None and step is not None else said
        notes = (*notes, unverified_finding(found, where, why, step_hint(option)))
    return Refined(kept, found, notes)


def next_step(
    analyses: tuple[str, ...], allow_control: bool, found: tuple[Disagreement, ...],
    option: str = "--max-step",
) -> tuple[float | None, str]:  # fmt: skip
    """The maximum step to run *analyses* again with, or ``None`` and why not.  Both errors
    fall with the square of the step, so the step shrinks by the square root of how far the
    worst figure is past its bound (with a margin), between the :data:`SHRINK` factors."""
    if allow_control:
        return None, "the deck's .control block drives its own analyses"
    tran = the_tran(analyses)
    if tran is None or with_max_step(analyses, tran.max_step) is None:
        return None, "heatweave cannot read the .tran card's numbers to set its maximum step"
    worst = max(item.value / item.bound for item in found)
    factor = min(max(0.7 / math.sqrt(worst), SHRINK[0]), SHRINK[1])
    floor = (tran.tstop - tran.tstart) / MAX_STEPS
    if tran.max_step <= floor * (1 + 1e-9):
        return None, (
            f"a smaller step than {seconds(tran.max_step)} would take more than "
            f"{MAX_STEPS:,} steps; set one with {option}"
        )
    return max(float(f"{tran.max_step * factor:.2g}"), floor), ""


def rerun_note(found: tuple[Disagreement, ...], said: str, step: float) -> Finding:
    """The note that the transient ran again with maximum step *step*, and why."""
    return _about("note", found, None, lambda reasons: (
        f"max step {seconds(step)}: with {said} maximum step {reasons}; heatweave ran the "
        f"transient again with a maximum step of {seconds(step)} (your files are unchanged)"
    ))  # fmt: skip


def analyses_of(prepared: Prepared) -> tuple[str, ...]:
    """The analyses a prepared run asks for: ``--op``/``--tran``, else the deck's cards."""
    return prepared.analyses or tuple(deck_analyses_of(prepared.deck))
