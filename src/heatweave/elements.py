"""Element-level views of cards that the emitter needs: terminals, resistor values.

These are cheap views over a card's fields (blanks, ``,``, ``=``, ``(``, ``)`` separate them,
as in ngspice 2.1.4.1), fast enough for the rewrite path on large decks.  Which fields are
nodes follows the element letter (manual table 2.1); for ``Q``, ``M`` and ``N`` cards the
model name ends the node list, which needs the deck's model names.
"""

from __future__ import annotations

import ast
import contextlib
import functools
import math
import operator
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass

from heatweave.bulk import fast_init
from heatweave.deck import _FIELD, Card, Node
from heatweave.errors import EmitError
from heatweave.hierarchy import DeckIndex, Project, Resolved, x_card_parts
from heatweave.quantities import parse_number

_NUM = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?[A-Za-z]*"
_NODE = r"[^\s,=()'{}\"\[\]<>~%]+"
#: A resistor card in its plainest form: name, two nodes, a number, numeric key=value pairs.
#: Such a card is valid for the grammar too, so the rewrite path may skip the full parse.
SIMPLE_RESISTOR = re.compile(
    rf"[ \t]*[Rr]{_NODE}[ \t]+({_NODE})[ \t]+({_NODE})[ \t]+({_NUM})"
    rf"((?:[ \t]+[A-Za-z_]\w*[ \t]*=[ \t]*{_NUM})*)[ \t]*$"
)
_PAIR = re.compile(rf"([A-Za-z_]\w*)[ \t]*=[ \t]*({_NUM})")
# The same on a card's raw text, for a one-line card without comment characters (``;``,
# ``$``, ``/``), whose logical text is then the line itself: no Logical is built.
_RAW_NODE = r"[^\s,=()'{}\"\[\]<>~%;$/]+"
_SIMPLE_RAW = re.compile(
    rf"[ \t]*[Rr]{_RAW_NODE}[ \t]+({_RAW_NODE})[ \t]+({_RAW_NODE})[ \t]+({_NUM})"
    rf"((?:[ \t]+[A-Za-z_]\w*[ \t]*=[ \t]*{_NUM})*)[ \t]*\n?\Z"
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


def positional_spans(card: Card) -> list[tuple[str, int, int]]:
    """(field, start, end) of the fields before the first ``key=value``, name excluded."""
    logical = card.logical().text
    spans = [(m.group(0), m.start(), m.end()) for m in _FIELD.finditer(logical)]
    out = []
    for i, span in enumerate(spans[1:], start=1):
        if span[0] == "=" or (i + 1 < len(spans) and spans[i + 1][0] == "="):
            break
        out.append(span)
    return out


def _node_spans(card: Card, index: DeckIndex | None) -> list[tuple[str, int, int]]:
    letter = card.letter
    fields = positional_spans(card)
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
    count = NODE_COUNT.get(letter)
    if count is None:
        raise EmitError(
            f"heatweave cannot tell the terminals of {card.head} ({letter} elements)",
            card.location(),
            hint="annotate a subcircuit instance that contains it instead",
        )
    return fields[:count]


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


@fast_init
@dataclass(frozen=True, slots=True)
class ResistorValue:
    """A resistor card's nominal resistance (value * scale / m) and what it set aside."""

    ohms: float
    notes: tuple[str, ...]


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
    card: Card, params: Mapping[str, float], simple: re.Match[str] | None = None
) -> ResistorValue:
    """The nominal resistance of an ``R`` card, evaluating ``{expr}`` with *params*;
    *simple* is the card's :data:`SIMPLE_RESISTOR` match when the caller has it."""
    pairs: dict[str, str] = {}
    positional: list[str] = []
    if simple is None:
        simple = simple_resistor(card)
    if simple is not None:
        if not simple.group(4):  # the common card: a bare number, nothing set aside
            plain = _plain_value(simple.group(3))
            if plain is not None:
                return plain
        positional.append(simple.group(3))
        pairs.update((k.lower(), v) for k, v in _PAIR.findall(simple.group(4)))
    else:
        fields = card.fields()
        i = 3
        while i < len(fields):
            if i + 1 < len(fields) and fields[i + 1] == "=":
                pairs[fields[i].lower()] = fields[i + 2] if i + 2 < len(fields) else ""
                i += 3
            else:
                positional.append(fields[i])
                i += 1
    raw = pairs.get("r") or pairs.get("resistance") or (positional[0] if positional else None)
    if raw is None:
        raise EmitError(
            f"{card.head} has no resistance value heatweave can read",
            card.location(),
            hint="write the value on the card (e.g. 10k or {rval}); geometry from a model "
            "(l, w, rsh) is not supported for annotated parts",
        )
    ohms = evaluate(raw, params, card)
    notes = []
    for key in _TEMPERATURE_PARAMS:
        if key in pairs:
            notes.append(
                f"the card's {key}={pairs[key]} no longer applies: the annotation's model "
                "sets the resistance's temperature dependence"
            )
    if len(positional) > 1:
        notes.append(
            f"model {positional[1]} on the card: its tc1/tc2/tce no longer apply; "
            "the annotation's model replaces them"
        )
    for key in ("m", "scale"):
        if key in pairs:
            factor = evaluate(pairs[key], params, card)
            ohms = ohms / factor if key == "m" else ohms * factor
    if ohms == 0 or not math.isfinite(ohms):
        raise EmitError(f"{card.head} has resistance {ohms}", card.location())
    return ResistorValue(ohms, tuple(notes))


_BINARY: dict[type[ast.operator], Callable[[float, float], float]] = {
    ast.Add: operator.add,
    ast.Sub: operator.sub,
    ast.Mult: operator.mul,
    ast.Div: operator.truediv,
    ast.Pow: operator.pow,
}
_FUNCS: dict[str, Callable[..., float]] = {
    "sqrt": math.sqrt, "exp": math.exp, "ln": math.log, "log": math.log,
    "log10": math.log10, "abs": abs, "min": min, "max": max, "pow": math.pow,
}  # fmt: skip
_NUMBER_IN_EXPR = re.compile(r"(?<![\w.])(\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?[A-Za-z]*")


def evaluate(text: str, params: Mapping[str, float], card: Card | None = None) -> float:
    """A SPICE value: a number with scale factor, or a ``{...}``/``'...'`` expression over
    numeric ``.param`` values (arithmetic and the common functions)."""
    number = parse_number(text)
    if number is not None:
        return number
    expr = text.strip()
    if expr[:1] in "{'" and expr[-1:] in "}'":
        expr = expr[1:-1]

    def literal(m: re.Match[str]) -> str:
        value = parse_number(m.group(0))
        return repr(value) if value is not None else m.group(0)

    python = _NUMBER_IN_EXPR.sub(literal, expr).replace("^", "**")
    try:
        tree = ast.parse(python, mode="eval")
        return _eval(tree.body, {k.lower(): v for k, v in params.items()})
    except (SyntaxError, KeyError, ValueError, TypeError, ZeroDivisionError) as err:
        raise EmitError(
            f"cannot evaluate the value {text!r} of {card.head if card else 'a card'}",
            card.location() if card else None,
            hint="annotated resistors need a number or an expression of numeric .param "
            f"values ({err.__class__.__name__}: {err})",
        ) from err


def _eval(node: ast.expr, params: Mapping[str, float]) -> float:
    if isinstance(node, ast.Constant) and isinstance(node.value, int | float):
        return float(node.value)
    if isinstance(node, ast.Name):
        return params[node.id.lower()]
    if isinstance(node, ast.UnaryOp) and isinstance(node.op, ast.USub | ast.UAdd):
        value = _eval(node.operand, params)
        return -value if isinstance(node.op, ast.USub) else value
    if isinstance(node, ast.BinOp) and type(node.op) in _BINARY:
        return _BINARY[type(node.op)](_eval(node.left, params), _eval(node.right, params))
    if isinstance(node, ast.Call) and isinstance(node.func, ast.Name):
        func = _FUNCS[node.func.id.lower()]
        return float(func(*(_eval(a, params) for a in node.args)))
    raise ValueError("unsupported expression")


_PARAM_CARD = re.compile(r"\.[pP][aA][rR][aA][mM]")  # a first look; see top_params


def top_params(index: DeckIndex) -> dict[str, float]:
    """Numeric values of the top-level ``.param`` cards, in order, later ones winning;
    those of an ``.include``d file or a ``.lib`` section count where its card stands."""
    values: dict[str, float] = {}
    project = index.project
    sources = [project.deck.source, *(inc.deck.source for inc in project.includes)]
    if all(s is not None and _PARAM_CARD.search(s.text) is None for s in sources):
        return values
    _param_cards(project.deck.body, values, project)
    return values


def scope_params(top: Mapping[str, float], found: Resolved) -> dict[str, float]:
    """The numeric parameters an element inside subcircuit instances sees: the top-level
    ones, then at each level down the definition's ``params:`` defaults, the instance's
    own ``key=value`` arguments (evaluated where the instance stands) and the definition's
    ``.param`` cards, inner names hiding outer ones (manual 2.9.3)."""
    values = dict(top)
    for instance, definition in zip(found.instances, found.definitions, strict=True):
        caller = values
        values = dict(caller)
        _assign(_pairs(definition.header.fields()[2:]), values, values)
        _assign(_pairs(x_card_parts(instance)[2]), caller, values)
        _param_cards(definition.body, values)
    return values


def _param_cards(
    body: tuple[Node, ...], values: dict[str, float], project: Project | None = None
) -> None:
    """Evaluate the ``.param`` cards of *body* into *values*, in order; with *project*,
    those of the files its include cards bring in too, in their place."""
    for card in body:
        if not isinstance(card, Card):
            continue
        if card.name == ".param":
            _assign(_pairs(card.fields()[1:]), values, values)
        elif project is not None and project.includes and card.is_dot:
            included = project.include_for(card)
            if included is not None:
                _param_cards(included.body, values, project)


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
    pairs: list[tuple[str, str]], scope: Mapping[str, float], into: dict[str, float]
) -> None:
    """Each pair's value evaluated in *scope* (numeric ones only) into *into*."""
    for key, text in pairs:
        with contextlib.suppress(EmitError):
            into[key.lower()] = evaluate(text, scope)
