"""Preparing an electrothermal deck for ngspice and simulating it.

ngspice gets one file: the emitted deck with every include inlined and every line it would
run as a command (``.control`` blocks at any depth, ``*#`` lines) taken out unless the
caller allows them (:mod:`heatweave.run.safedeck`); heatweave then drives the analyses
itself.  Nothing is written except in a temporary working folder.
"""

from __future__ import annotations

import time
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field, replace
from pathlib import Path

from heatweave.annotation import Annotation
from heatweave.emit.emitter import Emitted, Inputs, emit_inputs
from heatweave.errors import Finding, SimulationTimeoutError, SimulatorError, UsageError
from heatweave.run.locate import locate
from heatweave.run.maxstep import is_tran, with_max_step
from heatweave.run.safedeck import SafeDeck, safe_deck
from heatweave.simulators import Progress, SimResult, get_simulator, timed_out
from heatweave.spice.deck import Card, Deck
from heatweave.spice.project import Project
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
    #: Seconds every simulation of one run (or one sweep corner) may take in all.
    timeout: float | None = None
    progress: Progress | None = field(default=None, compare=False)
    #: Folder where ngspice finds files the deck names (default: deck_folder); ngspice itself
    #: runs in a private folder and reads the deck's includes inlined (run.safedeck).
    cwd: str | None = None
    #: An ngspice init file to read (by default none is: not the deck folder's, not HOME's).
    init_file: str | None = None
    #: When the time is up (:func:`time.monotonic`); set from ``timeout`` by
    #: :func:`with_deadline` when a run starts.
    deadline: float | None = None
    #: The transient's maximum step (``--max-step``), in place of the ``.tran`` card's TMAX.
    max_step: float | None = None


def with_deadline(options: RunOptions) -> RunOptions:
    """*options* with the deadline its timeout sets from now, unless one is set already."""
    if options.timeout is None or options.deadline is not None:
        return options
    return replace(options, deadline=time.monotonic() + options.timeout)


@contextmanager
def whole_limit(options: RunOptions) -> Iterator[None]:
    """A timeout of the body reported with the whole limit the user gave (the body's
    simulator saw only the time that was left)."""
    try:
        yield
    except SimulationTimeoutError as err:
        if err.limit is None:
            raise
        raise timed_out(options.timeout) from None


def time_left(options: RunOptions) -> float | None:
    """Seconds left before the deadline (``None``: no limit); raises when none is left."""
    if options.deadline is None:
        return options.timeout
    left = options.deadline - time.monotonic()
    if left <= 0:
        raise timed_out(options.timeout)
    return left


def deck_folder(inputs: Inputs) -> str:
    """The absolute folder the deck's relative ``.include`` paths start from: the deck's
    own, or the current one for a deck read from standard input (``-``)."""
    return str(Path(inputs.deck_path).resolve().parent)


@dataclass(frozen=True, slots=True)
class Prepared:
    """An emitted deck made ready to simulate (*deck*, written as *text*), and the analyses
    to run on it."""

    emitted: Emitted
    text: str
    analyses: tuple[str, ...]
    deck_analyses: bool
    findings: tuple[Finding, ...]
    cwd: str
    #: The tree *text* was written from; a diagnosis deck is a transform of this tree,
    #: written once for its simulation (:func:`heatweave.run.diagnosis_decks.simulate_deck`).
    deck: Deck = field(repr=False, compare=False, kw_only=True)
    #: The user's deck and includes, to point ngspice's complaints back at their cards
    #: (:func:`heatweave.run.locate.locate`).
    project: Project | None = field(default=None, repr=False, compare=False, kw_only=True)


def made_safe(
    deck: Deck, inputs: Inputs, options: RunOptions, allow: bool, text: str | None = None
) -> SafeDeck:
    """*deck* (*text* when the caller has it written) as
    :func:`heatweave.run.safedeck.safe_deck` gives it to ngspice: includes inlined (from
    ``options.cwd``, fixed by a sweep before its corners go elsewhere, or the deck's
    folder), ``.control`` blocks and ``*#`` lines taken out unless *allow*, with a warning
    for each (located in the user's files)."""
    folder = options.cwd or deck_folder(inputs)
    return safe_deck(deck, inputs.project, folder, allow, text)


def deck_analyses_of(deck: Deck) -> list[str]:
    """The analysis cards of a deck (top level), as written."""
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
    # The one read of the emitted text: the tree is made safe and written once.
    deck = read(emitted.text, inputs.project.deck.path)
    safe = made_safe(deck, inputs, options, options.allow_control, emitted.text)
    own = deck_analyses_of(safe.deck)
    if not options.analyses and not own and not options.allow_control:
        raise UsageError(
            f"{inputs.deck_path} asks for no analysis (.op, .tran, ...)",
            hint="add an analysis card to the deck, or pass --op or --tran TSTEP TSTOP",
        )
    analyses = tuple(options.analyses)
    if options.max_step is not None:
        analyses = stepped(analyses or tuple(own), options.max_step, inputs.deck_path)
    return Prepared(
        emitted,
        safe.text,
        analyses,
        deck_analyses=not analyses,
        findings=emitted.findings + safe.findings,
        cwd=options.cwd or deck_folder(inputs),
        deck=safe.deck,
        project=inputs.project,
    )


def stepped(analyses: tuple[str, ...], step: float, deck: str) -> tuple[str, ...]:
    """*analyses* with the transient's maximum step set to *step* (``--max-step``)."""
    if not any(is_tran(text) for text in analyses):
        raise UsageError(
            f"--max-step sets a transient's maximum step, and {deck} runs no transient",
            hint="leave --max-step out, or run a transient (--tran TSTEP TSTOP)",
        )
    found = with_max_step(analyses, step)
    if found is None:
        raise UsageError(
            f"--max-step cannot be set on {deck}'s .tran card: its numbers are not plain "
            "SPICE numbers (an expression or a parameter)",
            hint="write the .tran card's TSTEP and TSTOP as numbers, or pass --tran TSTEP TSTOP",
        )
    return found


def simulate(prepared: Prepared, options: RunOptions) -> SimResult:
    """Run ngspice on a prepared deck."""
    simulator = get_simulator(options.backend)
    with whole_limit(options):
        try:
            return simulator.run(
                prepared.text,
                analyses=prepared.analyses,
                deck_analyses=prepared.deck_analyses,
                cwd=prepared.cwd,
                timeout=time_left(options),
                progress=options.progress,
                init_file=options.init_file,
            )
        except SimulatorError as err:
            # Every simulation of a prepared deck (runs, baselines, diagnoses, settling)
            # ends here: ngspice's text is pointed at the user's card, never passed on
            # when it may quote a file not proven SPICE.
            if prepared.project is not None:
                locate(err, prepared.project)
            raise
