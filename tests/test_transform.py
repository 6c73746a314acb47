"""The general deck-tree transforms (spice/transform.py): deck tree in, deck text out.

Each row is a deck of our own as text, read into the tree, transformed and written; the
whole output text is compared, so every card the transform does not touch (unknown dot
cards, an XSPICE card, continuation lines, comments, a .control block, CRLF line ends) is
held to pass through byte for byte.  Where a card lands is held to ngspice 39's reading:
its shared library stops at .end (run/safedeck.py), so cards go before the last one.
"""

from __future__ import annotations

import pytest

from heatweave.spice.deck import Block, Card
from heatweave.spice.reader import read
from heatweave.spice.transform import insert_before_end, line_ended, map_cards, new_cards

ADDED = ["Vadd n9 0 DC 0", ".options reltol=1e-6"]
BLOCK = "Vadd n9 0 DC 0\n.options reltol=1e-6\n"

UNKNOWN = (
    "t unknown cards\n"
    "* a comment; with $ marks\n"
    ".weird_card a=1 {b*2}\n"
    "A1 [%vd(a b)] %id(0 c) mystery ; inline\n"
    "R1 a b\n+ 1k\n*  between\n+ tc1=0.01\n"
    ".control\nshell echo kept\n.endc\n"
    ".subckt cell p q\nRin p q 1\n.ends cell\n"
)


@pytest.mark.parametrize(
    ("text", "want"),
    [
        # the plain case
        ("t\nR1 a 0 1\n.end\n", f"t\nR1 a 0 1\n{BLOCK}.end\n"),
        # comment lines above .end belong to it and stay above it
        ("t\nR1 a 0 1\n* last words\n\n.end\n", f"t\nR1 a 0 1\n{BLOCK}* last words\n\n.end\n"),
        # any spelling of .end that ngspice reads as one: case, indent, inline comment
        ("t\nR1 a 0 1\n.END ; done\n", f"t\nR1 a 0 1\n{BLOCK}.END ; done\n"),
        ("t\nR1 a 0 1\n  .end\n", f"t\nR1 a 0 1\n{BLOCK}  .end\n"),
        # the last .end of several (ngspice reads on after .end)
        ("t\n.end\nR1 a 0 1\n.end\n", f"t\n.end\nR1 a 0 1\n{BLOCK}.end\n"),
        # .ends and .endc are not .end; a deck without .end gets the cards at its end
        ("t\n.subckt c p\nR p 0 1\n.ends\n", f"t\n.subckt c p\nR p 0 1\n.ends\n{BLOCK}"),
        # ... a last line without a line end ended, so the first card does not join it
        ("t\nR1 a 0 1", f"t\nR1 a 0 1\n{BLOCK}"),
        ("t\n.subckt c p\nR p 0 1", f"t\n.subckt c p\nR p 0 1\n{BLOCK}"),  # left open
        # ... before trailing comment lines, which stay last
        ("t\nR1 a 0 1\n* tail", f"t\nR1 a 0 1\n{BLOCK}* tail"),
        # a title alone
        ("t", f"t\n{BLOCK}"),
        ("t\n", f"t\n{BLOCK}"),
        # unknown cards and comments untouched, CRLF kept on every line that has it
        (UNKNOWN + ".end\n", UNKNOWN + BLOCK + ".end\n"),
        ("t\r\nR1 a 0 1 ; x\r\n.end\r\n", f"t\r\nR1 a 0 1 ; x\r\n{BLOCK}.end\r\n"),
    ],
)
def test_insert_before_end(text: str, want: str) -> None:
    deck = read(text, "d.cir")
    out = insert_before_end(deck, new_cards(ADDED))
    assert out.write() == want
    assert deck.write() == text  # the deck read is not changed
    # Nodes before the insertion are the very same objects.
    assert all(a is b for a, b in zip(deck.body[:-1], out.body, strict=False))


def test_insert_nothing_is_the_same_deck() -> None:
    deck = read("t\nR1 a 0 1\n.end\n")
    assert insert_before_end(deck, ()) is deck


@pytest.mark.parametrize(
    ("lines", "want"),
    [
        (["V1 a 0 1"], ["V1 a 0 1\n"]),
        (["B1 a 0 V = pwl(V(x),\n+ 0,1, 1,2)"], ["B1 a 0 V = pwl(V(x),\n+ 0,1, 1,2)\n"]),
        (["R1 a 0 1\n", ".op"], ["R1 a 0 1\n", ".op\n"]),
    ],
)
def test_new_cards(lines: list[str], want: list[str]) -> None:
    cards = new_cards(lines)
    assert [c.text for c in cards] == want
    assert all(c.lead == "" and c.source is None for c in cards)
    # Each one is one card as the reader reads it (continuations included).
    text = "t\n" + "".join(want)
    assert [c.text for c in read(text).body] == want


def _two_ohms(card: Card) -> Card:
    """An R card of 1 ohm as one of 2 ohms (a stand-in change; the trivia stays)."""
    if card.letter != "R" or not card.text.endswith(" 1\n"):
        return card
    return card.with_text(card.text.replace(" 1\n", " 2\n"))


@pytest.mark.parametrize(
    ("text", "want"),
    [
        ("t\nR1 a 0 1\n.end\n", "t\nR1 a 0 2\n.end\n"),
        # inside a subcircuit, its header and end untouched; the comment above kept
        (
            "t\n.subckt c p\n* inner\nRin p 0 1\n.ends c\nX1 a c\n.end\n",
            "t\n.subckt c p\n* inner\nRin p 0 2\n.ends c\nX1 a c\n.end\n",
        ),
        # a .control block is not cards: its R line is a command, left alone
        ("t\n.control\nR9 x 0 1\n.endc\n.end\n", "t\n.control\nR9 x 0 1\n.endc\n.end\n"),
        (UNKNOWN + ".end\n", UNKNOWN.replace("Rin p q 1\n", "Rin p q 2\n") + ".end\n"),
    ],
)
def test_map_cards(text: str, want: str) -> None:
    deck = read(text)
    out = map_cards(deck, _two_ohms)
    assert out.write() == want
    assert deck.write() == text
    unchanged = [a for a, b in zip(deck.body, out.body, strict=True) if a.write() == b.write()]
    assert all(any(a is b for b in out.body) for a in unchanged)


def test_map_cards_without_a_change_is_the_same_deck() -> None:
    deck = read(UNKNOWN + ".end\n")
    assert map_cards(deck, lambda card: card) is deck


def test_line_ended_block_without_end() -> None:
    deck = read(".subckt c p\nR p 0 1", title=False)
    (block,) = deck.body
    assert isinstance(block, Block)
    assert line_ended(block).write() == ".subckt c p\nR p 0 1\n"
    assert line_ended(line_ended(block)) == line_ended(block)
