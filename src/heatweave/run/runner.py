"""Running an electrothermal deck: emit, make it safe to run, simulate, read the results.

``run`` is what ``heatweave run`` and ``check`` do, and what ``settle`` and ``sweep`` call for
each corner.  Shared decks may carry ``.control`` blocks, whose commands can run shell
commands: they are dropped unless the caller allows them, and heatweave drives the analyses
itself.  Nothing is written except in a temporary working folder.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from pathlib import Path

from heatweave.annotation import Annotation
from heatweave.emit.emitter import Emitted, Inputs, emit_inputs, load_inputs
from heatweave.errors import (
    ConvergenceError,
    Finding,
    SimulatorError,
    ThermalRunawayError,
    TimestepTooSmallError,
    UsageError,
)
from heatweave.run.results import RunResults, extract, outside_range, range_findings
from heatweave.simulators import Progress, SimResult, get_simulator
from heatweave.spice.deck import Card, ControlBlock, Deck, Node
from heatweave.spice.reader import read

#: Dot cards that ask ngspice for an analysis (manual 15.3).
ANALYSIS_CARDS = frozenset(
    {".op", ".tran", ".dc", ".ac", ".tf", ".noise", ".pz", ".sens", ".disto", ".sp", ".pss"}
)


@dataclass(frozen=True, slots=True)
class RunOptions:
    """How to run: analyses to use instead of the deck's own, overrides, back end."""

    analyses: tuple[str, ...] = ()
    ambient: float | None = None
    backend: str = "auto"
    allow_control: bool = False
    timeout: float | None = None
    progress: Progress | None = field(default=None, compare=False)
    #: Folder ngspice runs in, where it finds relative includes (default: deck_folder).
    cwd: str | None = None


def deck_folder(inputs: Inputs) -> str:
    """The absolute folder the deck's relative ``.include`` paths start from: the deck's
    own, or the current one for a deck read from standard input (``-``)."""
    return str(Path(inputs.deck_path).resolve().parent)


@dataclass(frozen=True, slots=True)
class Prepared:
    """An emitted deck made ready to simulate, and the analyses to run on it."""

    emitted: Emitted
    text: str
    analyses: tuple[str, ...]
    deck_analyses: bool
    findings: tuple[Finding, ...]
    cwd: str


@dataclass(frozen=True, slots=True)
class RunOutcome:
    """A finished run: what was simulated, what ngspice returned, what it means."""

    prepared: Prepared
    sim: SimResult
    results: RunResults


def strip_control(
    text: str, path: str, allow: bool, origin: Deck | None = None
) -> tuple[str, tuple[Finding, ...]]:
    """The deck without its ``.control`` blocks (unless *allow*), and a warning if any.

    *origin* is the deck as the user wrote it when *text* is the emitted deck: the warning
    points at the block there, since the emitted deck's line numbers are not the user's.
    """
    deck = read(text, path)
    blocks = [n for n in deck.body if isinstance(n, ControlBlock)]
    if allow or not blocks:
        return text, ()
    kept: list[Node] = [n for n in deck.body if not isinstance(n, ControlBlock)]
    own = [n for n in origin.body if isinstance(n, ControlBlock)] if origin else []
    first = (own or blocks)[0]
    where = first.source.location(first.offset) if first.source else None
    warning = Finding(
        "warning",
        f"dropped {len(blocks)} .control block(s): their commands can run anything on this "
        "machine, so heatweave drives the analyses itself",
        where,
        "pass --allow-control to keep them if you trust this deck",
    )
    return deck.with_body(tuple(kept)).write(), (warning,)


def deck_analyses_of(text: str) -> list[str]:
    """The analysis cards of a deck (top level), as written."""
    deck = read(text)
    return [
        n.logical().text.strip()
        for n in deck.body
        if isinstance(n, Card) and n.name in ANALYSIS_CARDS
    ]


def prepare(
    inputs: Inputs,
    options: RunOptions,
    annotation: Annotation | None = None,
    *,
    heating: bool = True,
) -> Prepared:
    """Emit the electrothermal deck and make it ready for the simulator."""
    emitted = emit_inputs(
        inputs,
        annotation=annotation,
        ambient=options.ambient,
        heating=heating,
    )
    text, dropped = strip_control(
        emitted.text, inputs.deck_path, options.allow_control, inputs.project.deck
    )
    own = deck_analyses_of(text)
    if not options.analyses and not own and not options.allow_control:
        raise UsageError(
            f"{inputs.deck_path} asks for no analysis (.op, .tran, ...)",
            hint="add an analysis card to the deck, or pass --op or --tran TSTEP TSTOP",
        )
    return Prepared(
        emitted,
        text,
        tuple(options.analyses),
        deck_analyses=not options.analyses,
        findings=emitted.findings + dropped,
        cwd=options.cwd or deck_folder(inputs),
    )


def simulate(prepared: Prepared, options: RunOptions) -> SimResult:
    """Run ngspice on a prepared deck."""
    simulator = get_simulator(options.backend)
    return simulator.run(
        prepared.text,
        analyses=prepared.analyses,
        deck_analyses=prepared.deck_analyses,
        cwd=prepared.cwd,
        timeout=options.timeout,
        progress=options.progress,
    )


def run(
    deck_path: str,
    annotation_path: str,
    options: RunOptions = RunOptions(),
    *,
    inputs: Inputs | None = None,
    annotation: Annotation | None = None,
) -> RunOutcome:
    """Emit, simulate and read back one electrothermal run."""
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
        results = extract(sim, prepared.emitted.circuit, inputs.index)
        if suspect(results, sim):
            explained = explain_runaway(inputs, options, prepared, None, results)
            if explained is not None:
                raise explained
    except SimulatorError as err:
        # The warnings from emitting still matter (a dropped .control block, say).
        err.findings = (*prepared.findings, *err.findings)
        raise
    beyond = range_findings(results)
    if beyond:
        prepared = replace(prepared, findings=prepared.findings + beyond)
    return RunOutcome(prepared, sim, results)


#: Above this (degC) a part temperature is no longer a physical answer but a runaway.
IMPLAUSIBLE_TEMPERATURE = 1000.0


def suspect(results: RunResults, sim: SimResult) -> bool:
    """True when a run may have landed off the physical branch: an implausible result, a
    part outside its model's range, or a heatweave source that overflowed on the way
    (ngspice then gave up its first attempts and may have found a far, spurious root)."""
    from heatweave.simulators.diagnose import overflowed
    from heatweave.thermal.circuit import PREFIX

    if implausible(results) or any(outside_range(part) for part in results.parts):
        return True
    return any(PREFIX in device for device in overflowed(sim.log))


def implausible(results: RunResults) -> bool:
    """True when some part's temperature or resistance cannot be physical."""
    import math

    for part in results.parts:
        values = [part.temperature, part.hottest]
        if any(not math.isfinite(v) or v > IMPLAUSIBLE_TEMPERATURE for v in values):
            return True
        if part.resistance is not None and not part.resistance > 0:
            return True
    return False


def explain_runaway(
    inputs: Inputs,
    options: RunOptions,
    prepared: Prepared,
    failure: SimulatorError | None,
    results: RunResults | None,
) -> ThermalRunawayError | None:
    """A thermal-runaway error naming the part, its loop gain and the drive level, when
    that is what went wrong; ``None`` when the failure has another cause."""
    from heatweave.run.runaway import explain

    return explain(inputs, options, prepared, failure, results)


def run_baseline(
    inputs: Inputs, options: RunOptions, annotation: Annotation | None = None
) -> RunOutcome:
    """The same deck without self-heating: every part held at ambient, same analyses.

    Drift limits compare against this run, so a drift is what self-heating alone causes.
    """
    quiet = replace(options, progress=None)
    prepared = prepare(inputs, quiet, annotation, heating=False)
    sim = simulate(prepared, quiet)
    assert prepared.emitted.circuit is not None
    return RunOutcome(prepared, sim, extract(sim, prepared.emitted.circuit, inputs.index))


