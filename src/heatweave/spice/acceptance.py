"""Decks ngspice 39 refuses to load, found before ngspice sees them (issue 14).

Each rule was held against ngspice 39.3 (``tests/conformance`` runs it on a deck of each
kind): an unknown dot card ("unimplemented control card"), a parameter no ``.param``
defines ("Undefined parameter") or one that depends on itself ("circular parameter
dependency"), a subcircuit that instantiates itself ("unknown subckt" after a thousand
levels), ``nan``/``inf`` or a brace expression without a finite value ("unknown parameter"),
an unbalanced parenthesis in a brace expression ("Closing ')' not found"), a deck with no
circuit, and two elements of one name ("device already exists"); undefined models,
functions and subcircuit node counts are in :mod:`heatweave.spice.references`.  ``lint``
reports them all; ``run``, ``check``, ``settle`` and ``sweep`` refuse the deck with the first one.
"""

from __future__ import annotations

import itertools
import re
from collections.abc import Iterable, Iterator
from dataclasses import dataclass

from heatweave.errors import DeckStructureError, DeckSyntaxError, Finding
from heatweave.spice import deckparams
from heatweave.spice.ascii import non_ascii
from heatweave.spice.cardparts import x_card_parts
from heatweave.spice.conditionals import condition_text, exclusive
from heatweave.spice.deck import Block, Card, ControlBlock, iter_cards
from heatweave.spice.expressions import (
    BUILTIN_FUNCTIONS,
    FUNC_AFTER_HINT,
    FUNC_AFTER_QUESTION,
    RUNTIME_CALLS,
    RUNTIME_NAMES,
    ExprError,
    calls_used,
    evaluate,
    func_after_question,
    names_used,
    unbalanced_paren,
)
from heatweave.spice.grammar import CardSyntaxError, parse_card, syntax_of
from heatweave.spice.hierarchy import DeckIndex, Scope
from heatweave.spice.lint_cards import empty_analyses
from heatweave.spice.model_levels import unknown_levels
from heatweave.spice.references import reference_errors, undefined_call
from heatweave.spice.refused_words import refused_words
from heatweave.spice.source_options import source_option_errors
from heatweave.spice.syntax import (
    Call,
    DotSyntax,
    ElementSyntax,
    Field,
    ModelSyntax,
    Param,
    ParamCardSyntax,
    Value,
    ValueKind,
)

# Dot cards ngspice 39.3 reads: by their full name, or (second set) by any name that
# starts so (".optio", ".params", ".includ" and ".library" are read as .options, .param,
# .include, .lib).
KNOWN_DOT_CARDS = frozenset((
    ".op", ".tran", ".ac", ".dc", ".noise", ".disto", ".pz", ".sens", ".tf", ".sp", ".pss",
    ".optran", ".meas", ".measure", ".save", ".print", ".plot", ".width", ".ic", ".nodeset",
    ".temp", ".end", ".endc", ".prot", ".unprot", ".if", ".elseif", ".else", ".endif", ".endl",
))  # fmt: skip
KNOWN_DOT_PREFIXES = (".opt", ".inc", ".lib", ".param", ".func", ".global", ".four", ".probe",
                      ".csparam", ".model", ".control", ".title", ".subckt", ".ends")  # fmt: skip
_NOT_FINITE = frozenset({"nan", "inf", "+inf", "-inf", "infinity"})
_EVALUATED = frozenset("rclvi")  # element values ngspice computes before the simulation
_EVALUATED_DOT_CARDS = frozenset({"tran", "ac", "dc", "noise", "temp", "options", "option"})


@dataclass(frozen=True, slots=True)
class _Expr:
    card: Card
    text: str  # as written, with its delimiters
    offset: int  # in the card's logical text


def rejections(index: DeckIndex) -> list[Finding]:
    """Every reason ngspice 39 would refuse the deck of *index*, as located errors."""
    cards = list(_read_cards(index))
    dots = [c for c in cards if _is_dot(c)]
    found = list(_title(index))
    found.extend(_empty(index, cards))
    found.extend(_open_control(index, cards))
    found.extend(_unknown_dot_cards(dots))
    found.extend(_parameters(index, cards, dots))
    found.extend(reference_errors(index, _defined_names(index, dots)))
    found.extend(refused_words(index, dots))
    found.extend(unknown_levels(index))
    found.extend(_recursion(index))
    found.extend(duplicates(index))
    found.extend(_couplings(cards))
    found.extend(_if_blocks(dots))
    found.extend(non_ascii(cards))
    found.extend(source_option_errors(cards))
    return found


def _if_blocks(dots: list[Card]) -> Iterator[Finding]:
    """``.if`` ... ``.endif`` balanced, as ngspice 39 needs ("Mismatch of .if ... .endif
    statements"; a stray ``.else``/``.endif`` is an "unimplemented control card")."""
    open_ifs: list[Card] = []
    for card in dots:
        name = card.name
        if name == ".if":
            open_ifs.append(card)
        elif name in (".elseif", ".else", ".endif") and not open_ifs:
            yield _error(card, 0, f"{card.head} without .if: ngspice 39 stops on it",
                         "remove it, or add the .if it belongs to")  # fmt: skip
        elif name == ".endif":
            open_ifs.pop()
    for card in open_ifs:
        yield _error(card, 0, ".if is never closed: ngspice 39 reports 'Mismatch of .if "
                     "... .endif statements'", "add .endif")  # fmt: skip


def _couplings(cards: list[Card]) -> Iterator[Finding]:
    """K cards through the grammar (few, and ngspice stops on a third inductor name)."""
    for card in cards:
        if card.letter == "K":
            try:
                syntax_of(card)
            except DeckSyntaxError as err:
                yield Finding("error", err.message, err.location, err.hint)


def refuse_rejected(index: DeckIndex, *, own_analyses: bool = True) -> None:
    """Raise the first of :func:`rejections` (exit 2) before anything is simulated, then,
    when the deck's own analyses will run (*own_analyses*), the first that computes nothing."""
    empty = empty_analyses(_read_cards(index)) if own_analyses else iter(())
    for finding in itertools.chain(rejections(index), empty):
        raise DeckStructureError(finding.message, finding.location, finding.hint)


def _is_dot(card: Card) -> bool:
    """A dot card, told from its text's first character (cheaper than ``Card.name``)."""
    text = card.text
    return text[:1] == "." or (text[:1] in " \t" and text.lstrip(" \t")[:1] == ".")


def _read_cards(index: DeckIndex) -> Iterator[Card]:
    """The cards ngspice reads: the deck's and those its include cards bring in."""
    yield from iter_cards(index.project.deck.body)
    for inc in index.project.includes:
        yield from iter_cards(inc.body)


def _error(card: Card, offset: int, message: str, hint: str) -> Finding:
    return Finding("error", message, card.location(offset), hint)


def _empty(index: DeckIndex, cards: list[Card]) -> Iterator[Finding]:
    """No element, subcircuit, model or control block: ngspice has no circuit to run."""
    deck = index.project.deck
    if any(isinstance(n, ControlBlock) for n in deck.body):
        return
    for card in cards:
        if card.is_element or card.name.startswith((".subckt", ".model", ".lib", ".inc")):
            return
    where = deck.source.location(0) if deck.source is not None else None
    yield Finding(
        "error",
        "the deck holds no circuit: no element card after the title line",
        where,
        "the first line is the title (manual 2.1.1); ngspice 39 runs nothing "
        "(or stops) on a deck without elements",
    )


def _title(index: DeckIndex) -> Iterator[Finding]:
    """A title line that ngspice 39 reads as a card after all (checked on 39.3)."""
    deck = index.project.deck
    title = (deck.title or "").strip()
    word = title.split(None, 1)[0].lower() if title else ""
    where = deck.source.location(0) if deck.source is not None else None
    hint = "the first line is the title (manual 2.1.1): put a title line above this card"
    if word.startswith(".param"):
        yield Finding("error", "the title line starts with .param: ngspice 39 stops with "
                      "'title line is missing'", where, hint)  # fmt: skip
    elif word in (".if", ".elseif", ".else", ".endif"):
        yield Finding("error", f"the title line starts with {word}: ngspice 39 stops with "
                      "'Mismatch of .if ... .endif statements'", where, hint)  # fmt: skip
    elif word.startswith(".inc"):
        yield Finding("warning", "the title line is an .include: ngspice 39 reads the file, "
                      "heatweave does not (its elements and nodes are not checked)", where,
                      hint)  # fmt: skip


_MODEL_LETTERS = frozenset("DQJMZSWOYUANP")


def _open_control(index: DeckIndex, cards: list[Card]) -> Iterator[Finding]:
    """A ``.control`` block without ``.endc`` in a deck whose elements use models: ngspice
    39 then drops every ``.model`` card ("could not find a valid modelname")."""
    deck = index.project.deck
    last = deck.body[-1] if deck.body else None
    if not isinstance(last, ControlBlock) or last.closed:
        return
    models = {c.fields()[1].lower() for c in cards if c.name == ".model" and len(c.fields()) > 1}
    if not models:
        return
    user = next(
        (
            c
            for c in cards
            if c.letter in _MODEL_LETTERS
            or (c.letter in "RCL" and any(f.lower() in models for f in c.fields()[3:]))
        ),
        None,
    )
    if user is None:
        return
    yield Finding(
        "error", f"the .control block has no .endc, and {user.head} uses a model: ngspice 39 "
        "then drops every .model card ('could not find a valid modelname')",
        last.source.location(last.offset) if last.source is not None else None,
        "close the block with .endc",
    )  # fmt: skip


def _unknown_dot_cards(cards: Iterable[Card]) -> Iterator[Finding]:
    for card in cards:
        if not card.is_dot:
            continue
        name = card.name
        if name in KNOWN_DOT_CARDS or name.startswith(KNOWN_DOT_PREFIXES):
            continue
        yield _error(
            card, 0, f"unknown dot card {card.head}: ngspice 39 stops with "
            "'unimplemented control card'",
            "check the spelling; ngspice reads .tran .ac .dc .op .model .param .subckt "
            ".include .lib .options .print .save .meas ... (manual chapter 2, 15)",
        )  # fmt: skip


# -- parameters -------------------------------------------------------------------------


def _values(fields: Iterable[Field]) -> Iterator[Value]:
    for field in fields:
        if isinstance(field, Value):
            yield field
        elif isinstance(field, Param):
            yield from _values((field.value, *field.more))
        elif isinstance(field, Call):
            yield from _values((*field.args, *field.params))


def _may_hold_expression(card: Card) -> bool:
    """A cheap first look at a card's text: braces, quotes, nan/inf, or a .param card."""
    text = card.text
    if "{" in text or "'" in text or _MAY_NOT_FINITE.search(text) is not None:
        return True
    return _is_dot(card) and card.name.startswith(".param")


def _expressions(card: Card) -> Iterator[_Expr]:
    """The brace and quoted expressions ngspice evaluates before the simulation."""
    logical = card.logical().text
    try:
        syntax = parse_card(logical)
    except CardSyntaxError:
        return  # lint reports the card's grammar
    if isinstance(syntax, ElementSyntax):
        if syntax.letter not in _EVALUATED and syntax.letter != "x":
            return
        fields: tuple[Field, ...] = (*syntax.positional, *syntax.params)
    elif isinstance(syntax, ParamCardSyntax | ModelSyntax):
        fields = syntax.params
    elif isinstance(syntax, DotSyntax) and syntax.name in _EVALUATED_DOT_CARDS:
        fields = (*syntax.args, *syntax.params)
    else:
        return  # .meas param='...' names measurements, .print and .save output vectors
    unbraced = isinstance(syntax, ParamCardSyntax)  # .param a = b*2 is an expression too
    for value in _values(fields):
        if (
            value.kind in (ValueKind.BRACE, ValueKind.QUOTED)
            or (value.key in _NOT_FINITE and isinstance(syntax, ElementSyntax))
            or (unbraced and value.kind in (ValueKind.NAME, ValueKind.EXPRESSION))
        ):
            yield _Expr(card, value.text, value.offset)


def _condition(card: Card) -> Iterator[_Expr]:
    """The condition of an ``.if``/``.elseif`` card, as a brace expression."""
    if card.name in (".if", ".elseif"):
        text = condition_text(card)
        if text is not None:
            yield _Expr(card, "{" + text + "}", card.logical().text.index(text) - 1)


_MAY_NOT_FINITE = re.compile(r"(?i)(?<![\w.])[-+]?(?:nan|inf)(?![\w.])")


def _defined_names(index: DeckIndex, cards: list[Card]) -> set[str]:
    """Every name a ``.param`` card, a subcircuit's parameters or ``.func`` defines."""
    names: set[str] = set()
    for card in cards:
        name = card.name
        if name.startswith(".param"):
            names.update(d.name for d in deckparams.param_defs(card))
        elif name == ".subckt":
            fields = card.fields()
            names.update(f.lower() for k, f in enumerate(fields[:-1]) if fields[k + 1] == "=")
        elif name.startswith(".func"):
            func = deckparams.func_def(card)
            if func is not None:
                names.add(func.name)
    return names


def _parameters(index: DeckIndex, cards: list[Card], dots: list[Card]) -> Iterator[Finding]:
    defined = _defined_names(index, dots)
    top: set[int] | None = None
    top_dots = [c for c in _top_cards(index) if _is_dot(c)]
    params, funcs = deckparams.values(top_dots)
    yield from _circular(index, top_dots)
    conditions = (e for card in dots for e in _condition(card))
    holders = [c for c in cards if _may_hold_expression(c)]
    for expr in (*(e for card in holders for e in _expressions(card)), *conditions):
        card = expr.card
        if card.is_element and expr.text.lower().lstrip("+-") in _NOT_FINITE:
            yield _error(card, expr.offset, f"{card.head} has the value {expr.text}: ngspice 39 "
                         "reads it as an unknown parameter and stops",
                         "write a finite number")  # fmt: skip
            continue
        inner = expr.text[1:-1] if expr.text[:1] in "{'" else expr.text
        bad = unbalanced_paren(inner)
        if bad is not None:
            yield _error(card, expr.offset + (expr.text[:1] in "{'") + bad,
                         f"unbalanced parenthesis in the expression {expr.text}",
                         "ngspice 39 stops on it (\"Closing ')' not found\", \"Syntax "
                         "error\"); balance the parentheses")  # fmt: skip
            continue
        bad_call = func_after_question(expr.text, funcs)
        if bad_call is not None:
            yield _error(card, expr.offset + bad_call, FUNC_AFTER_QUESTION, FUNC_AFTER_HINT)
            continue
        calls = set(calls_used(expr.text))
        used = names_used(expr.text)
        if calls & RUNTIME_CALLS or any(n in RUNTIME_NAMES for n, _ in used):
            continue  # a run-time expression (behavioural values): not evaluated here
        unknown = calls - BUILTIN_FUNCTIONS - set(funcs) - defined
        if unknown:  # a function heatweave does not know: ngspice may, unless no .func has it
            call = undefined_call(card, expr.text, expr.offset, unknown, funcs)
            if call is not None:
                yield call
            continue
        missing = next(((n, at) for n, at in used if n not in defined), None)
        if missing is not None:
            name, at = missing
            yield _error(card, expr.offset + at, f"parameter {name!r} is not defined: "
                         "ngspice 39 stops with 'Undefined parameter'",
                         f"define it with .param {name} = ... (manual 2.9.1)")  # fmt: skip
            continue
        if top is None:
            top = {id(c) for c in index.top.cards}
        if id(card) in top and not card.name.startswith(".param"):
            try:
                evaluate(expr.text, params, funcs)
            except ExprError as err:
                if err.kind == "math":
                    yield _error(card, expr.offset, f"the expression {expr.text} of "
                                 f"{card.head} has no finite value: {err.message}",
                                 "ngspice 39 stops on it; " + err.hint)  # fmt: skip


def _top_cards(index: DeckIndex) -> Iterator[Card]:
    """The cards at the top level of the deck and of the files it includes."""
    bodies = [index.project.deck.body, *(inc.body for inc in index.project.includes)]
    for body in bodies:
        yield from (node for node in body if isinstance(node, Card))


def _circular(index: DeckIndex, top_dots: list[Card]) -> Iterator[Finding]:
    """``.param`` definitions that depend on themselves, scope by scope."""
    bodies = [[c for c in top_dots if c.name.startswith(".param")]]
    for definition in _definitions(index.top):
        bodies.append(
            [c for c in iter_cards(definition.body) if _is_dot(c) and c.name.startswith(".param")]
        )
    for body in bodies:
        defs = {d.name: d for card in body for d in deckparams.param_defs(card)}
        graph = {n: [u for u, _ in names_used(d.text) if u in defs] for n, d in defs.items()}
        cycle = _cycle(graph)
        if cycle:
            d = defs[cycle[0]]
            says = "Undefined parameter" if len(cycle) == 1 else "circular parameter dependency"
            path = " -> ".join((*cycle, cycle[0]))
            yield _error(d.card, d.offset, f"parameter {cycle[0]!r} depends on itself ({path}): "
                         f"ngspice 39 stops with '{says}'",
                         "define each parameter from numbers or other parameters")  # fmt: skip


def _cycle(graph: dict[str, list[str]]) -> list[str]:
    """The names on a cycle of *graph* (empty when it has none)."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(node: str) -> list[str]:
        state[node] = 1
        stack.append(node)
        for nxt in graph.get(node, ()):
            if state.get(nxt) == 1:
                return stack[stack.index(nxt) :]
            if nxt not in state:
                found = visit(nxt)
                if found:
                    return found
        stack.pop()
        state[node] = 2
        return []

    for node in graph:
        if node not in state:
            found = visit(node)
            if found:
                return found
    return []


def _definitions(scope: Scope) -> Iterator[Block]:
    for key, inner in scope.scopes.items():
        yield scope.subckts[key]
        yield from _definitions(inner)


# -- subcircuits ------------------------------------------------------------------------


def _recursion(index: DeckIndex) -> Iterator[Finding]:
    """A subcircuit reached again from inside itself, following the instances."""

    def walk(scope: Scope, chain: tuple[str, ...]) -> Iterator[Finding]:
        if not scope.instances:
            return
        for card in scope.cards:
            if card.letter != "X":
                continue
            found = index.lookup_subckt(x_card_parts(card)[1], scope)
            if found is None:
                continue
            block, inner = found
            key = f"{id(block)}"
            if key in chain:
                yield _error(card, 0, f"subcircuit {block.label} instantiates itself "
                             f"({card.head} inside it): ngspice 39 stops with "
                             "'unknown subckt'", "a subcircuit may not contain an "
                             "instance of itself, directly or through another")  # fmt: skip
                return
            yield from walk(inner, (*chain, key))

    seen: set[str] = set()
    for finding in walk(index.top, ()):
        if finding.message not in seen:
            seen.add(finding.message)
            yield finding


# -- names ------------------------------------------------------------------------------


def duplicates(index: DeckIndex) -> Iterator[Finding]:
    """Two elements of one name in one (sub)circuit; names in different branches of one
    undecided ``.if`` do not clash (2.13)."""
    for scope in index.top.walk():
        lows = "\n".join(scope.heads).lower().split("\n") if scope.heads else []
        if len(set(lows)) == len(lows):
            continue  # every name once: the common case, one pass in C
        seen: dict[str, list[Card]] = {}
        for card, head in zip(scope.cards, scope.heads, strict=True):
            key = head.lower()
            place = index.places.get(id(card), ())
            earlier = seen.setdefault(key, [])
            clash = next(
                (c for c in earlier if not exclusive(index.places.get(id(c), ()), place)), None
            )
            earlier.append(card)
            if clash is not None:
                first = clash.location()
                at = f"{first.file}:{first.line}" if first else "an unknown place"
                yield Finding(
                    "error",
                    f"duplicate element name {head} (first at {at})",
                    card.location(),
                    "element names must be unique within a (sub)circuit, case ignored; "
                    "ngspice 39 stops with 'device already exists'",
                )

