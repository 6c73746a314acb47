"""The deck model: a lossless, immutable tree of a SPICE deck.

Every node owns its trivia, as in a concrete syntax tree: a :class:`Card` keeps the comment
and blank lines above it (``lead``) and its own physical lines exactly as written (``text``:
the first line, its ``+`` continuation lines, any comment or blank lines between them, every
line ending).  Writing a deck is therefore concatenation, and ``write(read(text)) == text``
holds byte for byte.  Structure that the rewriter needs is explicit: ``.subckt``/``.ends``
and ``.lib``/``.endl`` enclose their bodies, ``.control``/``.endc`` blocks are kept verbatim.

What a card *means* (its fields, nodes, values) is derived on demand: :meth:`Card.logical`
gives the text ngspice reads after joining continuations and cutting inline comments, with
a map back to physical line and column; the full grammar (:mod:`heatweave.spice.grammar`) parses
that text only for the cards that need it.
"""

from __future__ import annotations

import bisect
import functools
import re
import unicodedata
from collections.abc import Iterator
from dataclasses import dataclass, field, replace
from typing import Union

from heatweave.errors import Location

_HEAD = re.compile(r"[ \t]*([^ \t\r\n,=()]*)")


def unprintable(name: str) -> str | None:
    """``None`` when *name* may be written into a deck (in a comment or as a name), else
    its first character that may not, spelled ``U+000A``: a control character (a newline
    would start a new line of the deck: a ``.control`` one, say), an invisible format
    character (a bidirectional override) or a line or paragraph separator."""
    if name.isascii() and name.isprintable():
        return None
    for char in name:
        if unicodedata.category(char) in ("Cc", "Cf", "Zl", "Zp"):
            return f"U+{ord(char):04X}"
    return None


@dataclass(frozen=True, slots=True, eq=False)
class SourceFile:
    """A file as read: its name for messages and its full text, for line numbers.

    ``quotable`` is False for an included file not proven to be SPICE
    (:func:`heatweave.spice.project.read_include`): its locations are withheld
    (:attr:`heatweave.errors.Location.withheld`), so no message shows its lines."""

    path: str
    text: str
    _newlines: list[int] = field(default_factory=list, repr=False)
    quotable: bool = True
    # Each line's text made once: every finding on a long line shares it (a copy each was
    # 2.4 GB for 25,000 findings on one 100 kB card).
    _lines: dict[int, str] = field(default_factory=dict, repr=False)

    def position(self, offset: int) -> tuple[int, int]:
        """1-based (line, column) of a character offset in the file."""
        if not self._newlines and self.text:
            self._newlines.extend(m.start() for m in re.finditer("\n", self.text))
            self._newlines.append(len(self.text) + 1)
        index = bisect.bisect_left(self._newlines, offset)
        start = self._newlines[index - 1] + 1 if index > 0 else 0
        return index + 1, offset - start + 1

    def line_text(self, line: int) -> str:
        """The text of a 1-based line, without its line ending."""
        known = self._lines.get(line)
        if known is not None:
            return known
        self.position(0)
        start = self._newlines[line - 2] + 1 if line > 1 else 0
        end = self._newlines[line - 1] if line - 1 < len(self._newlines) else len(self.text)
        known = self._lines[line] = self.text[start:end].rstrip("\r")
        return known

    def location(self, offset: int) -> Location:
        """A :class:`Location` for a character offset, with the source line."""
        line, column = self.position(offset)
        if not self.quotable:
            return Location(self.path, line, column, withheld=True)
        return Location(self.path, line, column, self.line_text(line))


@dataclass(frozen=True, slots=True)
class Logical:
    """The text ngspice reads for one card, with a map back to where each part came from.

    ``pieces`` holds ``(logical_start, physical_line_index, physical_column)`` for each
    physical line that contributed; the line index counts lines of the card's ``text``
    from 0, the column is 0-based.
    """

    text: str
    pieces: tuple[tuple[int, int, int], ...]

    def physical(self, offset: int) -> tuple[int, int]:
        """(line index within the card, 0-based column) of a logical offset."""
        i = max(bisect.bisect_right(self.pieces, offset, key=_first) - 1, 0)
        start, line, column = self.pieces[i]
        return line, column + (offset - start)


def strip_inline_comment(line: str) -> str:
    """The part of a netlist line ngspice reads: ``;`` and ``//`` cut anywhere, ``$`` only
    after a blank or tab (manual 2.3.4, checked against ngspice 39.3)."""
    cut = len(line)
    semi = line.find(";")
    if semi >= 0:
        cut = semi
    slashes = line.find("//", 0, cut)
    if slashes >= 0:
        cut = slashes
    dollar = line.find("$", 0, cut)
    while dollar > 0:
        if line[dollar - 1] in " \t":
            cut = dollar
            break
        dollar = line.find("$", dollar + 1, cut)
    return line[:cut]


def split_lines(text: str) -> list[str]:
    """Physical lines without their endings (a trailing ``\\r`` of CRLF removed)."""
    parts = text.split("\n")
    if parts and parts[-1] == "":
        parts.pop()
    return [p[:-1] if p.endswith("\r") else p for p in parts]


@dataclass(frozen=True, slots=True)
class Card:
    """One card: an element, a dot card, or a stray line, with the trivia it owns.

    ``lead`` is the raw text of the comment and blank lines above the card; ``text`` the raw
    text of the card's own physical lines, line endings included.  ``source`` and
    ``offset`` (of ``text`` in that file) locate it for messages; cards heatweave creates
    have neither.
    """

    text: str
    lead: str = ""
    source: SourceFile | None = field(default=None, compare=False, repr=False)
    offset: int = field(default=-1, compare=False, repr=False)

    def write(self) -> str:
        """The card's exact text, trivia first."""
        return self.lead + self.text

    @property
    def head(self) -> str:
        """The first field as written: the element name or the dot keyword."""
        head = _HEAD.match(self.text).group(1)  # type: ignore[union-attr]  # always matches
        if ";" in head or "//" in head:
            head = strip_inline_comment(head)
        return head

    @property
    def name(self) -> str:
        """The card's name in lower case (``r1``, ``.subckt``): SPICE compares names so."""
        return self.head.lower()

    @property
    def is_dot(self) -> bool:
        """True for dot cards (``.model``, ``.tran``, ...)."""
        return self.head.startswith(".")

    @property
    def is_element(self) -> bool:
        """True for element cards: the first character is a letter."""
        return self.head[:1].isalpha()

    @property
    def letter(self) -> str:
        """The element type letter, upper case (``R``, ``X``), or ``""`` for other cards."""
        first = self.head[:1]
        return first.upper() if first.isalpha() else ""

    def physical_lines(self) -> list[str]:
        """The card's own lines without line endings."""
        return split_lines(self.text)

    def logical(self) -> Logical:
        """Join continuation lines and cut inline comments, as ngspice reads the card."""
        return _logical(self.text)

    def fields(self) -> list[str]:
        """The card's fields split as ngspice splits them (blanks, ``,``, ``=``, ``(``, ``)``),
        keeping ``{...}`` and ``'...'`` whole.  A cheap view for the fast paths; the grammar
        gives the typed one."""
        return tokenize_fields(self.logical().text)

    def location(self, logical_offset: int = 0) -> Location | None:
        """Where a logical offset of this card stands in its file."""
        if self.source is None:
            return None
        line_index, column = self.logical().physical(logical_offset)
        before = _line_starts(self.text)[line_index] if line_index else 0
        return self.source.location(self.offset + before + column)

    def with_text(self, text: str) -> Card:
        """A new card with other lines but the same trivia above it."""
        return replace(self, text=text, source=None, offset=-1)

    def commented(self, marker: str = "*") -> str:
        """The card's lines turned into comment lines, for showing what was replaced."""
        text = self.text
        if text.find("\n") == len(text) - 1:  # one line with its line ending
            return marker + text
        out = []
        for line in self.text.splitlines(keepends=True):
            out.append(marker + line)
        text = "".join(out)
        return text if text.endswith("\n") else text + "\n"


@functools.lru_cache(maxsize=64)
def _logical(text: str) -> Logical:
    """:meth:`Card.logical` of a card's *text*, kept for the last cards asked about: lint
    asks once per finding, and a card of a megabyte took milliseconds each time."""
    newline = text.find("\n")
    if newline < 0 or newline == len(text) - 1:  # one physical line: the common case
        line = text[:newline] if newline >= 0 else text
        body = line.rstrip("\r").lstrip(" \t")
        content = strip_inline_comment(body).rstrip(" \t")
        return Logical(content, ((0, 0, len(line) - len(line.lstrip(" \t"))),))
    pieces: list[tuple[int, int, int]] = []
    chunks: list[str] = []
    length = 0
    for index, raw in enumerate(split_lines(text)):
        body = raw.lstrip(" \t")
        indent = len(raw) - len(body)
        if index == 0:
            column = indent
        elif body.startswith("+"):
            body = body[1:]
            column = indent + 1
            chunks.append(" ")
            length += 1
        else:  # a comment or blank line between continuations
            continue
        content = strip_inline_comment(body)
        pieces.append((length, index, column))
        chunks.append(content)
        length += len(content)
    return Logical("".join(chunks).rstrip(" \t"), tuple(pieces))


@functools.lru_cache(maxsize=64)
def _line_starts(text: str) -> tuple[int, ...]:
    """Where each physical line of a card's *text* starts (for :meth:`Card.location`)."""
    return (0, *(m.end() for m in re.finditer("\n", text)))


def _first(piece: tuple[int, int, int]) -> int:
    return piece[0]


_FIELD = re.compile(r"\{(?:[^{}]|\{[^{}]*\})*\}|'[^']*'|\"[^\"]*\"|[^\s,=()'{\"]+|=")


def tokenize_fields(text: str) -> list[str]:
    """Split a logical card into fields; ``=`` is kept as its own field."""
    return _FIELD.findall(text)


@dataclass(frozen=True, slots=True)
class ControlBlock:
    """A ``.control`` ... ``.endc`` block, kept verbatim: its lines are commands, not cards."""

    text: str
    lead: str = ""
    source: SourceFile | None = field(default=None, compare=False, repr=False)
    offset: int = field(default=-1, compare=False, repr=False)
    closed: bool = True

    def write(self) -> str:
        """The block's exact text."""
        return self.lead + self.text


@dataclass(frozen=True, slots=True)
class Block:
    """A card that opens a body closed by another card: ``.subckt``/``.ends`` or a library
    section ``.lib NAME``/``.endl``.  ``end`` is ``None`` when the file ends first."""

    header: Card
    body: tuple[Node, ...]
    end: Card | None

    @property
    def kind(self) -> str:
        """``subckt`` or ``lib``."""
        return self.header.name.lstrip(".")

    @property
    def label(self) -> str:
        """The subcircuit or library section name as written."""
        fields = self.header.fields()
        return fields[1] if len(fields) > 1 else ""

    def write(self) -> str:
        """The block's exact text: header, body, closing card."""
        parts = [self.header.write()]
        parts.extend(node.write() for node in self.body)
        if self.end is not None:
            parts.append(self.end.write())
        return "".join(parts)

    def with_body(self, body: tuple[Node, ...]) -> Block:
        """The same block with another body."""
        return replace(self, body=body)


Node = Union[Card, ControlBlock, Block]  # noqa: UP007 - used at run time in isinstance


@dataclass(frozen=True, slots=True)
class Deck:
    """A whole file: the title line (top-level decks only), the nodes, trailing trivia."""

    path: str
    title: str | None
    body: tuple[Node, ...]
    trailer: str = ""
    source: SourceFile | None = field(default=None, compare=False, repr=False)

    def write(self) -> str:
        """The deck's exact text."""
        parts = [self.title or ""]
        parts.extend(node.write() for node in self.body)
        parts.append(self.trailer)
        return "".join(parts)

    def with_body(self, body: tuple[Node, ...]) -> Deck:
        """The same deck with another body."""
        return replace(self, body=body)

    def cards(self) -> Iterator[Card]:
        """Every card at every depth in file order (block headers and ends included)."""
        yield from iter_cards(self.body)


def iter_cards(body: tuple[Node, ...]) -> Iterator[Card]:
    """Every card in *body*, descending into blocks, in file order."""
    for node in body:
        if isinstance(node, Card):
            yield node
        elif isinstance(node, Block):
            yield node.header
            yield from iter_cards(node.body)
            if node.end is not None:
                yield node.end
