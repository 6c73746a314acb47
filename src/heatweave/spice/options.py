"""The deck's ``.options`` settings as ngspice 39 reads them.

Checked with ngspice 39 (the interactive ``option`` command lists what was set): every
card whose name starts with ``.opt`` sets options (``.opt``, ``.option``, ``.options``,
also ``.optran`` and ``.optxyz``), wherever it stands: in an included file or ``.lib``
section, even in an inactive ``.if`` branch, and in the body of an instanced ``.subckt``.
A ``.subckt`` that no instance uses sets its options only in a deck with an ``.if``
block somewhere; it is read here always (a superset of what ngspice sets).
Continuation lines join and an inline ``$`` comment ends the card, as for any card
(:meth:`heatweave.spice.deck.Card.logical`).  ``.control`` blocks hold commands, not
cards, and set none.
"""

from __future__ import annotations

from collections.abc import Iterator

from heatweave.spice.deck import Card, Deck, iter_cards
from heatweave.spice.grammar import CardSyntaxError, parse_card
from heatweave.spice.syntax import DotSyntax, Param

#: What every options card's name starts with (lower case).
OPTIONS_PREFIX = ".opt"


def option_settings(deck: Deck) -> Iterator[tuple[Card, Param]]:
    """Every ``key=value`` of every options card of *deck* (at any depth), in file order,
    with its card; a card the grammar cannot read gives none (lint reports it)."""
    for card in iter_cards(deck.body):
        if not card.name.startswith(OPTIONS_PREFIX):
            continue
        try:
            syntax = parse_card(card.logical().text)
        except CardSyntaxError:
            continue
        if isinstance(syntax, DotSyntax):
            for param in syntax.params:
                yield card, param
