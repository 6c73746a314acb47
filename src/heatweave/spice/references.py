"""Names a card uses that nothing in the deck defines, which ngspice 39 refuses (issue 14).

Held against ngspice 39.3 (``tests/conformance/reject`` r27 to r33): an ``X`` card with more
or fewer nodes than its subcircuit has ports ("Too many/Too few parameters for subcircuit
type"), a D, J, Q or M card naming no model a ``.model`` card defines ("could not find a
valid modelname"), a Z card doing so ("Unable to find definition of model", r33), an A card
whose last word names no model ("MIF-ERROR - unable to find definition of model", r32), a
resistor with a name after its value, or a word for its value, that no ``.model``
defines ("unknown parameter"), and a brace expression calling a function no ``.func`` defines
("Cannot compute substitute").  Each check only refuses what is certainly undefined: a name
in braces, a model name a binned ``.model`` (``name.1``) extends, or a parameter name passes.
"""

from __future__ import annotations

import re
from collections.abc import Iterator, Mapping

from heatweave.errors import DeckSyntaxError, Finding
from heatweave.spice.cardparts import subckt_ports, x_card_parts
from heatweave.spice.deck import Card
from heatweave.spice.grammar import syntax_of
from heatweave.spice.hierarchy import DeckIndex, Scope
from heatweave.spice.syntax import ElementSyntax, Value, ValueKind

# Letters whose element needs a .model card in ngspice 39 (no built-in default model); an
# A card (XSPICE code model) too, read apart: its model is its last word (manual 12.2).
_NEEDS_MODEL = frozenset("DJQMZ")
_REFUSAL = {"Z": "Unable to find definition of model"}  # ngspice 39's words where they differ
_NAME = re.compile(r"[A-Za-z_][\w.$-]*\Z")
# Functions ngspice 39's B, E and G expression parser knows beyond heatweave's evaluator.
_OTHER_FUNCTIONS = frozenset({
    "sqr", "re", "im", "db", "ph", "mag", "u", "u2", "uramp", "ddt", "sdt", "table", "tbl",
    "if", "rand", "fabs", "atan2", "hypot", "exp10", "sign", "round", "trunc", "mod",
})  # fmt: skip
_NUMPARAM_EXTRA = frozenset({"sqr"})  # brace expressions know it beyond the evaluator's


def reference_errors(index: DeckIndex, defined: set[str]) -> Iterator[Finding]:
    """Subcircuit node counts, undefined device and resistor models (*defined*: the deck's
    parameter and ``.func`` names)."""
    models = set(index.models)
    for scope in index.top.walk():
        for card in scope.cards:
            letter = card.letter
            if letter == "X":
                yield from _ports(index, scope, card)
            elif letter in _NEEDS_MODEL or letter == "R":
                yield from _model(card, models, defined)
            elif letter == "A":
                yield from _code_model(card, models)



def _ports(index: DeckIndex, scope: Scope, card: Card) -> Iterator[Finding]:
    nodes, sub, _params = x_card_parts(card)
    found = index.lookup_subckt(sub, scope)
    if found is None or "{" in sub:
        return  # an unknown subcircuit: lint's connection check reports it
    ports = subckt_ports(found[0])
    if len(nodes) == len(ports):
        return
    many = "many" if len(nodes) > len(ports) else "few"
    yield Finding(
        "error",
        f"{card.head} connects {len(nodes)} node(s) to subcircuit {sub} of {len(ports)} "
        f"port(s): ngspice 39 stops with 'Too {many} parameters for subcircuit type'",
        card.location(),
        f"write one node for each port of .subckt {sub} ({' '.join(ports) or 'none'})",
    )


def _known(name: str, models: set[str]) -> bool:
    low = name.lower()
    return low in models or any(m.startswith(low + ".") for m in models)


def _model(card: Card, models: set[str], defined: set[str]) -> Iterator[Finding]:
    fields = card.fields()
    if card.letter == "R" and _plain_resistor(fields):
        return  # a value and no word after it: the common card, read without the grammar
    if card.letter != "R" and any(_known(f, models) for f in fields[1:]):
        return  # a defined model among its words (the grammar is not loaded for it)
    try:
        syntax = syntax_of(card)
    except DeckSyntaxError:
        return  # lint reports the grammar
    if not isinstance(syntax, ElementSyntax):
        return
    words = [f for f in syntax.positional if isinstance(f, Value)]
    if syntax.letter == "r":
        if words and words[0].kind in (ValueKind.NAME, ValueKind.EXPRESSION):
            yield from _word_value(card, syntax, words[0], models, defined)
            return
        # R n+ n- value name: the name after a value is the card's model (manual 3.3.1)
        names = [w for k, w in enumerate(words) if k > 0 and w.kind is ValueKind.NAME]
        if not words or not names:
            return
        name = names[0]
        if _known(name.text, models) or name.key in defined:
            return
        yield Finding(
            "error", f"{syntax.name.text} names the model {name.text!r}, which no .model card "
            f"defines: ngspice 39 refuses the card ('unknown parameter ({name.key})')",
            card.location(name.offset),
            f"define the model (.model {name.text} R), or remove the name",
        )  # fmt: skip
        return
    nodes = {n.offset for n in syntax.nodes}
    candidates = [w for w in words if w.offset not in nodes and w.kind is ValueKind.NAME]
    if any(_known(t.text, models) for t in (*syntax.nodes, *candidates)):
        return  # Q and M take a model among their optional nodes
    if any(w.kind in (ValueKind.BRACE, ValueKind.QUOTED) for w in words):
        return
    where = candidates[0].offset if candidates else (syntax.nodes[-1].end if syntax.nodes else 0)
    said = f"the model {candidates[0].text!r}" if candidates else "no model"
    refusal = _REFUSAL.get(card.letter, "could not find a valid modelname")
    yield Finding(
        "error", f"{syntax.name.text} names {said}, and no .model card defines one: ngspice 39 "
        f"stops with '{refusal}'",
        card.location(where),
        f"a {card.letter} element needs a model: define it with .model, or include the file "
        "that does",
    )  # fmt: skip


_VALUE_START = frozenset("0123456789.+-{'")


def _plain_resistor(fields: list[str]) -> bool:
    """``R n+ n- <number or {expr}> [k=v ...]`` or ``R n+ n- k=v ...``: no word that could
    name a model, so nothing for :func:`_model` to check."""
    if len(fields) < 4 or fields[4:5] == ["="]:
        return True  # no value (lint's card rules warn), or r= / resistance= first
    return fields[3][:1] in _VALUE_START and (len(fields) < 5 or "=" in fields[4])


def _word_value(
    card: Card, syntax: ElementSyntax, word: Value, models: set[str], defined: set[str]
) -> Iterator[Finding]:
    """``R n+ n- word``: ngspice 39 reads the word as a model name and, when no ``.model``
    defines it, refuses the card ('unknown parameter'), also for an unbraced expression
    such as ``foo-bar`` or ``rv*2`` (conformance r34, r35).  A bare ``.param`` name is read
    as its value (ngspice warns it found no such model, then runs)."""
    if _known(word.text, models) or (word.kind is ValueKind.NAME and word.key in defined):
        return
    if word.text[:1] in "{'":
        yield from glued_word(card, syntax, word)
        return
    yield Finding(
        "error", f"{syntax.name.text} has the value {word.text!r}, which is no number and "
        "names no model a .model card defines: ngspice 39 refuses the card ('unknown "
        "parameter')",
        card.location(word.offset),
        "write a number (1k), an expression in braces ({...}) or quotes, or define the model "
        f"(.model {word.text} R rsh=...)" if word.kind is ValueKind.NAME
        else f"an expression goes in braces ({{{word.text}}}) or quotes (manual 2.9.2); a "
        "model name needs its .model card",
    )  # fmt: skip


_GLUED = re.compile(r"(\{[^{}]*\}|'[^']*')([A-Za-z_]\w*)")


def glued_word(card: Card, syntax: ElementSyntax, word: Value) -> Iterator[Finding]:
    """``{big}k``: ngspice 39 reads the word glued to a brace or quoted value as a
    parameter name and refuses the card ('unknown parameter (k)', found by
    ``tests/fuzz/lintdiff.py``)."""
    match = _GLUED.match(word.text)
    if match is None:
        return
    glued = match.group(2)
    yield Finding(
        "error", f"{syntax.name.text} has the word {glued!r} glued to its value "
        f"{match.group(1)}: ngspice 39 stops with 'unknown parameter ({glued.lower()})'",
        card.location(word.offset + match.start(2)),
        f"a scale factor goes inside the braces ({{({match.group(1)[1:-1]})*1{glued}}}), "
        "or leave a blank before a model name",
    )  # fmt: skip


def _code_model(card: Card, models: set[str]) -> Iterator[Finding]:
    """An A card whose last word, its model, no ``.model`` card defines: ngspice 39 stops
    with 'MIF-ERROR - unable to find definition of model' (conformance r32)."""
    logical = card.logical().text
    fields = card.fields()
    name = fields[-1] if len(fields) > 1 else ""
    if not _NAME.match(name) or _known(name, models):
        return  # a bracket, a brace or a quoted word last: not a plain model name
    yield Finding(
        "error", f"{card.head} names the code model {name!r}, which no .model card defines: "
        "ngspice 39 stops with 'unable to find definition of model'",
        card.location(logical.rfind(name)),
        f"define it (.model {name} <code model>(...)), or include the file that does",
    )  # fmt: skip


_CALL = re.compile(r"([A-Za-z_][\w.]*)\s*\(")


def undefined_call(
    card: Card, text: str, offset: int, unknown: set[str], funcs: Mapping[str, object]
) -> Finding | None:
    """A call in the expression *text* (at *offset*), which ngspice evaluates before the
    simulation (a ``.param`` value, a brace or quoted value of R, C, L, V, I or X), to a
    function no ``.func`` defines.  Those expressions know only the functions of manual
    2.9.5 (and ``sqr``): ``if``, ``u``, ``table`` and the other functions of B, E and G
    expressions stop ngspice 39 there too (found by ``tests/fuzz/lintdiff.py``)."""
    for match in _CALL.finditer(text):
        name = match.group(1).lower()
        if name in unknown and name not in funcs and name not in _NUMPARAM_EXTRA:
            elsewhere = name in _OTHER_FUNCTIONS
            return Finding(
                "error", f"{card.head} calls the function {match.group(1)!r}, which no .func "
                "defines: ngspice 39 stops with 'Cannot compute substitute'",
                card.location(offset + match.start(1)),
                (f"{match.group(1)}() belongs to behavioural (B, E, G) expressions, not to "
                 "the {...} values ngspice computes before the simulation (manual 2.9.5); "
                 if elsewhere else "") + f"define it with .func {match.group(1)}(...) = "
                "{...} (manual 2.10), or check the spelling",
            )  # fmt: skip
    return None
