"""What a sweep varies: value ranges from the command line and ``.param`` values in the deck.

A range is ``START:STOP:STEP`` (SPICE quantities, ``-40:125:5``) or a single value.  The grid
runs from START towards STOP in steps of STEP and includes STOP when it falls on the grid
(within a millionth of a step, so ``0:1:0.1`` ends at 1).  A parameter is a top-level
``.param NAME=VALUE`` card of the deck; each corner rewrites that card's value through the
deck model (:func:`heatweave.spice.reader.read`, :meth:`heatweave.spice.deck.Card.with_text`)
and leaves every other byte of the deck as it was.
"""

from __future__ import annotations

import math
import re
from dataclasses import replace

from heatweave.annotation import bind
from heatweave.emit.emitter import Inputs
from heatweave.emit.sections import MARK
from heatweave.emit.splice import insert_before_end
from heatweave.errors import Location, UsageError
from heatweave.quantities import NOT_FINITE, format_number, parse_quantity, temperature_problem
from heatweave.spice.deck import Block, Card, Node
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.project import Project

#: A sweep larger than this is almost certainly a typo in STEP.
MAX_POINTS = 100_000

_NUMBER_START = re.compile(r"\s*[+-]?\.?\d")

_RANGE_HINT = (
    "write START:STOP:STEP, e.g. -40:125:5, a single value such as 85, or a list: 1m,2m,5m"
)
_TEMPERATURE_HINT = (
    "write START:STOP:STEP in degC, e.g. -40:125:5, a single value such as 85, or a list: "
    "-40,25,85"
)


def parse_range(text: str, what: str, temperature: bool = False) -> tuple[float, ...]:
    """The grid of a ``START:STOP:STEP`` range, a single value, or a comma list of values
    and ranges (``0.2m,1m,2m``), as floats in the order given.  With *temperature* the
    values are degC: plain numbers (``77F`` is refused, not read as 77 femto) at or above
    absolute zero."""
    if "," in text:
        values: list[float] = []
        for piece in text.split(","):
            values.extend(parse_range(piece.strip(), what, temperature))
        return tuple(values)
    hint = _TEMPERATURE_HINT if temperature else _RANGE_HINT
    pieces = text.split(":")
    read = [parse_quantity(p) for p in pieces]  # a scale factor and nothing after it
    if len(pieces) not in (1, 3) or any(_NUMBER_START.match(p) is None for p in pieces):
        raise UsageError(f"{what} {text!r} is not a value or a range", hint=hint)
    # The step of temperatures is a plain number of kelvin, as start and stop are degC.
    for k, piece in enumerate(pieces if temperature else ()):
        is_step = k == 2  # kelvin: a plain number of any size
        problem = temperature_problem(piece.strip().lstrip("+-") if is_step else piece, not is_step)
        if problem is not None:
            raise UsageError(f"{what} {text!r}: {problem}", hint=hint)
    for number, problem in read:
        if number is None:
            raise UsageError(f"{what} {text!r}: {problem}", hint=hint)
    found = [float(n) for n, _problem in read if n is not None]
    for piece, value in zip(pieces, found, strict=True):
        if not math.isfinite(value):
            raise UsageError(f"{what} {text!r}: {piece!r} {NOT_FINITE}", hint=hint)
    if len(found) == 1:
        return (found[0],)
    start, stop, step = found
    if start == stop:
        return (start,)
    if step == 0 or (stop - start) / step < 0:
        raise UsageError(
            f"{what} {text!r}: a step of {format_number(step)} never gets from "
            f"{format_number(start)} to {format_number(stop)}",
            hint="give a step with the sign of STOP - START, e.g. -40:125:5 or 125:-40:-5",
        )
    steps = (stop - start) / step  # overflows to infinity for 0:1e300:1e-300
    count = math.floor(steps + 1e-6) + 1 if math.isfinite(steps) else math.inf
    if count > MAX_POINTS:
        raise UsageError(
            f"{what} {text!r} has {count} points, more than {MAX_POINTS}",
            hint="choose a larger step",
        )
    # 12 significant digits: 0.1 steps give 0.3, not 0.30000000000000004
    return tuple(float(f"{start + k * step:.12g}") for k in range(int(count)))


def parse_assignment(text: str) -> tuple[str, tuple[float, ...]]:
    """``NAME=START:STOP:STEP`` of ``--param`` as the name and its grid."""
    name, sep, spec = text.partition("=")
    name = name.strip()
    if not sep or not re.fullmatch(r"[A-Za-z][\w!#$%\[\]]*", name):
        raise UsageError(
            f"--param {text!r} is not NAME=START:STOP:STEP",
            hint="name a .param of the deck, e.g. --param vsupply=9:15:1",
        )
    return name, parse_range(spec, f"--param {name}")


def _value_pattern(name: str) -> re.Pattern[str]:
    # NAME = VALUE, where VALUE is a braced or quoted expression or runs to the next blank
    return re.compile(
        rf"(?<![\w!#$%\[\]]){re.escape(name)}(\s*=\s*)(\{{[^}}]*\}}|'[^']*'|\"[^\"]*\"|[^\s=]+)",
        re.IGNORECASE,
    )


def _param_cards(body: tuple[Node, ...]) -> list[Card]:
    return [n for n in body if type(n) is Card and n.name == ".param"]


def top_level_params(inputs: Inputs) -> dict[str, Card]:
    """Every parameter a top-level ``.param`` card of the deck assigns (lower-case name),
    with the last card that assigns it (the one ngspice keeps)."""
    return _assigned(_param_cards(inputs.project.deck.body))


def _assigned(cards: list[Card]) -> dict[str, Card]:
    """Each parameter the ``.param`` *cards* assign, with the last card that does."""
    found: dict[str, Card] = {}
    for card in cards:
        fields = card.fields()
        for i in range(1, len(fields) - 1):
            if fields[i + 1] == "=" and fields[i] != "=":
                found[fields[i].lower()] = card
    return found


def included_params(inputs: Inputs) -> dict[str, Card]:
    """Every parameter a ``.param`` card at the top of an included file assigns (lower-case
    name), with the last card that assigns it."""
    return _assigned([c for inc in inputs.project.includes for c in _param_cards(inc.body)])


def check_params(inputs: Inputs, names: list[str]) -> None:
    """A located error for a ``--param`` that neither the deck's top level nor the top of
    an included file assigns."""
    known = top_level_params(inputs) | included_params(inputs)
    for name in names:
        if name.lower() in known:
            continue
        deck = inputs.project.deck
        inside = _subckt_param(deck.body, name)
        cards = _param_cards(deck.body)
        where: Location | None
        if inside is not None:
            where = inside.location()
            hint = (
                f"{name} is local to a subcircuit; sweep a top-level .param and pass it "
                "to the instance, e.g. X1 ... params: " + f"{name}={{{name}}}"
            )
        else:
            where = cards[0].location() if cards else _title_location(inputs)
            listed = ", ".join(sorted(known)) or "none"
            hint = (
                f"add '.param {name}=...' to the deck and use {{{name}}} where it applies "
                f"(.param names of the deck and its includes: {listed})"
            )
        raise UsageError(
            f"--param {name}: neither the deck nor a file it includes sets .param {name}",
            where,
            hint,
        )


def _subckt_param(body: tuple[Node, ...], name: str) -> Card | None:
    for node in body:
        if isinstance(node, Block):
            for card in _param_cards(node.body):
                if _value_pattern(name).search(card.logical().text):
                    return card
            inner = _subckt_param(node.body, name)
            if inner is not None:
                return inner
    return None


def _title_location(inputs: Inputs) -> Location:
    deck = inputs.project.deck
    if deck.source is not None:
        return deck.source.location(0)
    return Location(deck.path, 1)


def rewrite_card(card: Card, name: str, value: float) -> Card:
    """The ``.param`` card with *name*'s value replaced by *value* (continuation lines are
    joined into one line; the comment lines above the card stay)."""
    text = card.logical().text
    new = _value_pattern(name).sub(lambda m: name + m.group(1) + format_number(value), text)
    return card.with_text(new + "\n")


def with_params(inputs: Inputs, values: dict[str, float]) -> Inputs:
    """*inputs* with the ``.param`` values replaced, deck re-read and re-bound.

    A parameter of the deck's top level is rewritten where it stands; one that only an
    included file assigns gets a ``.param`` card of its own before the deck's ``.end``
    (included files are never changed): ngspice keeps the last assignment of a parameter
    in deck order, wherever it is used (checked against ngspice 39)."""
    if not values:
        return inputs

    deck = inputs.project.deck
    top = top_level_params(inputs)
    body: list[Node] = []
    for node in deck.body:
        if type(node) is Card and node.name == ".param":
            for name, value in values.items():
                if _value_pattern(name).search(node.logical().text):
                    node = rewrite_card(node, name, value)
        body.append(node)
    for name, value in values.items():
        if name.lower() not in top:
            override = Card(f".param {name}={format_number(value)}\n", f"{MARK}sweep\n")
            body = insert_before_end(body, override)
    # Unchanged cards stay the same objects: the include bookkeeping finds them by identity.
    project = Project(deck.with_body(tuple(body)), inputs.project.includes)
    index = DeckIndex(project)
    return replace(inputs, project=project, index=index, bound=bind(inputs.annotation, index))
