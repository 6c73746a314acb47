"""Running an electrothermal deck: emit, make it safe to run, simulate, read the results.

``run`` is what ``heatweave run`` and ``check`` do, and what ``settle`` and ``sweep`` call for
each corner.  Shared decks may carry ``.control`` blocks, whose commands can run shell
commands: they are dropped unless the caller allows them, and heatweave drives the analyses
itself.  Nothing is written except in a temporary working folder.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from heatweave.annotation import Annotation
from heatweave.emit.emitter import Inputs, load_inputs
from heatweave.emit.names import reserved
from heatweave.errors import (
    ConvergenceError,
    SimulationTimeoutError,
    SimulatorError,
    ThermalRunawayError,
    TimestepTooSmallError,
)
from heatweave.run.drive import start_findings
from heatweave.run.locate import locate
from heatweave.run.prepare import (
    Prepared,
    RunOptions,
    deck_analyses_of,
    prepare,
    simulate,
    with_deadline,
)
from heatweave.run.results import (
    RunResults,
    drive_findings,
    extract,
    implausible,
    outside_range,
    range_findings,
)
from heatweave.run.runaway import explain
from heatweave.run.stepcheck import vet, vet_growth
from heatweave.run.verify import verify_run
from heatweave.simulators import SimResult
from heatweave.simulators.diagnose import overflowed


@dataclass(frozen=True, slots=True)
class RunOutcome:
    """A finished run: what was simulated, what ngspice returned, what it means."""

    prepared: Prepared
    sim: SimResult
    results: RunResults


def run(
    deck_path: str,
    annotation_path: str,
    options: RunOptions = RunOptions(),
    *,
    inputs: Inputs | None = None,
    annotation: Annotation | None = None,
) -> RunOutcome:
    """Emit, simulate and read back one electrothermal run; ``options.timeout`` bounds
    every simulation of it together (the runaway diagnosis included)."""
    options = with_deadline(options)
    inputs = inputs or load_inputs(deck_path, annotation_path)
    prepared = prepare(inputs, options, annotation)
    assert prepared.emitted.circuit is not None
    try:
        try:
            sim = simulate(prepared, options)
        except (ConvergenceError, TimestepTooSmallError) as failure:
            # No electrothermal solution: find out whether self-heating ran away.
            explained = explain_runaway(inputs, options, prepared, failure, None)
            raise (explained or failure) from None
        results = extract(sim, prepared.emitted, inputs.index)
        if suspect(results, sim, prepared, inputs):
            grown, notes = vet_growth(inputs, options, prepared, results)  # its times, checked
            explained = explain_runaway(inputs, options, prepared, None, grown)
            if explained is not None:
                explained.findings = (*explained.findings, *notes)
                raise explained
        verified = verify_run(inputs, options, prepared, sim, results)
        vetted = vet(inputs, options, prepared, verified)  # a transient's step, checked
        sim, results = vetted.sim, vetted.results
        prepared = replace(vetted.prepared, findings=prepared.findings + vetted.findings)
    except (SimulatorError, SimulationTimeoutError) as err:
        # The warnings from emitting still matter (a dropped .control block, say).
        err.findings = (*prepared.findings, *err.findings)
        if isinstance(err, SimulatorError):
            locate(err, inputs.project)  # the user's FILE:LINE, not the emitted deck's
        raise
    beyond = range_findings(results) + drive_findings(results, inputs.index)
    if results.time is not None and len(results.time):
        analyses = prepared.analyses or tuple(deck_analyses_of(prepared.deck))
        beyond += start_findings(float(results.time[0]), analyses, inputs.index)
    if beyond:
        prepared = replace(prepared, findings=prepared.findings + beyond)
    return RunOutcome(prepared, sim, results)


def suspect(results: RunResults, sim: SimResult, prepared: Prepared, inputs: Inputs) -> bool:
    """True when a run may have landed off the physical branch: an implausible result, a
    part outside its model's range, or a heatweave source that overflowed on the way
    (ngspice then gave up its first attempts and may have found a far, spurious root).
    heatweave's sources are known by name (:func:`heatweave.emit.names.reserved`; ngspice
    writes a source inside instances as ``b.x1.bhw_p_x1_r4``), never by a pattern."""

    if implausible(results) or any(outside_range(part) for part in results.parts):
        return True
    devices = overflowed(sim.log)
    if not devices:
        return False
    circuit, emitted = prepared.emitted.circuit, prepared.emitted
    assert circuit is not None
    own = reserved(inputs.index, circuit, emitted.form, emitted.heating).elements
    return any(device.rsplit(".", 1)[-1] in own for device in devices)


def explain_runaway(
    inputs: Inputs,
    options: RunOptions,
    prepared: Prepared,
    failure: SimulatorError | None,
    results: RunResults | None,
) -> ThermalRunawayError | None:
    """A thermal-runaway error naming the part, its loop gain and the drive level, when
    that is what went wrong; ``None`` when the failure has another cause."""

    return explain(inputs, options, prepared, failure, results)


def run_baseline(
    inputs: Inputs, options: RunOptions, annotation: Annotation | None = None
) -> RunOutcome:
    """The same deck without self-heating: every part held at ambient, same analyses.

    Drift limits compare against this run, so a drift is what self-heating alone causes.
    """
    quiet = with_deadline(replace(options, progress=None))
    prepared = prepare(inputs, quiet, annotation, heating=False)
    sim = simulate(prepared, quiet)
    assert prepared.emitted.circuit is not None
    return RunOutcome(prepared, sim, extract(sim, prepared.emitted, inputs.index))


