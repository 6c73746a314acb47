"""Element-level views of cards that the emitter needs: terminals, resistor values.

These are cheap views over a card's fields (blanks, ``,``, ``=``, ``(``, ``)`` separate them,
as in ngspice 2.1.4.1), fast enough for the rewrite path on large decks.  Which fields are
nodes follows the element letter (manual table 2.1); for ``Q``, ``M`` and ``N`` cards the
model name ends the node list, which needs the deck's model names.
"""

from __future__ import annotations

import contextlib
import functools
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass

from heatweave.errors import EmitError
from heatweave.quantities import parse_number
from heatweave.spice import deckparams, expressions
from heatweave.spice.cardparts import x_card_parts
from heatweave.spice.deck import _FIELD, Card, Node
from heatweave.spice.element_syntax import DIGITAL_GATES
from heatweave.spice.expressions import ExprError, Func
from heatweave.spice.grammar import CardSyntaxError, parse_card
from heatweave.spice.hierarchy import DeckIndex, Resolved
from heatweave.spice.project import Project
from heatweave.spice.syntax import ElementSyntax

_NUM = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?[A-Za-z]*"
_NODE = r"[^\s,=()'{}\"\[\]<>~%]+"
#: A resistor card in its plainest form: name, two nodes, a number, numeric key=value pairs
#: (at most 16: the regex engine keeps a frame per repetition, about 1.5 kB, so an unbounded
#: run of pairs on a long card took 365 MiB a megabyte; longer cards take the general path).
#: Such a card is valid for the grammar too, so the rewrite path may skip the full parse.
_PAIRS = rf"((?:[ \t]+[A-Za-z_]\w*[ \t]*=[ \t]*{_NUM}){{0,16}})"
SIMPLE_RESISTOR = re.compile(
    rf"[ \t]*[Rr]{_NODE}[ \t]+({_NODE})[ \t]+({_NODE})[ \t]+({_NUM}){_PAIRS}[ \t]*$"
)
_PAIR = re.compile(rf"([A-Za-z_]\w*)[ \t]*=[ \t]*({_NUM})")
# The same on a card's raw text, for a one-line card without comment characters (``;``,
# ``$``, ``/``), whose logical text is then the line itself: no Logical is built.
_RAW_NODE = r"[^\s,=()'{}\"\[\]<>~%;$/]+"
_SIMPLE_RAW = re.compile(
    rf"[ \t]*[Rr]{_RAW_NODE}[ \t]+({_RAW_NODE})[ \t]+({_RAW_NODE})[ \t]+({_NUM})"
    rf"{_PAIRS}[ \t]*\n?\Z"
)


def simple_resistor(card: Card) -> re.Match[str] | None:
    """The card's :data:`SIMPLE_RESISTOR` match (groups: node, node, value, pairs)."""
    found = _SIMPLE_RAW.match(card.text)
    if found is not None:
        return found
    return SIMPLE_RESISTOR.match(card.logical().text)


#: Fixed node counts by element letter (manual table 2.1).
NODE_COUNT = {
    "R": 2, "C": 2, "L": 2, "V": 2, "I": 2, "B": 2, "D": 2, "F": 2, "H": 2, "W": 2,
    "E": 4, "G": 4, "S": 4, "T": 4, "O": 4, "Y": 4, "J": 3, "Z": 3, "U": 3,
}  # fmt: skip
#: Letters whose node list ends at the model name; the default count when none is known.
MODEL_ENDS_NODES = {"Q": 3, "M": 4, "N": 2}


def positional_spans(card: Card, most: int | None = None) -> list[tuple[str, int, int]]:
    """(field, start, end) of the fields before the first ``key=value``, name excluded;
    the first *most* of them when given."""
    found = _FIELD.finditer(card.logical().text)
    next(found, None)  # the name
    out: list[tuple[str, int, int]] = []
    for m in found:  # lazily: a long card's pairs are never listed
        if m.group(0) == "=":
            if out:
                out.pop()  # the key before it
            break
        if len(out) == most:  # the field after the last one kept is known not to be a key
            break
        out.append((m.group(0), m.start(), m.end()))
    return out


def _node_spans(card: Card, index: DeckIndex | None) -> list[tuple[str, int, int]]:
    letter = card.letter
    count = NODE_COUNT.get(letter)
    fixed = count is not None and letter not in "DUXK" and letter not in MODEL_ENDS_NODES
    fields = positional_spans(card, count if fixed else None)
    if letter == "X":
        nodes, _sub, _params = x_card_parts(card)
        return fields[: len(nodes)]
    if letter in ("E", "G") and len(fields) > 2:
        keyword = fields[2][0].lower()
        if keyword.startswith(("value", "vol", "cur", "table", "poly")):
            return fields[:2]
    if letter == "D" and any(f[0].lower() == "thermal" for f in fields):
        return fields[:3]
    if letter in MODEL_ENDS_NODES:
        models = index.models if index is not None else {}
        for i, (text, _s, _e) in enumerate(fields):
            if text.lower() in models:
                return fields[:i]
        return fields[: MODEL_ENDS_NODES[letter]]
    if letter == "K":  # K couples two inductors it names: no terminals (3.3.12)
        return []
    if count is None or (letter == "U" and _digital_gate(fields)):
        return _grammar_nodes(card)
    return fields[:count]


def _digital_gate(fields: list[tuple[str, int, int]]) -> bool:
    return bool(fields) and fields[0][0].lower() in DIGITAL_GATES


# ``%vnam(V1)`` reads the current of source V1: a name, not a node (manual 12.1.1).
_VNAM = re.compile(r"%vnam\s*\(\s*([^\s()]+)\s*\)", re.IGNORECASE)


def _grammar_nodes(card: Card) -> list[tuple[str, int, int]]:
    """Nodes the grammar finds on cards without a fixed count (A, P, N, digital U): an
    XSPICE card's ports with ``[ ]`` vectors, ``%`` types and ``~`` read as ngspice does
    (12.1.1), ``null`` and ``%vnam`` source names left out."""
    logical = card.logical().text
    try:
        syntax = parse_card(logical)
    except CardSyntaxError as err:
        raise EmitError(err.message, card.location(err.offset), err.hint) from None
    if not isinstance(syntax, ElementSyntax):
        return []
    names = {m.lower() for m in _VNAM.findall(logical)}
    return [(n.text, n.offset, n.end) for n in syntax.nodes if n.key not in names]


def card_nodes(card: Card, index: DeckIndex | None = None) -> list[str]:
    """The node names of an element card, as written."""
    if card.letter == "R":
        simple = simple_resistor(card)
        if simple is not None:
            return [simple.group(1), simple.group(2)]
    return [text for text, _s, _e in _node_spans(card, index)]


def rewrite_nodes(card: Card, new: Mapping[int, str], index: DeckIndex | None = None) -> str:
    """The card as one line (its logical text) with terminal *k* renamed to ``new[k]``."""
    logical = card.logical().text
    spans = _node_spans(card, index)
    for k in sorted(new, reverse=True):
        _text, start, end = spans[k]
        logical = logical[:start] + new[k] + logical[end:]
    return logical + "\n"


@dataclass(frozen=True, slots=True)
class ResistorValue:
    """A resistor card's nominal resistance (value * scale / m) and what it set aside."""

    ohms: float
    notes: tuple[str, ...]
    model: tuple[str, int] | None = None  # the model name on the card, its logical offset


@functools.lru_cache(maxsize=4096)  # a large deck repeats its values many times over
def _plain_value(text: str) -> ResistorValue | None:
    """The value of a card that writes a bare number and nothing else (None: not one)."""
    ohms = parse_number(text)
    if ohms is not None and ohms != 0 and math.isfinite(ohms):
        return ResistorValue(ohms, ())
    return None


#: Resistor instance parameters whose temperature effect the annotation model replaces.
_TEMPERATURE_PARAMS = ("tc1", "tc2", "tc", "tce", "temp", "dtemp")


def resistor_value(
    card: Card,
    params: Mapping[str, float],
    simple: re.Match[str] | None = None,
    funcs: Mapping[str, Func] | None = None,
) -> ResistorValue:
    """The nominal resistance of an ``R`` card, evaluating ``{expr}`` with *params* and the
    ``.func`` definitions *funcs*; *simple* is the card's :data:`SIMPLE_RESISTOR` match
    when the caller has it."""
    pairs: dict[str, tuple[str, int]] = {}  # key -> (value as written, logical offset)
    positional: list[tuple[str, int]] = []
    if simple is None:
        simple = simple_resistor(card)
    if simple is not None:
        if not simple.group(4):  # the common card: a bare number, nothing set aside
            plain = _plain_value(simple.group(3))
            if plain is not None:
                return plain
        positional.append((simple.group(3), 0))
        pairs.update((k.lower(), (v, 0)) for k, v in _PAIR.findall(simple.group(4)))
    else:
        _fields_after_nodes(card, pairs, positional)
    raw, at = pairs.get("r") or pairs.get("resistance") or ("", 0)
    model_name = False
    if not raw and positional:
        raw, at = positional[0]
        model_name = _BARE_NAME.fullmatch(raw) is not None and raw.lower() not in params
    if not raw or model_name:
        raise EmitError(
            f"{card.head} has no resistance value heatweave can read",
            card.location(at),
            hint="write the value on the card (e.g. 10k or {rval}); geometry from a model "
            "(l, w, rsh) is not supported for annotated parts",
        )
    ohms = evaluate(raw, params, card, at, funcs)
    notes = []
    for key in _TEMPERATURE_PARAMS:
        if key in pairs:
            notes.append(
                f"the card's {key}={pairs[key][0]} no longer applies: the annotation's model "
                "sets the resistance's temperature dependence"
            )
    if len(positional) > 1:
        notes.append(
            f"model {positional[1][0]} on the card: its tc1/tc2/tce no longer apply; "
            "the annotation's model replaces them"
        )
    for key in ("m", "scale"):
        if key in pairs:
            text, where = pairs[key]
            factor = evaluate(text, params, card, where, funcs)
            if key == "scale":
                ohms *= factor
            else:
                ohms = ohms / factor if factor else math.inf
    if ohms == 0 or not math.isfinite(ohms):
        raise EmitError(
            f"{card.head} has resistance {ohms:g} ohm (value * scale / m)",
            card.location(),
            hint="an annotated resistor needs a finite, nonzero resistance: check its value, "
            "m= and scale=",
        )
    return ResistorValue(ohms, tuple(notes), positional[1] if len(positional) > 1 else None)


#: Where a ``key=value`` pair starts, which ends the unbraced expression before it.
_NEXT_PAIR = re.compile(r"[ \t]+[A-Za-z_]\w*[ \t]*=(?!=)")
#: A bare name in the value's place: ngspice 39 reads it as a model name (given a
#: parameter's name it warns, then uses the parameter, as heatweave does).
_BARE_NAME = re.compile(r"[A-Za-z_][\w$!#\[\]]*")


def _fields_after_nodes(
    card: Card, pairs: dict[str, tuple[str, int]], positional: list[tuple[str, int]]
) -> None:
    """The card's values after its nodes, each as written with its logical offset: the
    ``key=value`` pairs into *pairs*, the rest into *positional*.  An unbraced expression
    that the field splitting cuts at its parentheses (``r = V(a)*10+1k``) is kept whole:
    after ``key=`` it runs to the next pair; as a positional field, ngspice 39 would read
    it as a model name, so it is refused here with its whole text."""
    logical = card.logical().text
    spans = [(m.group(0), m.start()) for m in _FIELD.finditer(logical)]
    i = 3
    while i < len(spans):
        text, start = spans[i]
        if i + 1 < len(spans) and spans[i + 1][0] == "=":
            value, at = spans[i + 2] if i + 2 < len(spans) else ("", spans[i + 1][1])
            written = _as_written(logical, at, value)
            pairs[text.lower()] = (written, at)
            i += 3
            while i < len(spans) and spans[i][1] < at + len(written):
                i += 1  # the pieces of an expression kept whole
            continue
        written = _as_written(logical, start, text)
        if written != text and logical[start + len(text) :].lstrip(" \t")[:1] == "(":
            raise _unbraced(card, written, start)
        positional.append((text, start))
        i += 1


def _as_written(logical: str, start: int, field: str) -> str:
    """The value that starts at *start*: a braced or quoted *field* whole, an unbraced one
    up to the next ``key=`` pair."""
    if field[:1] in "{'\"" or not field:
        return field
    found = _NEXT_PAIR.search(logical, start)
    return logical[start : found.start() if found else len(logical)].rstrip(" \t")


def _unbraced(card: Card, written: str, start: int) -> EmitError:
    if _RUNTIME.search(written):
        return _runtime(card, written, start)
    return EmitError(
        f"cannot evaluate the value {written!r} of {card.head}: ngspice 39 reads an "
        "expression outside braces as a model name",
        card.location(start),
        hint=f"write it in braces: {{{written}}}",
    )


#: A node voltage or branch current in an expression: ``V(a)``, ``v(a,b)``, ``I(V1)``.
_RUNTIME = re.compile(r"(?<![\w.])[vViI][ \t]*\(")
_GENERIC_HINT = "annotated resistors need a number or an expression of numeric .param values"


def evaluate(
    text: str,
    params: Mapping[str, float],
    card: Card | None = None,
    at: int = 0,
    funcs: Mapping[str, Func] | None = None,
) -> float:
    """A SPICE value: a number with scale factor, or a ``{...}``/``'...'`` expression over
    numeric ``.param`` values and ``.func`` definitions, as ngspice 39 evaluates it
    (:mod:`heatweave.spice.expressions`).  *at* is the value's logical offset on *card*, where an
    error points; the error says which construct has no value, and why."""
    number = parse_number(text)
    if number is not None:
        return number
    if _RUNTIME.search(text):
        raise _runtime(card, text, at)
    try:
        return expressions.evaluate(text, params, funcs)
    except ExprError as err:
        raise EmitError(
            f"cannot evaluate the value {text!r} of {card.head if card else 'a card'}: "
            f"{err.message}",
            card.location(at) if card else None,
            hint=_RUNTIME_HINT if err.kind == "runtime" else err.hint or _GENERIC_HINT,
        ) from None


def _runtime(card: Card | None, text: str, at: int) -> EmitError:
    """The error for a value that follows the circuit (manual 3.3.4): it has no nominal."""
    return EmitError(
        f"the value {text!r} of {card.head if card else 'a card'} depends on node voltages "
        "or currents: such values cannot be annotated",
        card.location(at) if card else None,
        hint=_RUNTIME_HINT,
    )


_RUNTIME_HINT = (
    "give the resistor a fixed value (a number or an expression of .param values), "
    "or leave it out of the annotation file"
)


_PARAM_CARD = re.compile(r"\.[pP][aA][rR][aA][mM]")  # a first look; see top_params
_FUNC_CARD = re.compile(r"\.[fF][uU][nN][cC]")


def top_params(index: DeckIndex) -> dict[str, float]:
    """Numeric values of the top-level ``.param`` cards, in order, later ones winning;
    those of an ``.include``d file or a ``.lib`` section count where its card stands."""
    values: dict[str, float] = {}
    project = index.project
    sources = [project.deck.source, *(inc.deck.source for inc in project.includes)]
    if all(s is not None and _PARAM_CARD.search(s.text) is None for s in sources):
        return values
    funcs = top_funcs(index)
    known = -1
    while len(values) > known:  # ngspice hoists .param cards: a later one may be used above
        known = len(values)
        _param_cards(project.deck.body, values, project, funcs)
    return values


def top_funcs(index: DeckIndex) -> dict[str, Func]:
    """The ``.func`` definitions of the deck's top level and of the files it includes."""
    project = index.project
    sources = [project.deck.source, *(inc.deck.source for inc in project.includes)]
    if all(s is not None and _FUNC_CARD.search(s.text) is None for s in sources):
        return {}
    bodies = [project.deck.body, *(inc.body for inc in project.includes)]
    cards = (n for body in bodies for n in body if isinstance(n, Card) and n.name == ".func")
    return deckparams.values(cards)[1]


def scope_params(
    top: Mapping[str, float], found: Resolved, funcs: Mapping[str, Func] | None = None
) -> dict[str, float]:
    """The numeric parameters an element inside subcircuit instances sees: the top-level
    ones, then at each level down the definition's ``params:`` defaults, the instance's
    own ``key=value`` arguments (evaluated where the instance stands) and the definition's
    ``.param`` cards, inner names hiding outer ones (manual 2.9.3); *funcs* are the
    ``.func`` definitions they may call."""
    values = dict(top)
    for instance, definition in zip(found.instances, found.definitions, strict=True):
        caller = values
        values = dict(caller)
        _assign(_pairs(definition.header.fields()[2:]), values, values, funcs)
        _assign(_pairs(x_card_parts(instance)[2]), caller, values, funcs)
        _param_cards(definition.body, values, funcs=funcs)
    return values


def _param_cards(
    body: tuple[Node, ...],
    values: dict[str, float],
    project: Project | None = None,
    funcs: Mapping[str, Func] | None = None,
) -> None:
    """Evaluate the ``.param`` cards of *body* into *values*, in order; with *project*,
    those of the files its include cards bring in too, in their place."""
    for card in body:
        if not isinstance(card, Card):
            continue
        if card.name.startswith(".param"):  # ngspice 39 reads .params as .param
            _assign(_pairs(card.fields()[1:]), values, values, funcs)
        elif project is not None and project.includes and card.is_dot:
            included = project.include_for(card)
            if included is not None:
                _param_cards(included.body, values, project, funcs)


def _pairs(fields: list[str]) -> list[tuple[str, str]]:
    """The ``key = value`` triples among *fields* (``params:`` and ports skipped)."""
    out = []
    i = 0
    while i + 2 < len(fields):
        if fields[i + 1] != "=":
            i += 1
            continue
        out.append((fields[i], fields[i + 2]))
        i += 3
    return out


def _assign(
    pairs: list[tuple[str, str]],
    scope: Mapping[str, float],
    into: dict[str, float],
    funcs: Mapping[str, Func] | None = None,
) -> None:
    """Each pair's value evaluated in *scope* (numeric ones only) into *into*."""
    for key, text in pairs:
        with contextlib.suppress(EmitError):
            into[key.lower()] = evaluate(text, scope, funcs=funcs)
