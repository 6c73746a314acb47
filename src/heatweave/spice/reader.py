"""The reader: deck text to the lossless deck model, fast enough for post-layout decks.

Reading is line-level only: each physical line is classified by its first non-blank
character (``*`` and ngspice's other comment characters, ``+`` continuation, ``.`` dot
card, anything else a card), continuation lines are attached to the card they continue
(across interleaved comment and blank lines, as ngspice allows), and ``.subckt``/``.ends``,
``.lib``/``.endl`` and ``.control``/``.endc`` become explicit blocks.  No card is parsed here:
the grammar runs only where a card's meaning is needed (``lint``, the emitter), so the
rewrite path costs about one string operation a line.

Rules follow ngspice 39 (see ``shared/reference/ngspice-syntax.md``): the first line of a
top-level deck is its title whatever it holds; ``.end`` does not stop reading; included
files have no title line.
"""

from __future__ import annotations

import re

from heatweave.errors import UnreadableInputError
from heatweave.files import read_text
from heatweave.spice.deck import Block, Card, ControlBlock, Deck, Node, SourceFile

_BLANKS = " \t"


# One trivia line: blank, or starting (after blanks) with a comment character.
_TRIVIA = r"[ \t]*(?:[\r*=\[\]?()&%$\u00a7\\\"!:][^\n]*)?(?:\n|\Z)"
# One card: optional trivia above it (group 1), then its first line and any continuation
# lines, each of which may be preceded by trivia lines (group 2).
_CARD = re.compile(
    rf"((?:{_TRIVIA})*)"
    rf"([ \t]*[^ \t\r\n*=\[\]?()&%$\u00a7\\\"!:][^\n]*(?:\n|\Z)"
    rf"(?:(?:{_TRIVIA})*[ \t]*\+[^\n]*(?:\n|\Z))*)"
)


def read(text: str, path: str = "<deck>", *, title: bool = True, quotable: bool = True) -> Deck:
    """Read a deck (``title=True``) or an included file (``title=False``); ``quotable=False``
    for a file whose lines no message may show (:attr:`SourceFile.quotable`).

    Never fails on ngspice-acceptable input; structural problems that ngspice would also
    reject (``.ends`` without ``.subckt``) are kept as plain cards and reported by ``lint``.
    """
    return _read(text, path, title, quotable)


def _read(text: str, path: str, title: bool, quotable: bool = True) -> Deck:
    source = SourceFile(path, text, quotable=quotable)
    pos = 0
    title_text: str | None = None
    if title and text:
        newline = text.find("\n")
        pos = len(text) if newline < 0 else newline + 1
        title_text = text[:pos]

    # A stack of open blocks: (header card, body list); the bottom is the file itself.
    stack: list[tuple[Card | None, list[Node]]] = [(None, [])]
    body = stack[0][1]
    control: list[str] | None = None  # pieces of an open .control block
    control_start = (0, "")
    append = body.append
    match_at = _CARD.match
    while (match := match_at(text, pos)) is not None:
        # Matched where the last card ended: a search would skip ahead, past the '*' of
        # a last comment line, and take its text for a card (issue 17).
        card_offset, end = match.span(2)
        lead = text[pos:card_offset]
        card_text = text[card_offset:end]
        pos = end
        if control is not None:
            control.append(lead)
            control.append(card_text)
            if _starts(card_text.lstrip(_BLANKS), ".endc"):
                offset, block_lead = control_start
                append(ControlBlock("".join(control), block_lead, source, offset))
                control = None
            continue
        first = card_text[:1]
        if first in _BLANKS:
            first = card_text.lstrip(_BLANKS)[:1]
        if first != ".":
            append(Card(card_text, lead, source, card_offset))
            continue
        stripped = card_text.lstrip(_BLANKS)
        if _starts(stripped, ".control"):
            control = [card_text]
            control_start = (card_offset, lead)
            continue
        body = _structure(Card(card_text, lead, source, card_offset), stack, body)
        append = body.append

    if control is not None:
        offset, block_lead = control_start
        body.append(ControlBlock("".join(control), block_lead, source, offset, closed=False))
    trailer = text[pos:]
    # Blocks still open at the end of the file keep their bodies; lint reports them.
    while len(stack) > 1:
        header, inner = stack.pop()
        assert header is not None
        stack[-1][1].append(Block(header, tuple(inner), None))
    return Deck(path, title_text, tuple(stack[0][1]), trailer, source)


def _starts(stripped: str, word: str) -> bool:
    """True when a stripped line starts with *word* whatever follows: ngspice 39 opens a
    ``.control`` block at ``.controls`` too, and closes one at ``.endcx`` (verified)."""
    return stripped[: len(word)].lower() == word


def _structure(
    card: Card, stack: list[tuple[Card | None, list[Node]]], body: list[Node]
) -> list[Node]:
    """Open or close ``.subckt``/``.lib`` blocks; return the body the next card goes into."""
    keyword = card.name
    if keyword == ".subckt" or (keyword == ".lib" and _lib_section_start(card)):
        stack.append((card, []))
        return stack[-1][1]
    closes = {".ends": ".subckt", ".endl": ".lib"}.get(keyword)
    if closes is not None and len(stack) > 1 and stack[-1][0] is not None:
        header = stack[-1][0]
        if header.name == closes:
            stack.pop()
            stack[-1][1].append(Block(header, tuple(body), card))
            return stack[-1][1]
    body.append(card)
    return body


def _lib_section_start(card: Card) -> bool:
    """``.lib NAME`` opens a section; ``.lib FILE NAME`` includes one (manual 2.8)."""
    return len(card.fields()) == 2


def read_file(path: str, *, title: bool = True) -> Deck:
    """Read a deck from disk (``-`` for standard input) with lossless decoding."""
    return read(read_deck_text(path), path, title=title)


def read_deck_text(path: str) -> str:
    """A deck's text as :func:`heatweave.files.read_text` gives it, with an unreadable
    file reported as an :class:`UnreadableInputError` rather than an OS error."""

    try:
        return read_text(path)
    except FileNotFoundError as err:
        raise UnreadableInputError(
            f"cannot read {path}: no such file", hint="check the path and the current folder"
        ) from err
    except IsADirectoryError as err:
        raise UnreadableInputError(
            f"cannot read {path}: it is a folder", hint="name the deck file itself"
        ) from err
    except PermissionError as err:
        raise UnreadableInputError(
            f"cannot read {path}: permission denied", hint="check the file's permissions"
        ) from err
    except OSError as err:  # a path through a file (ENOTDIR), a name too long, ...
        raise UnreadableInputError(
            f"cannot read {path}: {err.strerror or err}", hint="check the path"
        ) from err
