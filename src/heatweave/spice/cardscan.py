"""A scanner in front of the grammar for plain cards: words and ``key=value`` pairs.

Most cards are a name, then blank-separated plain words and ``key=value`` pairs
(``R1 a b 1k tc1=2m``, ``.param a=1 b=2``, ``.model m r(tc1=1m)``).  For those the scanner
stands in for lark's lexer and parser: it hands the same children to the same
:class:`~heatweave.spice.cardbuild.ToSyntax` callbacks, so the syntax is the very same
(tests/test_cardscan.py compares the two on every card of the test decks and on random
cards).  Lark spends about 10 us a token; a card of a million pairs took half a minute
and 1.5 GB, which this path reads in linear time with nothing kept but the result.

Anything else (braces, quotes, brackets, commas, operators at a word's edge, a word
followed by ``(``, the typed dot cards but ``.model``) is left to the grammar, with its
located errors: the scanner never fails, it declines.
"""

from __future__ import annotations

import re
from typing import Any

from heatweave.spice.cardbuild import ToSyntax, make_call, make_group
from heatweave.spice.syntax import CardSyntax, Field, Param, Token, classify

# A word no rule joins to its neighbours (heatweave.spice.cardfields): no operator at
# either end, no separator, bracket, brace or quote anywhere.
_WORD = r"[A-Za-z0-9_.](?:[A-Za-z0-9_.+\-]*[A-Za-z0-9_.])?"
# One field: a word or a pair, then a blank, a ')' or the end (a '(' makes it a call).
_ITEM = re.compile(rf"[ \t]*({_WORD})(?:[ \t]*=[ \t]*({_WORD}))?(?=[ \t)]|\Z)")
# A .model card's name and type; a '(' after the type makes it a call (CALLNAME).
_NAME_TYPE = re.compile(rf"[ \t]+({_WORD})[ \t]+({_WORD})(?=[ \t(]|\Z)")
# The grammar's ELEMENT_NAME and DOT_NAME (grammar/spice.lark).
_HEAD = re.compile(r"""[A-Za-z][^\s=(),{}'"\[\]]*|\.[^\s=(),{}'"\[\]]*""")
# Dot cards the grammar reads with their own rule (their keyword terminals win over DOT_NAME).
_TYPED = frozenset(
    (".subckt", ".ends", ".func", ".include", ".inc", ".lib", ".endl", ".title", ".if", ".elseif")
)
_BUILD = ToSyntax()


def scan_card(text: str) -> CardSyntax | None:
    """The card's syntax when it is plain (see above), else ``None`` for the grammar.

    The caller sets the text for the builders (:func:`~heatweave.spice.cardbuild.use_text`)
    and turns their :class:`~heatweave.spice.cardbuild.BuildError` into a located error.
    """
    head = _HEAD.match(text)
    if head is None:
        return None
    keyword = Token(head.group(), 0)
    if keyword.key == ".model":
        return _model(keyword, text)
    if keyword.key in _TYPED:
        return None
    fields, pos = _fields(text, head.end())
    if _skip_blanks(text, pos) != len(text):
        return None
    if keyword.text[0] == ".":
        return _build("other_dot", [keyword, *fields])
    return _build("element", [keyword, *fields])


def _model(keyword: Token, text: str) -> CardSyntax | None:
    """``.model name type k=v ...`` or ``.model name type(k=v ...)``."""
    found = _NAME_TYPE.match(text, keyword.end)
    if found is None:
        return None
    name, kind_text = found.group(1, 2)
    name_at, kind_at = found.start(1), found.start(2)
    pos = found.end()
    after = _skip_blanks(text, pos)
    kind: Any
    if text[after : after + 1] == "(":  # the grammar's CALLNAME: a call of the type's name
        items, pos = _fields(text, after + 1)
        pos = _skip_blanks(text, pos)
        if text[pos : pos + 1] != ")":
            return None
        group = make_group(after, pos + 1, items, text)
        kind = make_call(Token(kind_text, kind_at), group, text)
        fields: list[Field] = []
        pos += 1
    else:
        kind = classify(kind_text, kind_at)
        fields, pos = _fields(text, pos)
    if _skip_blanks(text, pos) != len(text):
        return None
    return _build("model", [keyword, classify(name, name_at), kind, *fields])


def _fields(text: str, pos: int) -> tuple[list[Field], int]:
    """The run of plain fields from *pos*, and where it stops."""
    fields: list[Field] = []
    match = _ITEM.match
    while (found := match(text, pos)) is not None:
        word, value = found.group(1, 2)
        if value is None:
            fields.append(classify(word, found.start(1)))
        else:  # what ToSyntax.pair makes of two plain words
            fields.append(Param(Token(word, found.start(1)), classify(value, found.start(2))))
        pos = found.end()
    return fields, pos


def _skip_blanks(text: str, pos: int) -> int:
    while text[pos : pos + 1] in (" ", "\t"):
        pos += 1
    return pos


def _build(rule: str, children: list[Any]) -> CardSyntax:
    result: CardSyntax = getattr(_BUILD, rule)(children)
    return result
