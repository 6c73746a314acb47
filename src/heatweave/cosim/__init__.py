"""The fast electrothermal run path: a windowed co-simulation of circuit and heat.

Thermal time constants (ms to minutes) are usually far longer than electrical ones (ns to
ms).  Then ngspice can run the plain circuit, with every annotated resistor an ordinary
resistor, while heatweave advances the linear thermal network exactly between windows and
updates each resistance from its temperature (:mod:`heatweave.cosim.engine`, window rule
in :mod:`heatweave.cosim.windows`).  This avoids evaluating two behavioural expressions
per resistor at every time step and Newton iteration, which is where the full deck spends
most of its time.

:func:`run` takes the same inputs as :func:`heatweave.run.runner.run` and returns a
:class:`FastOutcome` holding the same :class:`~heatweave.run.results.RunResults`, on the
co-simulation's window grid.  :func:`run_auto` picks the method (:func:`choose_method`)
and falls back to the full deck where the co-simulation would not be accurate.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path

import numpy as np

from heatweave.annotation import Annotation
from heatweave.emit.emitter import Inputs, load_inputs, thermal_circuit
from heatweave.emit.placement import refuse_reserved, refuse_unplaced
from heatweave.emit.sections import folded_files
from heatweave.emit.temperature import temperature_findings, with_temp
from heatweave.errors import Finding, LibngspiceMissingError, SimulatorError, UsageError
from heatweave.quantities import counted
from heatweave.run import runner
from heatweave.run.drive import deck_drive, start_findings
from heatweave.run.edges import SourceCorners, deck_corners
from heatweave.run.locate import locate
from heatweave.run.prepare import (
    ANALYSIS_CARDS,
    RunOptions,
    deck_analyses_of,
    deck_folder,
    made_safe,
    stepped,
    time_left,
    whole_limit,
    with_deadline,
)
from heatweave.run.results import (
    RunResults,
    build_part,
    drive_findings,
    range_findings,
)
from heatweave.run.runner import RunOutcome
from heatweave.run.sampling import square_law_excess
from heatweave.run.stepcheck import refine, sampling
from heatweave.run.unverified import Disagreement
from heatweave.run.verify import solver_tolerances
from heatweave.spice.deck import Card, Deck, Node
from heatweave.spice.hierarchy import DeckIndex, device_name, global_names, top_level_node
from heatweave.spice.netlist import card_nodes
from heatweave.thermal.circuit import AMBIENT_NODE, ThermalCircuit
from heatweave.thermal.solver import Propagator, ThermalSystem, assemble

from .engine import MissedCorner, Plan, Probe, StrongFeedback, Trace, cosimulate
from .method import SEPARATION, Transient, choose_method, source_time_scale
from .windows import MAX_LOOP_GAIN

__all__ = [
    "DEFAULT_TOLERANCE",
    "METHODS",
    "SEPARATION",
    "FastOutcome",
    "Transient",
    "choose_method",
    "electrical_time_scale",
    "run",
    "run_auto",
]

#: Temperature error (K) the window rule aims at; the acceptance target is 0.05 K.
DEFAULT_TOLERANCE = 0.02
METHODS = ("auto", "cosim", "full")
DEFAULT_OPTIONS = RunOptions()


@dataclass(frozen=True, slots=True)
class FastOutcome:
    """A run by either method: its results, which method ran, and why.

    ``full`` is the :class:`~heatweave.run.runner.RunOutcome` when the full deck ran;
    ``trace`` the co-simulation's raw record (windows, profile) when it did not.
    """

    results: RunResults
    method: str
    reason: str
    findings: tuple[Finding, ...] = ()
    full: RunOutcome | None = field(default=None, repr=False)
    trace: Trace | None = field(default=None, repr=False)
    #: The analyses as run when heatweave set their maximum step (``tran ... TMAX``);
    #: ``()``: as the deck or the options give them.
    analyses: tuple[str, ...] = ()


def electrical_time_scale(index: DeckIndex) -> float | None:
    """The slowest time scale of the deck's independent sources (s), or ``None``."""
    texts = [card.logical().text for card in index.project.deck.cards() if card.is_element]
    for include in index.project.includes:
        texts += [card.logical().text for card in include.deck.cards() if card.is_element]
    return source_time_scale(texts)


def source_corners(inputs: Inputs, options: RunOptions) -> SourceCorners:
    """The corners of the deck's PULSE and PWL sources over its transient (none without
    one): the co-simulation makes ngspice land on each after every resume."""
    analyses = _analyses(inputs, options)
    if options.max_step is not None:
        analyses = stepped(analyses, options.max_step, inputs.deck_path)
    tran = Transient.parse(analyses[0]) if len(analyses) == 1 else None
    if tran is None:
        return SourceCorners(())
    return deck_corners(inputs.index, tran.tstep, tran.tstop)


def _unreadable(sources: tuple[str, ...]) -> str:
    return (
        f"heatweave cannot read the corners of {sources[0]}; without them ngspice 39 may step "
        "across the source's edges after the co-simulation pauses and resumes it"
    )


def _analyses(inputs: Inputs, options: RunOptions) -> tuple[str, ...]:
    if options.analyses:
        return tuple(options.analyses)
    return tuple(a.lstrip(".") for a in deck_analyses_of(inputs.project.deck))


def _circuit(
    inputs: Inputs, options: RunOptions, annotation: Annotation | None
) -> tuple[ThermalCircuit, tuple[Finding, ...]]:
    """The thermal circuit, built as the emitter builds it but without emitting, and what
    the user must hear about the plain deck run at its ambient: the circuit's findings and
    the deck's own temperature settings (:mod:`heatweave.emit.temperature`).  The emitter's
    notes on its own cards (forms, noise, a closed ``.control`` block) do not apply: the
    co-simulation writes none of them and drops every ``.control`` block."""
    circuit, findings = thermal_circuit(inputs, annotation=annotation, ambient=options.ambient)
    if not circuit.parts:
        return circuit, findings
    refuse_unplaced(inputs.index, circuit)  # the decks the full method refuses
    folded = folded_files(inputs.project)
    refuse_reserved(inputs.index, circuit, folded)  # and those using the names it adds
    files = ((deck, low) for deck, low, _title in folded)
    return circuit, findings + tuple(temperature_findings(files, circuit))


def run_auto(
    deck_path: str,
    annotation_path: str,
    options: RunOptions = DEFAULT_OPTIONS,
    *,
    method: str = "auto",
    inputs: Inputs | None = None,
    annotation: Annotation | None = None,
) -> FastOutcome:
    """Run by *method* (``auto``, ``cosim`` or ``full``); ``auto`` asks :func:`choose_method`.

    ``cosim`` forced where it does not apply raises :class:`UsageError` with the reason.
    """
    if method not in METHODS:
        raise UsageError(f"unknown method {method!r}", hint="choose auto, cosim or full")
    options = with_deadline(options)  # one time limit for the whole run, fallback included
    inputs = inputs or load_inputs(deck_path, annotation_path)
    chosen, reason = "full", "asked for the full electrothermal deck"
    prepared = None
    if method != "full":
        prepared = _circuit(inputs, options, annotation)
        circuit = prepared[0]
        scale = electrical_time_scale(inputs.index)
        chosen, reason = choose_method(circuit, _analyses(inputs, options), scale)
        if chosen == "cosim" and options.allow_control:
            chosen, reason = "full", ".control blocks are kept, so the deck runs as written"
        if chosen == "cosim" and options.backend == "batch":
            chosen, reason = "full", "the co-simulation needs the ngspice shared library"
        if chosen == "cosim":
            unreadable = source_corners(inputs, options).unreadable
            if unreadable:
                chosen, reason = "full", _unreadable(unreadable)
        if method == "cosim" and chosen != "cosim":
            raise UsageError(
                f"the co-simulation does not apply: {reason}", hint="use --method full"
            )
    if chosen == "cosim":
        try:
            return run(
                deck_path, annotation_path, options, inputs=inputs, annotation=annotation,
                prepared=prepared,
            )  # fmt: skip
        except LibngspiceMissingError:
            if method == "cosim":
                raise
            reason = "the ngspice shared library is missing, so the full deck ran"
        except MissedCorner as missed:
            if method == "cosim":
                raise UsageError(
                    f"the co-simulation cannot vouch for its result: {missed}; from there on "
                    "ngspice 39 no longer places time points on that source's edges",
                    hint="use --method full (or auto, which falls back to it)",
                ) from None
            reason = f"{missed}, so the full deck ran"
        except StrongFeedback as strong:
            if method == "cosim":
                # A runaway is one whatever the method: the full deck's diagnosis says so
                # (exit 7, with the loop gain); a strong but stable loop is a usage error.
                runner.run(deck_path, annotation_path, options, inputs=inputs,
                           annotation=annotation)  # fmt: skip
                raise UsageError(
                    f"the co-simulation stopped: {strong} (above {MAX_LOOP_GAIN:g})",
                    hint="use --method full: near thermal runaway only the full deck is exact",
                ) from None
            reason = f"{strong} is too strong for the co-simulation, so the full deck ran"
    outcome = runner.run(deck_path, annotation_path, options, inputs=inputs, annotation=annotation)
    findings = outcome.prepared.findings
    return FastOutcome(outcome.results, "full", reason, findings, full=outcome)


def run(
    deck_path: str,
    annotation_path: str,
    options: RunOptions = DEFAULT_OPTIONS,
    *,
    inputs: Inputs | None = None,
    annotation: Annotation | None = None,
    tolerance: float = DEFAULT_TOLERANCE,
    prepared: tuple[ThermalCircuit, tuple[Finding, ...]] | None = None,
) -> FastOutcome:
    """Co-simulate one run (:func:`once`), run again with smaller maximum steps while a
    part's mean power depends on what lies between ngspice's time points
    (:func:`heatweave.run.stepcheck.refine`, as the full deck is); what still does is
    listed on the results and in a warning."""
    options = with_deadline(options)  # one limit for every run
    inputs = inputs or load_inputs(deck_path, annotation_path)
    prepared = prepared or _circuit(inputs, options, annotation)

    def attempt(given: RunOptions) -> FastOutcome:
        return once(inputs, given, prepared, tolerance)

    outcome = attempt(options)
    reltol, _ = solver_tolerances(inputs.project.deck)
    found = sampling(outcome.results, reltol)
    if not found:
        return outcome

    def again(step: float) -> tuple[FastOutcome, tuple[Disagreement, ...]]:
        ran = attempt(replace(options, max_step=step))
        return ran, sampling(ran.results, reltol)

    analyses = _analyses(inputs, options)
    if options.max_step is not None:
        analyses = stepped(analyses, options.max_step, inputs.deck_path)
    own = not options.analyses and options.max_step is None
    done = refine(analyses, False, own, found, again)
    last = done.kept or outcome
    results = replace(last.results, unverified=done.found) if done.found else last.results
    return replace(last, results=results, findings=last.findings + done.findings)


def once(
    inputs: Inputs,
    options: RunOptions,
    prepared: tuple[ThermalCircuit, tuple[Finding, ...]],
    tolerance: float = DEFAULT_TOLERANCE,
) -> FastOutcome:
    """Co-simulate one run once, for :func:`run` (which loads *inputs* and builds the
    thermal circuit and its findings, *prepared*).

    Raises :class:`UsageError` when the run is not one the co-simulation can do (see
    :func:`choose_method`; the time-scale check is left to the caller), and when
    ``options.allow_control`` asks to keep the deck's ``.control`` blocks, which only the
    full deck can (:func:`run_auto` sends such runs there).
    """
    circuit, findings = prepared
    analyses = _analyses(inputs, options)
    if options.max_step is not None:
        analyses = stepped(analyses, options.max_step, inputs.deck_path)
    tran = Transient.parse(analyses[0]) if len(analyses) == 1 else None
    if tran is None or not tran.tstart < tran.tstop or not isinstance(circuit.ambient, float | int):
        raise UsageError(
            "the co-simulation runs one transient (tstart below tstop) with a fixed ambient",
            hint="use the full method for this run",
        )
    if any(not p.is_resistor for p in circuit.parts) or circuit.start != "cold":
        raise UsageError(
            "the co-simulation needs resistor parts only and a cold start",
            hint="use the full method for this run",
        )
    if options.allow_control:
        raise UsageError(
            "the co-simulation cannot keep .control blocks: it drives the transient itself",
            hint="use the full method to run the deck as written",
        )
    corners = source_corners(inputs, options)
    if corners.unreadable:
        raise UsageError(
            f"the co-simulation does not apply: {_unreadable(corners.unreadable)}",
            hint="write the source's numbers so heatweave can read them, or use --method full",
        )
    system = assemble(circuit)
    if Propagator(system).modes is None:
        raise UsageError(
            "the co-simulation needs the thermal network's modes, which are ill-conditioned",
            hint="use the full method for this run",
        )
    # Always dropped (with the warning): the co-simulation issues its own commands.  The
    # deck as read is made safe and stripped as a tree, and written once.
    safe = made_safe(inputs.project.deck, inputs, options, allow=False)
    period = deck_drive(inputs.index).period
    plan = Plan(
        circuit.parts,
        probes(circuit, inputs.index),
        system,
        float(circuit.ambient),
        tran,
        tolerance,
        period,
        corners,
    )
    folder = Path(options.cwd or deck_folder(inputs))
    text = plain_deck(safe.deck, circuit).write()
    options = with_deadline(options)
    with whole_limit(options):
        try:
            trace = cosimulate(text, folder, plan, time_left(options), options.init_file)
        except SimulatorError as err:
            raise locate(err, inputs.project) from None
    results = to_results(trace, circuit, system, period)
    reason = f"co-simulation in {counted(trace.windows, 'window')}"
    # A part beyond its model's range, a drive without one period: as runner.run says.
    past = range_findings(results) + drive_findings(results, inputs.index)
    past += start_findings(trace.first_time, analyses, inputs.index)
    stepped_analyses = analyses if options.max_step is not None else ()
    return FastOutcome(results, "cosim", reason, findings + safe.findings + past, trace=trace,
                       analyses=stepped_analyses)  # fmt: skip


#: Cards the co-simulation leaves out: it issues its own transient and needs every node.
DROPPED_CARDS = ANALYSIS_CARDS | {".save"}


def plain_deck(deck: Deck, circuit: ThermalCircuit | None = None) -> Deck:
    """*deck* without its top-level analysis and ``.save`` cards (see
    :data:`DROPPED_CARDS`); with *circuit*, ending with ``.temp`` at its ambient, as the
    emitted deck does (:mod:`heatweave.emit.temperature`)."""
    kept: list[Node] = [
        n for n in deck.body if not (isinstance(n, Card) and n.name in DROPPED_CARDS)
    ]
    plain = deck.with_body(tuple(kept))
    return plain if circuit is None else with_temp(plain, circuit)


def probes(circuit: ThermalCircuit, index: DeckIndex) -> list[Probe]:
    """ngspice's names for each resistor part and its two terminals."""
    globals_ = global_names(index) | {AMBIENT_NODE}
    out = []
    for part in circuit.parts:
        resolved = index.resolve(part.path)
        assert resolved is not None
        nodes = [top_level_node(resolved, n, globals_) for n in card_nodes(resolved.card, index)]
        a, b = (None if n in ("0", "gnd") else n for n in nodes[:2])
        out.append(Probe(device_name(resolved, resolved.card.head), a, b))
    return out


def to_results(
    trace: Trace, circuit: ThermalCircuit, system: ThermalSystem, period: float | None = None
) -> RunResults:
    """The co-simulation's record as :class:`RunResults` on its window grid.

    Every key means what it means for the full deck (:func:`heatweave.run.results.
    build_part`): ``power`` is the mean over the last drive *period* and ``peak_power`` the
    instantaneous peak, both from ngspice's own time points (:class:`Trace`), as is
    ``peak_temperature``; the series are per window (the power series: each window's
    mean), and each signal's ``extremes`` are over ngspice's own time points.
    """
    n_parts = len(circuit.parts)
    parts = []
    for j, part in enumerate(circuit.parts):
        samples, excess = None, None
        if trace.tail_time.shape[0]:
            samples = (trace.tail_time, trace.tail_power[j], float(trace.peak_power[j]))
            # the resistance is held over each step: the power alone gives the excess
            excess = square_law_excess(trace.tail_time, trace.tail_power[j])
        hottest = float(trace.peak_temperature[j]) if trace.peak_temperature.size else None
        parts.append(
            build_part(
                part,
                trace.temperatures[j],
                trace.power[j],
                time=np.asarray(trace.time),
                resistance=trace.resistance[j],
                period=period,
                samples=samples,
                temperature_peak=hottest,
                excess=excess,
            )
        )
    nodes = {
        label: float(trace.temperatures[n_parts + k][-1])
        for k, label in enumerate(system.outputs[n_parts:])
    }
    series = {
        label: trace.temperatures[n_parts + k] for k, label in enumerate(system.outputs[n_parts:])
    }
    voltages = {name: float(values[-1]) for name, values in trace.voltages.items()}
    return RunResults(
        analysis="tran",
        ambient=float(circuit.ambient_at_start),
        parts=tuple(parts),
        nodes=nodes,
        voltages=voltages,
        time=np.asarray(trace.time),
        node_series=series,
        voltage_series=dict(trace.voltages),
        currents={name: float(values[-1]) for name, values in trace.currents.items()},
        current_series=dict(trace.currents),
        period=period,
        extremes=dict(trace.extremes),
    )
