"""The runaway diagnosis's decks: transforms of the prepared deck's tree, each written once.

The continuation (:mod:`heatweave.run.runaway`) sweeps a drive that scales every injected
dissipation (:func:`driven_deck`); it, the steady-state scan (:mod:`heatweave.run.states`)
and a restart from other temperatures (:mod:`heatweave.run.verify`) hand their decks to
ngspice through :func:`simulate_deck`.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import replace
from typing import TYPE_CHECKING

from heatweave.emit.names import DRIVE_NODE
from heatweave.emit.names import DRIVE_SOURCE as DRIVE_SOURCE_CARD
from heatweave.run.prepare import simulate
from heatweave.spice.deck import Card, Deck
from heatweave.spice.grammar import parse_card
from heatweave.spice.syntax import ElementSyntax
from heatweave.spice.transform import insert_before_end, map_cards, new_cards

if TYPE_CHECKING:
    from heatweave.run.prepare import Prepared, RunOptions
    from heatweave.simulators import SimResult

# Near a fold the power balance is flat, so ngspice's default tolerances (reltol 1e-3)
# accept points slightly past it; the diagnosis decks solve tighter.
TIGHT = ".options reltol=1e-6 vntol=1e-9 abstol=1e-15"


def driven_deck(deck: Deck, sources: Iterable[str]) -> Deck:
    """The emitted deck with every injected dissipation (the heat sources named *sources*,
    :func:`heatweave.emit.names.power_source`, at any depth) scaled by ``V(hw_drive)``, and
    the drive's source, its node made global and :data:`TIGHT` before ``.end``; every other
    card (a deck's own source of a like name too) as it was."""
    named = frozenset(name.lower() for name in sources)
    scaled = map_cards(deck, lambda card: _driven(card) if card.name in named else card)
    drive = f"{DRIVE_SOURCE_CARD} {DRIVE_NODE} 0 DC 0"
    return insert_before_end(scaled, new_cards([drive, f".global {DRIVE_NODE}", TIGHT]))


def _driven(card: Card) -> Card:
    """Heat source *card* (``Bhw_p_r1 0 hw_t_r1 I = <expr>``, written by the emitter) as
    ``... I = V(hw_drive)*(<expr>)``."""
    text = card.logical().text
    syntax = parse_card(text)
    current = syntax.param("i") if isinstance(syntax, ElementSyntax) else None
    assert current is not None, f"not a heat source of heatweave's: {text}"
    at, end = current.value.offset, current.value.end
    scaled = f"{text[:at]}V({DRIVE_NODE})*({text[at:end]}){text[end:]}"
    return card.with_text(scaled + ("\r\n" if card.text.endswith("\r\n") else "\n"))


def simulate_deck(
    prepared: Prepared, options: RunOptions, deck: Deck, analyses: tuple[str, ...] | None = None
) -> SimResult:
    """ngspice on a diagnosis *deck* (a transform of ``prepared.deck``, written here once),
    with *analyses* instead of the prepared ones when given, without a progress bar."""
    diagnosis = replace(prepared, text=deck.write(), deck=deck)
    if analyses is not None:
        diagnosis = replace(diagnosis, analyses=analyses, deck_analyses=False)
    return simulate(diagnosis, replace(options, progress=None))
