"""General transforms of the deck tree: new nodes from old, nothing read or written as text.

Every transform returns a new :class:`~heatweave.spice.deck.Deck`; the nodes it does not
change are the very same objects, so every card heatweave does not understand, and every
comment, passes through byte for byte.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable, Sequence
from dataclasses import replace
from typing import TypeVar

from heatweave.spice.deck import Block, Card, ControlBlock, Deck, Node


def new_cards(lines: Iterable[str]) -> tuple[Card, ...]:
    """A card of heatweave's own for each of *lines* (one card each: its first line and
    any ``+`` continuation lines), each ended with a line end."""
    return tuple(Card(line if line.endswith("\n") else line + "\n") for line in lines)


def insert_before_end(deck: Deck, cards: Sequence[Card]) -> Deck:
    """*deck* with *cards* placed just before its last top-level ``.end`` card (after the
    comment lines above it, which stay with the ``.end``), or after its last node when it
    has none.  ngspice's shared library stops reading at ``.end``, so a card after it would
    be lost there."""
    if not cards:
        return deck
    body = deck.body
    for at in range(len(body) - 1, -1, -1):
        node = body[at]
        if isinstance(node, Card) and node.name == ".end":
            return deck.with_body((*body[:at], *cards, *body[at:]))
    if body:
        return deck.with_body((*body[:-1], line_ended(body[-1]), *cards))
    title = deck.title
    if title and not title.endswith("\n"):
        title += "\n"  # the first card must not join the title line
    return replace(deck, title=title, body=tuple(cards))


def map_cards(deck: Deck, change: Callable[[Card], Card]) -> Deck:
    """*deck* with every card, at every depth (block headers and ends included), replaced
    by ``change(card)``; ``.control`` blocks are kept as they are.  Where *change* returns
    the card itself, the node is kept, and so is every block and body around it."""
    body = _map_body(deck.body, change)
    return deck if body is deck.body else deck.with_body(body)


def _map_body(body: tuple[Node, ...], change: Callable[[Card], Card]) -> tuple[Node, ...]:
    out: list[Node] = []
    changed = False
    for node in body:
        new: Node
        if isinstance(node, Card):
            new = change(node)
        elif isinstance(node, Block):
            header = change(node.header)
            inner = _map_body(node.body, change)
            end = change(node.end) if node.end is not None else None
            same = header is node.header and inner is node.body and end is node.end
            new = node if same else Block(header, inner, end)
        else:
            new = node
        changed = changed or new is not node
        out.append(new)
    return tuple(out) if changed else body


def line_ended(node: Node) -> Node:
    """*node* ending with a line end, so that a line written after it starts a line of its
    own (the last line of a file need not end with one)."""
    if isinstance(node, Card):
        return _text_ended(node)
    if isinstance(node, ControlBlock):
        return _text_ended(node)
    if node.end is not None:
        return replace(node, end=_text_ended(node.end))
    if node.body:
        return replace(node, body=(*node.body[:-1], line_ended(node.body[-1])))
    return replace(node, header=_text_ended(node.header))


_Lines = TypeVar("_Lines", Card, ControlBlock)


def _text_ended(node: _Lines) -> _Lines:
    return node if node.text.endswith("\n") else replace(node, text=node.text + "\n")
