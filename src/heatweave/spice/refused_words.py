"""Words ngspice 39 refuses on cards the grammar reads (issue 14).

Found by the lint/ngspice differential check (``tests/fuzz/lintdiff.py``) and held against
ngspice 39.3 in ``tests/conformance/reject`` (r37 on): each card here stops ngspice with
"unknown parameter (...)" or "could not find a valid modelname".  Only what ngspice was
seen to refuse is listed (a deny list, never an allow list): a deck ngspice runs must pass.

- a list (``tc=1m,1u``, ``ic=1,2``) on an R, C or L parameter, which takes one value
  (unless the value follows the circuit, ``{1k+50*temper}``: ngspice makes that card a B
  source, and none of the R, C and L rules here hold for it);
- an R card with a model name after a value written in braces or quotes or starting with
  a '.' (``R1 a b {rv} rmod``, ``R1 a b .5k rmod``; ``R1 a b 0.5k rmod`` runs);
- a C or L card with a word after its value (``C1 a b 1p cmod``: the model goes first,
  ``C1 a b cmod 1p``), unless the word is one of the card's own flags;
- a D card with a bare number after its model (``D1 a b dmod 2``): ngspice 39 reads the
  four-word form as ``D n+ n- tj model`` (7.3), so the number is taken for the model;
- ``ic=`` on a Z (MESFET) card (``r=``/``td=`` of sources: :mod:`~heatweave.spice.source_options`);
- ``temp``/``dtemp`` on MOSFETs of the BSIM and related levels, ``areab``/``areac`` on
  VBIC and HICUM bipolar models;
- a word value (``method=gear``) on an options card written short (``.opt``, ``.optio``):
  only ``.option`` and ``.options`` read words, the others read every value as an
  expression and stop with "Undefined parameter".
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Iterator, Mapping

from heatweave.errors import DeckSyntaxError, Finding
from heatweave.spice.deck import Card
from heatweave.spice.grammar import syntax_of
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.model_levels import model_level
from heatweave.spice.references import glued_word
from heatweave.spice.syntax import DotSyntax, ElementSyntax, Value, ValueKind

# Words a C or L card may carry after its value: the card's own parameter names, which
# ngspice 39 reads as flags there (checked: "C1 a b 1p c" runs).
_FLAGS = frozenset({"c", "cap", "capacitance", "l", "inductance", "ic", "m", "w", "scale",
                    "temp", "dtemp", "tc1", "tc2", "nt", "off"})  # fmt: skip
# (model type, level) -> instance parameters ngspice 39.3 answers with "unknown parameter".
_NO_TEMPERATURE = frozenset({"temp", "dtemp"})
_REFUSED: dict[tuple[str, int], frozenset[str]] = {
    **{("mos", level): _NO_TEMPERATURE for level in (4, 5, 8, 10, 14, 49, 54, 57)},
    ("mos", 60): frozenset({"dtemp"}),
    ("mos", 73): frozenset({"temp"}),
    ("bjt", 4): frozenset({"areab", "areac"}),
    ("bjt", 9): frozenset({"areab", "areac"}),
}
_KINDS = {"nmos": "mos", "pmos": "mos", "npn": "bjt", "pnp": "bjt"}
_OPTIONS = frozenset({".option", ".options"})
# A value that follows the circuit (manual 3.3.4): ngspice 39 turns the R, C or L into a B
# source, which takes "tc=1m,1u" and more (checked: such cards run).
_RUNTIME = re.compile(r"(?i)\b(?:temper|time|hertz)\b|\b[vi]\s*\(")


def refused_words(index: DeckIndex, dots: Iterable[Card]) -> Iterator[Finding]:
    """Every element card of *index*, and options card among *dots*, with a word ngspice
    39 refuses."""
    for scope in index.top.walk():
        for card in scope.cards:
            if card.letter not in "RCLDZMQ":
                continue
            try:
                syntax = syntax_of(card)
            except DeckSyntaxError:
                continue  # lint reports the grammar
            if isinstance(syntax, ElementSyntax):
                yield from _card(card, syntax, index.models)
    for card in dots:
        if card.name.startswith(".opt") and card.name not in _OPTIONS:
            try:
                syntax = syntax_of(card)
            except DeckSyntaxError:
                continue
            if isinstance(syntax, DotSyntax):
                yield from _short_options(card, syntax)


def _short_options(card: Card, syntax: DotSyntax) -> Iterator[Finding]:
    for param in syntax.params:
        value = param.value
        if isinstance(value, Value) and value.kind is ValueKind.NAME and value.number is None:
            yield _refused(card, value.offset, f"{card.head} is read as .options, but its "
                           f"values as expressions: ngspice 39 stops with 'Undefined "
                           f"parameter [{value.key}]'", f"write .options in full "
                           f"(.options {param.key.text}={value.text})")  # fmt: skip


def _card(card: Card, syntax: ElementSyntax, models: Mapping[str, Card]) -> Iterator[Finding]:
    name = syntax.name.text
    letter = card.letter
    if letter in "RCL" and _RUNTIME.search(card.logical().text):
        return  # ngspice 39 makes it a B source, which reads its words otherwise
    if letter in "RCL":
        text = card.logical().text
        for param in syntax.params:
            if param.more:
                extra = text[param.more[0].offset : param.more[0].end].lower()
                first = text[param.value.offset : param.value.end]
                yield _refused(card, param.more[0].offset, f"{name}'s {param.key.text}= takes "
                               f"one value, not a list: ngspice 39 stops with 'unknown "
                               f"parameter ({extra})'", f"write one value (e.g. "
                               f"{param.key.text}={first}); tc1= and tc2= are two "
                               "parameters")  # fmt: skip
    if letter == "R":
        yield from _resistor_model(card, syntax, models)
        for param in syntax.params:  # r={rv}k as R n+ n- {rv}k (references.glued_word)
            if param.key.key in ("r", "resistance") and isinstance(param.value, Value):
                yield from glued_word(card, syntax, param.value)
    elif letter in "CL":
        yield from _after_value(card, syntax)
    elif letter == "D":
        words = syntax.positional
        area = words[1] if len(words) >= 2 else None
        if isinstance(area, Value) and area.number is not None and _is_model(words[0], models):
            yield _refused(card, area.offset, f"{name} gives its area as a bare number after "
                           "the model: ngspice 39 reads 'D n+ n- tj model' and stops with "
                           "'could not find a valid modelname'",
                           f"write area={area.text} (manual 7.1)")  # fmt: skip
    elif letter == "Z":
        for param in syntax.params:
            if param.key.key == "ic":
                yield _refused(card, param.offset, f"{name} has {param.key.text}=, which "
                               "ngspice 39 does not take on a Z card: it stops with 'unknown "
                               "parameter (ic)'", "remove it")  # fmt: skip
    else:
        yield from _by_level(card, syntax, models)


def _resistor_model(
    card: Card, syntax: ElementSyntax, models: Mapping[str, Card]
) -> Iterator[Finding]:
    """``R n+ n- value model`` with a value ngspice 39 does not take as one there (an
    undefined model is :mod:`heatweave.spice.references`' finding)."""
    words = [w for w in syntax.positional if isinstance(w, Value)]
    if len(words) < 2 or not _is_model(words[1], models):
        return
    value, model = words[0], words[1]
    if value.kind in (ValueKind.BRACE, ValueKind.QUOTED) or value.text.startswith("."):
        yield _refused(card, model.offset, f"{syntax.name.text} names the model {model.text} "
                       f"after the value {value.text}: ngspice 39 takes a model there only "
                       f"after a plain number, and stops with 'unknown parameter "
                       f"({model.key})'", "write the value as a number starting with a "
                       f"digit (0.5k, not .5k), or as r={value.text}")  # fmt: skip


def _after_value(card: Card, syntax: ElementSyntax) -> Iterator[Finding]:
    words = [w for w in syntax.positional if isinstance(w, Value)]
    if len(words) < 2 or words[0].kind not in (ValueKind.NUMBER, ValueKind.BRACE):
        return
    word = words[1]
    if word.kind is not ValueKind.NAME or word.key in _FLAGS:
        return
    nodes = " ".join(n.text for n in syntax.nodes)
    yield _refused(card, word.offset, f"{syntax.name.text} has the word {word.text!r} after "
                   f"its value: ngspice 39 stops with 'unknown parameter ({word.key})'",
                   f"a model name goes before the value ({syntax.name.text} {nodes} "
                   f"{word.text} {words[0].text})")  # fmt: skip


def _by_level(card: Card, syntax: ElementSyntax, models: Mapping[str, Card]) -> Iterator[Finding]:
    words = [*syntax.nodes, *(w for w in syntax.positional if isinstance(w, Value))]
    model = next((models[w.text.lower()] for w in words if w.text.lower() in models), None)
    kind_level = _kind_level(model) if model is not None else None
    refused = _REFUSED.get(kind_level) if kind_level is not None else None
    if not refused or kind_level is None:
        return
    for param in syntax.params:
        if param.key.key in refused:
            yield _refused(card, param.offset, f"{syntax.name.text} has {param.key.text}=, "
                           f"which the level {kind_level[1]} model does not take: ngspice 39 "
                           f"stops with 'unknown parameter ({param.key.key})'",
                           "remove it; set the temperature with .temp or .options temp"
                           if param.key.key in _NO_TEMPERATURE
                           else "use area= instead")  # fmt: skip


def _kind_level(model: Card) -> tuple[str, int] | None:
    found = model_level(model)
    kind = _KINDS.get(found[0]) if found is not None else None
    return (kind, found[2]) if kind is not None and found is not None else None


def _is_model(field: object, models: Mapping[str, Card]) -> bool:
    return isinstance(field, Value) and field.text.lower() in models


def _refused(card: Card, offset: int, message: str, hint: str) -> Finding:
    return Finding("error", message, card.location(offset), hint)
