"""The plain-card scanner (spice.cardscan) gives exactly lark's syntax, or declines.

Checked against the grammar itself, the outside reference here: every card of the test
and example decks, and random cards made of the words that the field-joining rules treat
differently (operators at a word's edge, numbers with exponents, keywords).
"""

from __future__ import annotations

from pathlib import Path

from hypothesis import given, settings
from hypothesis import strategies as st
from lark import UnexpectedInput

from heatweave.files import read_text
from heatweave.spice.cardbuild import BuildError, use_text
from heatweave.spice.cardscan import scan_card
from heatweave.spice.grammar import parser
from heatweave.spice.reader import read

ROOT = Path(__file__).resolve().parents[1]


def _both(text: str) -> tuple[object, object]:
    """(scanner, lark) for one logical card, (None, None) where the scanner declines; a
    BuildError as (offset, message), a card lark refuses as its error."""
    results: list[object] = []
    for parse in (scan_card, parser().parse):
        use_text(text)
        try:
            results.append(parse(text))
        except BuildError as err:
            results.append((err.offset, err.message))
        except UnexpectedInput as err:
            results.append(repr(err))
        if results[0] is None:
            return None, None
    return results[0], results[1]


def _deck_cards() -> list[str]:
    paths = [p for p in (*ROOT.glob("tests/**/*.cir"), *ROOT.glob("examples/**/*.cir"))]
    cards: list[str] = []
    for path in sorted(paths):
        deck = read(read_text(path), str(path))
        cards.extend(card.logical().text for card in deck.cards())
    return cards


def test_every_plain_card_of_the_test_decks_reads_as_the_grammar_reads_it() -> None:
    scanned = 0
    for text in _deck_cards():
        quick, full = _both(text)
        if quick is None:
            continue
        scanned += 1
        assert quick == full, text
    assert scanned > 500  # most cards are plain: the comparison is not empty


HEADS = ["R1 a b", "V1 in 0", "E1 o 0 c 0", "Q1 c b e", "M1 d g s b", "X1 a b", "K1 L1 L2",
         "B1 o 0", "U1", "A1", "D1 a k", ".param", ".options", ".tran", ".global", ".end",
         ".ic", ".model m r", ".model m r(", ".MODEL q1 NPN", ".subckt s a", ".ends",
         ".lib", ".title", ".func", "P1", "N1", "S1 a b c d"]  # fmt: skip
WORDS = ["1k", "1e-3", "2.5meg", "0", ".5", "a", "tc1", "x.y", "a-b", "a+b", "dc", "ac", "sin",
         "pulse", "off", "thermal", "m", "params:", "1-", "-1", "+", "v", "dmod"]  # fmt: skip
SEPARATORS = [" ", "  ", "\t", " = "]


@st.composite
def cards(draw: st.DrawFn) -> str:
    head = draw(st.sampled_from(HEADS))
    item = st.tuples(
        st.sampled_from(WORDS), st.sampled_from(["", *WORDS]), st.sampled_from(SEPARATORS)
    )
    items = draw(st.lists(item, max_size=6))
    text = head
    for k, (word, value, equal) in enumerate(items):
        text += ("" if k == 0 and head.endswith("(") else " ") + word
        if value:
            text += ("=" if equal == " " else equal.strip(" ") or "=") + value
    if head.endswith("("):
        text += draw(st.sampled_from([")", " )", ""]))
    return text + draw(st.sampled_from(["", " ", "  "]))


@settings(max_examples=600, deadline=None)
@given(cards())
def test_random_cards_read_as_the_grammar_reads_them(text: str) -> None:
    quick, full = _both(text.rstrip(" "))  # a logical text has no trailing blanks
    if quick is not None:
        assert quick == full
