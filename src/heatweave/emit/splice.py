"""Writing a rewritten deck: by splicing the new cards into the file's text as read, or by
writing the rewritten tree; both put the thermal section before the top-level ``.end``.

Splicing needs the deck as read (its text equal to the file's) and every edit a top-level
card of it: then the cards left alone are never visited, which on a million-card deck is
most of the rewrite.  ``tests/test_emit_fastpaths.py`` checks the two give the same text.
"""

from __future__ import annotations

from heatweave.spice.deck import Card, ControlBlock, Deck, Node


def line_ending(deck: Deck) -> str:
    """The deck's own line ending, that of its first line: what the lines heatweave adds
    end in, so an emitted deck keeps one convention."""
    first = deck.title if deck.title is not None else (deck.body[0].write() if deck.body else "")
    newline = first.find("\n")
    return "\r\n" if newline > 0 and first[newline - 1] == "\r" else "\n"


def end_position(deck: Deck) -> int | None:
    """Where the thermal section goes in the deck's text as read: before the last
    top-level ``.end`` card's trivia, else at the end of the body; ``None`` when that card
    does not come from the file as read."""
    for node in reversed(deck.body):
        if isinstance(node, Card) and node.name == ".end":
            if node.source is not deck.source or node.offset < 0:
                return None
            return node.offset - len(node.lead)
    last = deck.body[-1] if deck.body else None
    if isinstance(last, ControlBlock) and not last.closed:
        # A .control block that runs to the end of the file (no .endc, no .end): ngspice
        # would read the section as commands; it goes above the block.
        if last.source is not deck.source or last.offset < 0:
            return None
        return last.offset - len(last.lead)
    return -1


def spliced(
    deck: Deck,
    text: str,
    edits: list[tuple[int, int, str]],
    section: Card,
    end_at: int,
    opening: str = "",
    eol: str = "\n",
) -> str:
    """*opening* (the new title and header), then the deck's body and trailer, *text* being
    the deck as read: the edits spliced in, and the thermal section at *end_at* (``-1``:
    after the body), placed as :func:`insert_before_end` places it in a tree; *eol* is the
    deck's line ending."""
    start = len(deck.title or "")
    end = len(text) - len(deck.trailer)
    at = end_at
    section_text = section.text
    if at < 0:
        at = end
        last = edits[-1][1] if edits else -1
        if start < end and last != end and text[end - 1 : end] != "\n":
            section_text = eol + section_text  # the file ended without a newline
    pieces = [opening]
    pos = start
    placed = False
    for begin, finish, new in edits:
        if not placed and at <= begin:
            pieces += [text[pos:at], section_text]
            pos, placed = at, True
        pieces += [text[pos:begin], new]
        pos = finish
    if not placed:
        pieces += [text[pos:at], section_text]
        pos = at
    pieces.append(text[pos:])
    return "".join(pieces)


def insert_before_end(body: list[Node], section: Card, eol: str = "\n") -> list[Node]:
    """Put the thermal section before the top-level ``.end`` (or last, without one);
    *eol* is the deck's line ending."""
    for i in range(len(body) - 1, -1, -1):
        node = body[i]
        if isinstance(node, Card) and node.name == ".end":
            return [*body[:i], section, *body[i:]]
    if body and isinstance(body[-1], ControlBlock) and not body[-1].closed:
        return [*body[:-1], section, body[-1]]  # see end_position
    if body and not body[-1].write().endswith("\n"):
        # The file ended without a newline: start the section on a line of its own.
        section = Card(section.text, eol + section.lead)
    return [*body, section]
