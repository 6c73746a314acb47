"""ngspice's complaint about a card, pointed back at that card in the user's files.

ngspice quotes the card it rejects as it read it: in lower case, with the names of elements
inside subcircuits expanded (``r.x1.rs``), from the emitted deck whose line numbers are not
the user's.  The card is found again in the deck and its included files, by its text or,
failing that, by its element name when exactly one card has it; the error then carries
that card's FILE:LINE and source line instead of ngspice's text alone.

ngspice's text is never passed on when it may quote a file not proven to be SPICE
(:func:`heatweave.spice.project.proven`): a card found there gets a withheld location
(FILE:LINE, no text), and a message that names any word of such a file is replaced.
"""

from __future__ import annotations

import os
import re

from heatweave.errors import Plain, SimulatorError
from heatweave.spice.deck import Card
from heatweave.spice.private import WORDS, quotable
from heatweave.spice.project import Project

# Runs of letters and digits inside a word (hunter2 in hunter2-x), which a message may show
# without the rest.
_PIECES = re.compile(r"[^\W_]{4,}")


def locate(error: SimulatorError, project: Project) -> SimulatorError:
    """*error* with the location of the card ngspice rejected, when it can be told; with
    nothing of a file not proven SPICE in it whatever it quotes."""
    if error.card is not None and error.location is None:
        card = find_card(error.card, project)
        where = None if card is None else card.location()
        if where is not None:
            error.location = where
            if where.withheld:  # its reason may quote the card: say only that it failed
                error.message = Plain("ngspice rejects this card")
            else:
                reason = f": {error.reason}" if error.reason else ""
                error.message = f"ngspice rejects this card{reason}"
            error.hint = Plain(
                "fix the card as ngspice 39 reads it; 'heatweave lint DECK' checks every card"
            )
    if error.location is None or not error.location.withheld:
        withhold(error, project)
    return error


def withhold(error: SimulatorError, project: Project) -> None:
    """Replace what *error* says when it names a word of an included file not proven SPICE
    (ngspice's text may quote a line of a password file that reads as cards)."""
    hidden = [inc for inc in project.includes if not quotable(inc.deck)]
    if not hidden:
        return
    # Words of four characters or more (shorter ones hide nothing: a node 0, a value 1k),
    # less those the deck's quotable files hold too (shown there anyway).
    words: set[str] = set()
    for inc in hidden:
        text = inc.deck.write().lower()
        words.update(w for w in WORDS.findall(text) if len(w) > 3)
        words.update(_PIECES.findall(text))
    for deck in (project.deck, *(inc.deck for inc in project.includes if quotable(inc.deck))):
        words.difference_update(WORDS.findall(deck.write().lower()))
    said = " ".join(t for t in (error.message, error.hint or "", error.card or "",
                                error.reason or "") if t).lower()  # fmt: skip
    if not any(w in said for w in words):
        return
    names = ", ".join(sorted({os.path.basename(inc.path) for inc in hidden}))
    error.message = Plain(
        "ngspice could not simulate the deck; its message is not shown because it may quote "
        f"a line of {names}, an included file not proven to be SPICE"
    )
    error.hint = Plain(
        "run 'heatweave lint DECK'; an included file of SPICE cards is shown in full when its "
        "name ends in a SPICE suffix (.inc, .cir, .lib ...)"
    )
    error.card = error.reason = None


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
