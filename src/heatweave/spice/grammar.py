"""Parse one logical ngspice card with the lark LALR grammar in ``grammar/spice.lark``.

The grammar ships inside the wheel as ``heatweave/grammar/``; an editable install reads it
from the repository's top-level ``grammar/`` folder.  The parser is built on first use and
kept, so importing this module costs nothing.  Errors carry the offset in the logical text
and say in plain words what was expected, never lark's terminal names.
"""

from __future__ import annotations

import dataclasses
import functools
import importlib.resources
import re
from pathlib import Path
from typing import TYPE_CHECKING, cast

from heatweave.errors import DeckSyntaxError
from heatweave.spice.cardbuild import BuildError, ToSyntax, use_text
from heatweave.spice.cardscan import scan_card
from heatweave.spice.deck import Card
from heatweave.spice.syntax import TRANSIENT_FUNCTIONS, Call, CardSyntax, Token, Value
from heatweave.spice.tablecache import with_kept_tables

if TYPE_CHECKING:  # lark is imported on first use, so importing this module stays cheap
    from lark import Lark, UnexpectedInput, UnexpectedToken

GRAMMAR_FILE = "spice.lark"


class CardSyntaxError(Exception):
    """A card that does not follow ngspice's syntax; ``offset`` is 0-based in its logical text."""

    def __init__(self, offset: int, message: str, hint: str | None = None) -> None:
        super().__init__(message)
        self.offset = offset
        self.message = message
        self.hint = hint

    def __repr__(self) -> str:
        return f"CardSyntaxError({self.offset!r}, {self.message!r}, {self.hint!r})"


def grammar_dirs() -> list[Path]:
    """Where the grammar may be: the installed package first, then the repository."""
    installed = Path(str(importlib.resources.files("heatweave") / "grammar"))
    return [installed, Path(__file__).resolve().parents[3] / "grammar"]


def grammar_dir() -> Path:
    """The first folder of :func:`grammar_dirs` that holds the grammar."""
    for folder in grammar_dirs():
        if (folder / GRAMMAR_FILE).is_file():
            return folder
    raise FileNotFoundError(
        f"{GRAMMAR_FILE} is in none of: " + ", ".join(str(d) for d in grammar_dirs())
    )


@functools.cache
def parser() -> Lark:
    """The LALR parser, built once per process."""
    from lark import Lark  # lark loads on the first parse: importing this module stays cheap

    folder = grammar_dir()

    def build(cache: str | bool) -> Lark:
        return Lark.open(
            str(folder / GRAMMAR_FILE),
            parser="lalr",
            import_paths=[str(folder)],
            maybe_placeholders=False,
            transformer=ToSyntax(),
            cache=cache,  # loading kept tables: ~5 ms instead of ~100 (spice.tablecache)
        )

    return with_kept_tables(build, folder, "lalr maybe_placeholders=False")


@functools.lru_cache(maxsize=4096)
def parse_card(text: str) -> CardSyntax:
    """The typed syntax of one logical card (see :mod:`heatweave.spice.syntax`).

    Raises :class:`CardSyntaxError` with the offset of the problem in *text*.  Results are
    immutable, so the same card text (lint, then the emitter) is parsed only once.
    """
    from lark import UnexpectedInput  # lark is loaded by now (see above): no cost here

    text = _keyword_equals(text)
    use_text(text)
    try:
        # A plain card (words and key=value pairs) skips lark: same syntax, linear time.
        # The inline transformer makes parse() return syntax objects, not a Tree.
        result = scan_card(text) or cast(CardSyntax, parser().parse(text))
    except UnexpectedInput as exc:
        error = _describe(exc, text)
        closed = _closed(text)
        if closed is None:
            raise error from None
        inserted, fixed = closed
        if _closed(fixed) is not None:  # still open (".model ('"): the ')' did not help
            raise error from None
        # The ')' ngspice supplies is read, and the offsets after it are the card's again.
        return cast(CardSyntax, _shift(parse_card(fixed), inserted))
    except BuildError as exc:
        raise CardSyntaxError(exc.offset, exc.message, exc.hint) from None
    return result


# ngspice 39.3 runs ".temp=30", ".tran=1u 10u" and ".options=reltol=1e-4": an '=' right
# after these keywords is a separator (2.1.4.1); after .ic, .param or .save it stops.
_KEYWORD_EQUALS = re.compile(r"(?i)\.(?:temp|tran|opt[^\s=]*)[ \t]*(=)")


def _keyword_equals(text: str) -> str:
    """*text* with the '=' after a ``.temp``, ``.tran`` or ``.options`` keyword read as a
    blank, as ngspice 39 reads it (same length: every offset stays)."""
    match = _KEYWORD_EQUALS.match(text)
    if match is None:
        return text
    return text[: match.start(1)] + " " + text[match.end(1) :]


def _closed(text: str) -> tuple[int, str] | None:
    """Where ngspice 39 supplies the ')' of a '(' that never closes, and *text* with it.

    A ``.model``'s list closes at the card's end.  A V or I card's transient function
    (``PULSE(0 10 0 1u 1u 5u 10u``, which stock ngspice 39 runs) closes before the next
    source keyword (``ac``, ``dc``, ``distof1/2``), else at the end: checked against
    ngspice's mean power over a period (tests/test_waves_sources.py).
    """
    at = unclosed_model(text)
    end = len(text.rstrip())
    if at is None:
        at = unclosed_source(text)
        if at is None:
            return None
        keyword = _SOURCE_KEYWORD.search(text, at)
        end = keyword.start() if keyword is not None else end
    return end, text[:end] + ")" + text[end:]


def _shift(node: object, inserted: int) -> object:
    """*node* with every offset past the ')' inserted at *inserted* moved back by one."""
    if isinstance(node, tuple):
        return tuple(_shift(item, inserted) for item in node)
    if not dataclasses.is_dataclass(node) or isinstance(node, type):
        return node
    changes: dict[str, object] = {}
    for field in dataclasses.fields(node):
        value = getattr(node, field.name)
        if field.name in ("offset", "end") and isinstance(value, int):
            if value > inserted:
                changes[field.name] = value - 1
        elif isinstance(value, tuple) or dataclasses.is_dataclass(value):
            changes[field.name] = _shift(value, inserted)
    return dataclasses.replace(node, **changes)


_SOURCE_KEYWORD = re.compile(r"[\s,]+(?:ac|dc|distof[12])(?=[\s,=(]|$)", re.IGNORECASE)


def unclosed_source(text: str) -> int | None:
    """Where the '(' of a V or I card's transient function opens, when it never closes."""
    if text[:1].lower() not in ("v", "i"):
        return None
    at = _unclosed(text, "(", ")")
    if not (at < len(text.rstrip()) and text[at] == "("):
        return None
    before = text[:at].replace(",", " ").split()
    return at if len(before) > 3 and before[-1].lower() in TRANSIENT_FUNCTIONS else None


def unclosed_model(text: str) -> int | None:
    """Where the '(' of a ``.model`` card's parameter list opens, when it never closes."""
    if text[:6].lower() != ".model" or text[6:7] not in (" ", "\t", "("):
        return None
    at = _unclosed(text, "(", ")")
    return at if at < len(text.rstrip()) and text[at] == "(" else None


# Messages for the parser states right after a dot keyword (lower case, as written).
_AFTER_KEYWORD: dict[str, tuple[str, str]] = {
    ".subckt": ("expected a subcircuit name", "write .subckt <name> <ports...>"),
    ".model": ("expected a model name", "write .model <name> <type> (<params>)"),
    ".func": (
        "expected a function name with its arguments",
        "write .func <name>(<args>) {<expression>}",
    ),
    ".include": ("expected a file name", "write .include <file>"),
    ".inc": ("expected a file name", "write .include <file>"),
    ".lib": ("expected a file name or a section name", "write .lib <file> <section>"),
    ".if": ("expected '(' and a condition", "write .if(<expression>)"),
    ".elseif": ("expected '(' and a condition", "write .elseif(<expression>)"),
}


def _describe(exc: UnexpectedInput, text: str) -> CardSyntaxError:
    """Turn lark's exception into plain words at the right offset."""
    from lark import UnexpectedCharacters, UnexpectedToken  # loaded with the parser

    if isinstance(exc, UnexpectedCharacters):
        return _bad_character(exc.pos_in_stream or 0, text)
    assert isinstance(exc, UnexpectedToken)
    token = exc.token
    at_end = token.type == "$END"
    offset = len(text.rstrip()) if at_end else (token.start_pos or 0)
    expected = set(exc.expected)
    before = text[:offset].rstrip()
    stack = _stack_types(exc)
    if len(stack) == 1 and stack[0] in _AFTER_KEYWORD:
        message, hint = _AFTER_KEYWORD[stack[0]]
        return CardSyntaxError(offset, message, hint)
    if stack == [".model", "value"]:
        return CardSyntaxError(offset, "expected a model type", "e.g. .model dmod d (is=1e-14)")
    if stack[:2] == [".func", "call"] and (at_end or token.type == "EQUAL"):
        return CardSyntaxError(offset, "expected the function body", "e.g. .func f(x) {2*x}")
    if text[offset : offset + 1] in ("{", "'", '"') and token.type not in _DELIMITED:
        return _bad_character(offset, text)  # the delimited field never closes
    if before.endswith("="):
        return CardSyntaxError(offset, "expected a value after '='", "write <name>=<value>")
    if at_end and "RPAR" in expected:
        return CardSyntaxError(_unclosed(text, "(", ")"), "unbalanced '('", "add the missing ')'")
    if at_end and "RSQB" in expected:
        return CardSyntaxError(_unclosed(text, "[", "]"), "unbalanced '['", "add the missing ']'")
    return _bad_character(offset, text)


_DELIMITED = ("BRACE", "SQUOTE", "DQUOTE", "PATH")


def _stack_types(exc: UnexpectedToken) -> list[str]:
    """What the parser had read when it stopped: dot keywords (lower case), else kinds."""
    interactive = exc.interactive_parser
    if interactive is None:
        return []
    names: list[str] = []
    for item in interactive.parser_state.value_stack:
        if isinstance(item, Call):
            names.append("call")
        elif isinstance(item, Value):
            names.append("value")
        elif isinstance(item, Token) and item.key.startswith("."):
            names.append(item.key)
        else:
            names.append(type(item).__name__)
    return names


_PLAIN: dict[str, tuple[str, str]] = {
    "{": ("unbalanced '{'", "add the missing '}' (braces hold one expression: {2*rval})"),
    "}": ("a '}' without its '{'", "remove the '}' or add the '{' before it"),
    "'": ("unbalanced quote", "close the expression with a second '"),
    '"': ("unbalanced '\"'", 'close the string with a second "'),
    ")": ("a ')' without its '('", "remove the ')' or add the '(' before it"),
    "]": ("a ']' without its '['", "remove the ']' or add the '[' before it"),
    "=": ("expected a name before '='", "write <name>=<value>"),
    "~": ("expected a node name after '~'", "write ~<node> for an inverted digital port"),
    "%": ("unknown port prefix", "XSPICE ports use %v %i %vd %id %g %gd %h %hd %d"),
}


def _bad_character(offset: int, text: str) -> CardSyntaxError:
    char = text[offset : offset + 1]
    if char in _PLAIN:
        message, hint = _PLAIN[char]
        return CardSyntaxError(offset, message, hint)
    if not char:
        return CardSyntaxError(offset, "the card ends too early", None)
    return CardSyntaxError(offset, f"unexpected '{char}'", None)


def _unclosed(text: str, opening: str, closing: str) -> int:
    """The offset of the last opening bracket that is never closed (outside braces/quotes)."""
    stack: list[int] = []
    depth = 0
    quote = ""
    for i, ch in enumerate(text):
        if quote:
            quote = "" if ch == quote else quote
        elif ch in "'\"":
            quote = ch
        elif ch == "{":
            depth += 1
        elif ch == "}":
            depth -= 1
        elif depth == 0 and ch == opening:
            stack.append(i)
        elif depth == 0 and ch == closing and stack:
            stack.pop()
    return stack[0] if stack else len(text.rstrip())


def syntax_of(card: Card) -> CardSyntax:
    """The card's typed syntax; a :class:`DeckSyntaxError` at the right place if it has none."""
    logical = card.logical().text
    try:
        return parse_card(logical)
    except CardSyntaxError as err:
        raise DeckSyntaxError(err.message, card.location(err.offset), err.hint) from None
