"""Preparing an electrothermal deck for ngspice and simulating it.

The emitted deck loses its ``.control`` blocks (their commands can run shell commands)
unless the caller allows them; heatweave then drives the analyses itself.  Nothing is
written except in a temporary working folder.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from heatweave.annotation import Annotation
from heatweave.emit.emitter import Emitted, Inputs, emit_inputs
from heatweave.errors import Finding, UsageError
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
