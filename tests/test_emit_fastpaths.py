"""The emitter's paths for large decks give byte for byte what its plain paths give.

* Stencils: one part's text is made once per (model, network, cold node) and filled in
  for every other part of that kind (:mod:`heatweave.emit.stencil`).
* Splicing: when every part is a top-level card of the deck as read, the new cards are
  spliced into the file's text at their offsets instead of rewriting the tree.
* ``DeckIndex.matching``: a flat deck's globs run over its cards' texts, not over names cut
  out of them first.

The reference for each is the emitter with that path switched off: every form, every
temperature model and network form, ground and mixed-case nodes, instance paths, parts
that share a model or do not, and the reader's corpus of awkward decks (no final newline,
cards after ``.end``, CRLF, comments between continuation lines, includes).
"""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from heatweave.emit import stencil
from heatweave.emit.emitter import _Rewriter, emit_files
from heatweave.emit.forms import FORMS
from heatweave.errors import HeatweaveError
from heatweave.spice.globmatch import matching_paths
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.project import load_project

DECK = """\
stencil test deck
V1 in 0 DC 5
RA1 in mid 100
RA2 mid 0 100
rA3 0 Mid 220
RA4 Mid out 100 tc1=1e-3
RB1 out 0 1k
RB2 out n2 1k
RB3 n2 0 4.7k
RC1 in c1 10
RC2 c1 0 10
RD1 in d1 50
RD2 d1 0 50
X1 in 0 cell
X2 in out cell
.subckt cell p q
RIN p m 330
ROUT m q 330
.ends cell
.op
.end
"""

ANNOTATION = """\
schema = 1

[node.board]
rth = 20.0
cth = 5.0

[part."RA*"]
model = "linear"
tc1_ppm = 3900
rth = 80.0
cth = 0.02
to = "board"

[part."RB*"]
model = "exponential"
tce = 0.4
foster = [[10.0, 0.001], [30.0, 0.5]]

[part."RC*"]
model = "ntc-beta"
beta = 3950
cauer = [[5.0, 0.02], [15.0, 0.3]]

[part."RD*"]
model = "quadratic"
tc1_ppm = 20
tc2 = -4e-8
rth = 45.0

[part."X*.R*"]
model = "rtd"
rth = 400.0
cth = 0.002
"""


def _made_directly(self: stencil.Stencils, key: object, make: stencil.Maker, payload: object,
                   values: tuple[str, ...]) -> stencil.Made:  # fmt: skip
    return make(payload, *values)


@pytest.mark.parametrize("form", list(FORMS))
def test_filled_in_equals_made(tmp_path: Path, form: str, monkeypatch: pytest.MonkeyPatch) -> None:
    deck = tmp_path / "cells.cir"
    deck.write_text(DECK)
    annotation = tmp_path / "cells.thermal.toml"
    annotation.write_text(ANNOTATION)
    filled = emit_files(str(deck), str(annotation), form=form).text
    monkeypatch.setattr(stencil.Stencils, "get", _made_directly)
    made = emit_files(str(deck), str(annotation), form=form).text
    assert filled == made
    assert filled.count(": model linear,") == 4 and "*hw* X2.RIN: model rtd," in filled


def _concatenating(value: str, name: str, node: str) -> stencil.Made:
    return f"R{name} {node} 0 {value}\n", (f"n_{name}",), ()


def _folding(value: str, name: str, node: str) -> stencil.Made:
    return f"R{name.lower()} {node} 0 {value}\n", (), ()  # not a plain concatenation


def test_fill_in_and_fall_back() -> None:
    stencils = stencil.Stencils()
    assert stencils.get("k", _concatenating, "1", ("A", "x")) == ("RA x 0 1\n", ("n_A",), ())
    assert stencils.get("k", _concatenating, "1", ("B", "0")) == ("RB 0 0 1\n", ("n_B",), ())
    # A maker that does more than put the names in place fails the check on first use and
    # is called directly from then on.
    assert stencils.get("f", _folding, "1", ("AB", "x")) == ("Rab x 0 1\n", (), ())
    assert stencils.get("f", _folding, "1", ("CD", "y")) == ("Rcd y 0 1\n", (), ())
    # Names that are not printable text (a placeholder could hide in them) are made directly.
    made = stencils.get("k", _concatenating, "1", ("\x02", "x"))
    assert made == ("R\x02 x 0 1\n", ("n_\x02",), ())


CORPUS = Path(__file__).parent / "decks"
EVERY_RESISTOR = (
    'schema = 1\n[part."R*"]\nmodel = "linear"\ntc1_ppm = 100\nrth = 50.0\ncth = 0.01\n'
)


def _emit_or_error(deck: Path, annotation: Path) -> str:
    try:
        return emit_files(str(deck), str(annotation), form="reference").text
    except HeatweaveError as err:
        return f"error: {err}"


@pytest.mark.parametrize(
    "name", sorted(p.name for p in CORPUS.iterdir() if p.suffix in (".cir", ".sp"))
)
def test_spliced_equals_rewritten(
    tmp_path: Path, name: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    shutil.copytree(CORPUS, tmp_path / "decks")
    deck = tmp_path / "decks" / name
    annotation = tmp_path / "every.thermal.toml"
    annotation.write_text(EVERY_RESISTOR)
    spliced = _emit_or_error(deck, annotation)
    monkeypatch.setattr(_Rewriter, "edits", lambda self, source: None)
    assert spliced == _emit_or_error(deck, annotation)


@pytest.mark.parametrize(
    "text",
    [
        "t\nRA1 a 0 1k\nRA2 a b 2k",  # the last card is a part, no final newline
        "t\nV1 a 0 1\nRA1 a 0 1k\n* last words",  # trailing comment, no .end
        "t\nRA1 a 0 1k\nC1 a 0 1n",  # no final newline after an untouched card
        "t\r\nRA1 a 0 1k\r\n.end\r\nRA2 a 0 1k\r\n",  # CRLF, a part after .end
        "t\nRA1 a 0 1k\n.END\n* after\n.end\n",  # two .end cards: the last one counts
        "t\n* lead\n\nRA1 a\n* between\n+ 0 1k\n.op\n.end\n",  # continued card
    ],
)
def test_spliced_equals_rewritten_at_the_edges(
    tmp_path: Path, text: str, monkeypatch: pytest.MonkeyPatch
) -> None:
    deck = tmp_path / "edge.cir"
    deck.write_bytes(text.encode())
    annotation = tmp_path / "edge.thermal.toml"
    annotation.write_text(EVERY_RESISTOR)
    spliced = _emit_or_error(deck, annotation)
    monkeypatch.setattr(_Rewriter, "edits", lambda self, source: None)
    assert spliced == _emit_or_error(deck, annotation)
    assert not spliced.startswith("error")


# --------------------------------------------------------------------------- names in place

PATTERNS = ["R*", "r?", "*", "X*", "*1", "C[0-9]*", "R[!0-9]*", ".*", "V1", "Q*.*"]


@pytest.mark.parametrize(
    "name", sorted(p.name for p in CORPUS.iterdir() if p.suffix in (".cir", ".sp"))
)
def test_globs_on_card_texts_equal_globs_on_names(name: str) -> None:
    # A flat deck's globs run over the cards' texts (DeckIndex.matching); the reference
    # is the same glob over the element paths, one to a line (globmatch.matching_paths).
    index = DeckIndex(load_project(str(CORPUS / name)))
    paths = index.element_paths()
    for pattern in PATTERNS:
        assert index.matching(pattern) == matching_paths(pattern, paths), pattern


@pytest.mark.parametrize(
    "text",
    [
        "t\nRA1 a 0 1k\n  rb2 a 0 1k\n.tran 1u 1m\nRA3 a 0 1k\n",  # texts path, a dot card cut
        "t\nRA1 a 0 1k ; note\nRA2 a 0 1k\n",  # an inline comment: names cut out first
        "t\nRA1;x a 0 1k\nRA2 a 0 1k\n",  # one inside a first field
        "t\nX1 a b cell\n.subckt cell p q\nRA1 p q 1k\n.ends\nRA2 a 0 1\n",  # instances
    ],
)
def test_globs_on_card_texts_at_the_edges(tmp_path: Path, text: str) -> None:
    deck = tmp_path / "edge.cir"
    deck.write_text(text)
    index = DeckIndex(load_project(str(deck)))
    paths = index.element_paths()
    for pattern in [*PATTERNS, "RA*", "RA1"]:
        assert index.matching(pattern) == matching_paths(pattern, paths), pattern
    assert [card.head for card in index.top.cards] == list(index.top.heads)
    assert (index.top.texts is None) == (";" in text)  # which of the two ways ran


# --------------------------------------------------------------------------- line endings

CELLS = 'schema = 1\n[part."X1.*"]\nmodel = "linear"\ntc1_ppm = 100\nrth = 50.0\n'
CRLF_DECKS = [
    # (deck, annotation)
    ("t\r\nV1 a 0 1\r\nRA1 a 0 1k\r\n.op\r\n.end\r\n", EVERY_RESISTOR),  # the plain case
    ("t\r\nV1 a 0 1\r\nRA1 a\r\n+ 0 1k\r\n.op\r\n.end\r\n", EVERY_RESISTOR),  # continued
    ("t\r\nV1 a 0 1\r\nRA1 a 0 1k", EVERY_RESISTOR),  # no .end, no final line ending
    (
        "t\r\nV1 a 0 1\r\nD1 a 0 dx\r\n.model dx D\r\n.end\r\n",
        "schema = 1\n[part.D1]\nrth = 80.0\n",
    ),
    (
        "t\r\nV1 a 0 1\r\nX1 a 0 cell\r\n.subckt cell p q\r\nRA1 p q 1k\r\n.ends cell\r\n.end\r\n",
        CELLS,
    ),
]


@pytest.mark.parametrize("form", list(FORMS))
@pytest.mark.parametrize(("text", "parts"), CRLF_DECKS)
@pytest.mark.parametrize("splice", [True, False])
def test_added_lines_follow_a_crlf_deck(
    tmp_path: Path,
    text: str,
    parts: str,
    form: str,
    splice: bool,
    monkeypatch: pytest.MonkeyPatch,
) -> None:
    # The deck's own line ending (that of its first line) for every line emit writes: a
    # file mixing two conventions is what editors and diff tools complain about.
    deck = tmp_path / "crlf.cir"
    deck.write_bytes(text.encode())
    annotation = tmp_path / "crlf.thermal.toml"
    annotation.write_text(parts)
    if not splice:
        monkeypatch.setattr(_Rewriter, "edits", lambda self, source: None)
    emitted = emit_files(str(deck), str(annotation), form=form).text
    assert "*hw*" in emitted
    body = emitted if emitted.endswith("\r\n") else emitted[: emitted.rfind("\n") + 1]
    assert body.count("\n") == body.count("\r\n") > text.count("\n")
    assert _unhashed(emitted.replace("\r\n", "\n")) == _unhashed(
        _emit_lf(tmp_path, text, parts, form)
    )


def _unhashed(emitted: str) -> str:
    """An emitted deck without the header line holding the source deck's hash."""
    return "".join(
        line for line in emitted.splitlines(keepends=True) if not line.startswith("* source deck:")
    )


def _emit_lf(tmp_path: Path, text: str, parts: str, form: str) -> str:
    """The same deck with LF line endings, emitted: the reference apart from line endings
    (the header's hash of the deck aside, which differs with the bytes)."""
    deck = tmp_path / "lf" / "crlf.cir"
    deck.parent.mkdir()
    deck.write_bytes(text.replace("\r\n", "\n").encode())
    annotation = deck.with_suffix(".thermal.toml")
    annotation.write_text(parts)
    return emit_files(str(deck), str(annotation), form=form).text
