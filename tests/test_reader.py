"""The reader and writer: ``write(read(text)) == text`` byte for byte, and the structure
that the rest of heatweave relies on (cards, trivia, blocks, logical text)."""

from __future__ import annotations

from pathlib import Path

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from heatweave.files import decode, encode
from heatweave.spice.deck import Block, Card, ControlBlock, strip_inline_comment
from heatweave.spice.reader import read

CORPUS = sorted(
    p for p in (Path(__file__).parent / "decks").rglob("*") if p.is_file()
)

# Layout oddities from the ngspice manual (2.1, 2.3) and shared/reference/ngspice-syntax.md.
ROUND_TRIP = [
    "",
    "title only",
    "title\n",
    "t\r\nR1 a b 1k\r\n+ m=2\r\n.end\r\n",
    "t\nR1 a b 1k\n.end",  # no final newline
    "t\n\tR1\ta b\t1k  \n  + m=1  \n",  # tabs, trailing blanks, indented +
    "t\n* c\n\nR1 a b 1k ; x\n* between\n\n+tc1=1\n* after\nR2 a 0 2\n",
    "t\n.subckt s a b params: r=1\nR1 a b {r}\n.ends s\nX1 1 0 s r=2\n",
    "t\n.control\nset x = 1\necho $x $ comment\n+ not a continuation\n.endc\n",
    "t\n.ends\n",  # .ends without .subckt: kept as a card
    "t\n.subckt open a\nR1 a 0 1\n",  # unclosed at end of file
    "t\n.end\nR9 a 0 1\n* after end\n",
    "t\r\n*\xe9t\xe9 latin-1 bytes\r\nR1 1 0 1\n",
    "t\n.lib fast\n.model d1 D\n.endl fast\n",
    "t\n+ orphan continuation\n",
    "t\n\n\n",
    "t\rR1 a b 1\r",  # lone carriage returns stay inside lines
]


@pytest.mark.parametrize("text", ROUND_TRIP)
def test_round_trip_snippets(text: str) -> None:
    assert read(text).write() == text


@pytest.mark.parametrize("path", CORPUS, ids=lambda p: p.name)
def test_round_trip_corpus(path: Path) -> None:
    data = path.read_bytes()
    text = decode(data)
    assert encode(read(text, str(path), title=path.suffix != ".inc").write()) == data


def test_corpus_is_not_empty() -> None:
    assert len(CORPUS) >= 12


def test_structure() -> None:
    deck = read(ROUND_TRIP[6])
    kinds = [type(n).__name__ for n in deck.body]
    assert kinds == ["Card", "Card"]
    r1 = deck.body[0]
    assert isinstance(r1, Card)
    assert r1.lead == "* c\n\n"
    assert r1.logical().text == "R1 a b 1k  tc1=1"
    loc = r1.location(r1.logical().text.index("tc1"))
    assert loc is not None and (loc.line, loc.column) == (7, 2)


def test_blocks() -> None:
    deck = read(ROUND_TRIP[7])
    block = deck.body[0]
    assert isinstance(block, Block) and block.kind == "subckt" and block.label == "s"
    assert [c.head for c in block.body if isinstance(c, Card)] == ["R1"]
    control = read(ROUND_TRIP[8]).body[0]
    assert isinstance(control, ControlBlock) and control.closed


@pytest.mark.parametrize(
    ("line", "expected"),
    [
        # ngspice 39.3 behaviour from shared/reference/ngspice-syntax.md section 1
        ("R5 1 0 1k;x", "R5 1 0 1k"),
        ("R5 1 0 1k//x", "R5 1 0 1k"),
        ("R5 1 0 1k $x", "R5 1 0 1k "),
        ("R5 1 0 1k\t$ x", "R5 1 0 1k\t"),
        ("R5 1 0 2k$x", "R5 1 0 2k$x"),
        ("R5 1 0 {a$b} $ c ; d", "R5 1 0 {a$b} "),
    ],
)
def test_inline_comments(line: str, expected: str) -> None:
    assert strip_inline_comment(line) == expected


_line = st.one_of(
    st.sampled_from(
        [
            "R1 a b 1k",
            "C2 n1 0 10p ic=0",
            "+ tc1=1m",
            "+m=2",
            "* comment",
            "",
            "  \t",
            ".subckt s a b",
            ".ends",
            ".control",
            ".endc",
            ".lib sec",
            ".endl",
            ".end",
            "V1 in 0 dc 5 ; src",
            "X1 a b s params: r=2",
            "$ odd comment start",
        ]
    ),
    st.text(alphabet=st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=30),
)


@settings(max_examples=300, deadline=None)
@given(
    lines=st.lists(_line, max_size=25),
    eol=st.sampled_from(["\n", "\r\n"]),
    final=st.booleans(),
)
def test_round_trip_property(lines: list[str], eol: str, final: bool) -> None:
    text = eol.join(line.replace("\n", " ") for line in lines) + (eol if final else "")
    assert read(text).write() == text
    assert read(text, title=False).write() == text


# Issue 17: the last line of an included model file was a '*' comment; the reader searched
# past the '*' for the next card and took " F grade ..." for an F element.
@pytest.mark.parametrize(
    "text",
    [
        ".model d1 d(is=1f\n\t+ n=1.0)\n* F grade option\n",
        ".model d1 d(is=1f\n\t+ n=1.0)\n* F grade option",
        "R1 a 0 1k\n*\n* c2\n\n",
    ],
)
def test_comment_lines_at_the_end_are_trivia(text: str) -> None:
    deck = read(text, title=False)
    assert [c.head for c in deck.cards()] == [text.split()[0]]
    assert deck.write() == text
