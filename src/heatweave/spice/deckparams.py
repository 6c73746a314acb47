"""``.param`` and ``.func`` cards as values: what brace expressions and ``.if`` see.

ngspice 39 hoists every ``.param`` line to the top of its scope before evaluating them
(``listing`` shows them first), so a parameter may be used above the card that defines it;
here the cards are evaluated in passes until nothing more can be computed.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator
from dataclasses import dataclass

from heatweave.spice.deck import Card
from heatweave.spice.expressions import ExprError, Func, evaluate
from heatweave.spice.grammar import CardSyntaxError, parse_card
from heatweave.spice.syntax import FuncSyntax, ParamCardSyntax


@dataclass(frozen=True, slots=True)
class ParamDef:
    """One ``name = value`` of a ``.param`` card, the value as written."""

    name: str  # lower case
    text: str
    card: Card
    offset: int  # of the value in the card's logical text


def param_defs(card: Card) -> Iterator[ParamDef]:
    """The assignments of a ``.param`` card (none when it does not parse), one at a time:
    a card of a million pairs is read four times by lint, never held as a list."""
    logical = card.logical().text
    try:
        syntax = parse_card(logical)
    except CardSyntaxError:
        return
    if not isinstance(syntax, ParamCardSyntax):
        return
    for p in syntax.params:
        yield ParamDef(p.key.key, logical[p.value.offset : p.value.end], card, p.value.offset)


def func_def(card: Card) -> Func | None:
    """A ``.func`` card as a :class:`Func` (``None`` when it does not parse)."""
    try:
        syntax = parse_card(card.logical().text)
    except CardSyntaxError:
        return None
    if not isinstance(syntax, FuncSyntax):
        return None
    body = syntax.body.inner if syntax.body.text[:1] in "{'" else syntax.body.text
    return Func(syntax.name.key, tuple(a.key for a in syntax.args), body)


def values(cards: Iterable[Card]) -> tuple[dict[str, float], dict[str, Func]]:
    """Numeric values of the ``.param`` cards among *cards* and their ``.func`` cards."""
    params: list[Card] = []
    funcs: dict[str, Func] = {}
    for card in cards:
        name = card.name
        if name.startswith(".param"):  # ngspice 39 reads .params as .param
            params.append(card)
        elif name == ".func":
            func = func_def(card)
            if func is not None:
                funcs[func.name] = func
    return solve((d for card in params for d in param_defs(card)), funcs), funcs


def solve(defs: Iterable[ParamDef], funcs: dict[str, Func]) -> dict[str, float]:
    """Evaluate *defs* in passes (a later definition of a name wins, as in ngspice)."""
    last = {d.name: d for d in defs}
    known: dict[str, float] = {}
    pending = list(last.values())
    while pending:
        left = []
        for d in pending:
            try:
                known[d.name] = evaluate(d.text, known, funcs)
            except ExprError:
                left.append(d)
        if len(left) == len(pending):
            break
        pending = left
    return known
