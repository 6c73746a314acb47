""".if / .elseif / .else / .endif: which cards a conditional netlist really holds (2.13).

ngspice 39 evaluates each condition from the ``.param`` values before it reads the
circuit, keeps the cards of the first true branch and drops the rest; blocks nest.  Here a
condition whose value heatweave can compute decides its branch the same way; one it cannot
compute leaves every branch in, each marked with its place, so that the same element name
in two branches of one ``.if`` is not taken for a duplicate (:func:`exclusive`).
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

from heatweave.spice.deck import Card, Node
from heatweave.spice.expressions import ExprError, Func, evaluate

#: Where a card stands in undecided conditionals: (block number, branch number) pairs.
Place = tuple[tuple[int, int], ...]

_MAY_IF = re.compile(r"\.[iI][fF]")
_CONDITION = re.compile(r"\.(?:if|elseif)\s*\((.*)\)\s*$", re.IGNORECASE | re.DOTALL)


@dataclass(frozen=True, slots=True)
class Conditionals:
    """The outcome for one body: cards dropped, and the places of the undecided ones."""

    dropped: frozenset[int]  # id() of cards in branches known to be inactive
    places: Mapping[int, Place]  # id() of cards inside undecided branches

    def place(self, card: Card) -> Place:
        """Where *card* stands in undecided conditionals (empty: unconditionally in)."""
        return self.places.get(id(card), ())

    def keeps(self, node: Node) -> bool:
        """False for a card of a branch ngspice drops."""
        return id(node) not in self.dropped


NONE = Conditionals(frozenset(), {})


def may_have_conditionals(texts: Iterable[str]) -> bool:
    """A cheap first look: False when no text holds a ``.if``."""
    return any(_MAY_IF.search(text) for text in texts)


def condition_text(card: Card) -> str | None:
    """The condition of an ``.if``/``.elseif`` card, or ``None`` when it has none."""
    found = _CONDITION.match(card.logical().text)
    return found.group(1) if found else None


@dataclass
class _Open:
    number: int
    branch: int
    taken: bool  # an earlier branch was true
    undecided: bool  # an earlier condition could not be computed
    active: bool | None  # this branch: True, False, or None (undecided)


def resolve(
    cards: Sequence[Node], params: Mapping[str, float], funcs: Mapping[str, Func]
) -> Conditionals:
    """Decide the ``.if`` blocks among *cards* (one body, in order)."""
    dropped: set[int] = set()
    places: dict[int, Place] = {}
    stack: list[_Open] = []
    count = 0
    for node in cards:
        if not isinstance(node, Card):
            if _inactive(stack):
                dropped.add(id(node))
            continue
        name = node.name if node.is_dot else ""
        if name == ".if":
            outer_off = _inactive(stack)
            count += 1
            active = False if outer_off else _truth(node, params, funcs)
            stack.append(_Open(count, 0, active is True, active is None, active))
            continue
        if name in (".elseif", ".else") and stack:
            top = stack[-1]
            top.branch += 1
            if top.taken:
                top.active = False
            elif name == ".else":
                top.active = None if top.undecided else True
            else:
                value = _truth(node, params, funcs)
                top.active = None if top.undecided and value is not False else value
                top.undecided = top.undecided or value is None
            top.taken = top.taken or top.active is True
            continue
        if name == ".endif" and stack:
            stack.pop()
            continue
        if _inactive(stack):
            dropped.add(id(node))
        elif stack:
            place = tuple((o.number, o.branch) for o in stack if o.active is None)
            if place:
                places[id(node)] = place
    return Conditionals(frozenset(dropped), places)


def _inactive(stack: list[_Open]) -> bool:
    return any(o.active is False for o in stack)


def _truth(card: Card, params: Mapping[str, float], funcs: Mapping[str, Func]) -> bool | None:
    text = condition_text(card)
    if text is None:
        return None
    try:
        return evaluate("{" + text + "}", params, funcs) != 0
    except ExprError:
        return None


def exclusive(a: Place, b: Place) -> bool:
    """True when two places lie in different branches of one ``.if`` block."""
    branches = dict(a)
    return any(branches.get(number, branch) != branch for number, branch in b)


def decide(
    nodes: list[Node], params: Mapping[str, float], funcs: Mapping[str, Func]
) -> tuple[list[Node], Conditionals]:
    """*nodes* without the cards of inactive branches, and the outcome."""
    outcome = resolve(nodes, params, funcs)
    if not outcome.dropped:
        return nodes, outcome
    return [n for n in nodes if outcome.keeps(n)], outcome
