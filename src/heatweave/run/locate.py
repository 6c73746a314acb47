"""ngspice's complaint about a card, pointed back at that card in the user's files.

ngspice quotes the card it rejects as it read it: in lower case, with the names of elements
inside subcircuits expanded (``r.x1.rs``), from the emitted deck whose line numbers are not
the user's.  The card is found again in the deck and its included files, by its text or,
failing that, by its element name when exactly one card has it; the error then carries
that card's FILE:LINE and source line instead of ngspice's text alone.
"""

from __future__ import annotations

from heatweave.errors import SimulatorError
from heatweave.spice.deck import Card
from heatweave.spice.project import Project


def locate(error: SimulatorError, project: Project) -> SimulatorError:
    """*error* with the location of the card ngspice rejected, when it can be told."""
    if error.card is None or error.location is not None:
        return error
    card = find_card(error.card, project)
    where = None if card is None else card.location()
    if where is None:
        return error
    error.location = where
    reason = f": {error.reason}" if error.reason else ""
    error.message = f"ngspice rejects this card{reason}"
    error.hint = (
        "fix the card as ngspice 39 reads it; 'heatweave lint DECK' checks every card"
    )
    return error


def find_card(quoted: str, project: Project) -> Card | None:
    """The user's card ngspice quoted: the one whose text it is, else the only card with
    its element name."""
    words = quoted.lower().split()
    if not words:
        return None
    cards = list(project.deck.cards())
    for include in project.includes:
        cards += list(include.deck.cards())
    for card in cards:
        if card.logical().text.lower().split() == words:
            return card
    name = words[0].rsplit(".", 1)[-1]  # r.x1.rs: the element rs of instance x1
    named = [card for card in cards if card.is_element and card.name == name]
    return named[0] if len(named) == 1 else None
