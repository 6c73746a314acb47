"""Glob patterns over many names at once: the same answers as Python's fnmatch.

The reference is the standard library's ``fnmatch.fnmatchcase`` (Python 3.11 docs,
"fnmatch - Unix filename pattern matching"): every pattern and name list below, and every
one Hypothesis draws, must give the positions that calling it on each name gives.
"""

from __future__ import annotations

import fnmatch
import re

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from heatweave.spice.deck import Card
from heatweave.spice.globmatch import glob_regex, matching, matching_heads


def _reference(pattern: str, names: list[str]) -> list[int]:
    return [k for k, name in enumerate(names) if fnmatch.fnmatchcase(name, pattern)]


NAMES = ["RS1", "RS10", "R1", "RSENSE", "X1.R2", "X1.X3.R4", "C1", "R[1]", "R-2", "R!3", "R^4",
         "R\\5", "R&6", "R|7", "R~8", "r9", "RA", "RB"]  # fmt: skip


@pytest.mark.parametrize(
    "pattern",
    [
        "RS*", "R?", "*", "**", "X1.*", "X1.*.R4", "R[12]*", "R[!S]*", "R[A-B]", "R[B-A]",
        "R[]]", "R[!]]*", "R[", "R[-]*", "R[!-]*", "R[^]*", "R[\\]*", "R[&]*", "R[|~]*",
        "R[!!]*", "*[0-9]", "R*1", "?S*", "R[a-z]", "", "RS1", "R.2", "X1.?2",
    ],
)  # fmt: skip
def test_matches_as_fnmatch(pattern: str) -> None:
    assert matching(pattern, "\n".join(NAMES)) == _reference(pattern, NAMES)


def test_a_match_never_spans_two_names() -> None:
    # "*" stops at a line end: "R*1" must not run from "R" on one line to "1" on the next.
    assert matching("R*1", "RA\nB1") == []
    assert matching("R[!x]B", "R\nB") == []
    assert re.fullmatch(glob_regex("R*"), "R\nX") is None


def test_no_names() -> None:
    assert matching("*", "") == []


_ALPHABET = "ab-]![^\\*?&~|z."


@settings(max_examples=400, deadline=None)
@given(
    st.text(alphabet=_ALPHABET, max_size=8),
    st.lists(st.text(alphabet=_ALPHABET.replace("*", "").replace("?", ""), min_size=1,
                     max_size=5), max_size=8),
)  # fmt: skip
def test_property_same_as_fnmatch(pattern: str, names: list[str]) -> None:
    assert matching(pattern, "\n".join(names)) == _reference(pattern, names)


# --------------------------------------------------------------------------- over cards

CARDS = ["RS1 a b 1k\n", "  RS10\ta b 2k\n", "R1,a,b\n", "RSENSE=1\n", "RS(1) a\n",
         "R[1] x y 3\n", "R 1\n", "RS1\n", ".tran 1u 1m\n", "RS2 a b 1k\n+ tc1=1e-3\n",
         "RS3\r\n", "RS", "rs4 a b 1\n"]  # fmt: skip


def _reference_heads(pattern: str, cards: list[str]) -> list[int]:
    return _reference(pattern, [Card(text).head for text in cards])


@pytest.mark.parametrize(
    "pattern",
    ["RS*", "RS?", "*", "RS1", "R[[]1]", "R*1", "R", "", "R[ ,]1", "R[!S]*", "?S*", ".*",
     "RS[0-9]", "RS[!0-9]*", "*1*"],
)  # fmt: skip
def test_first_fields_match_as_fnmatch_on_card_heads(pattern: str) -> None:
    # fnmatchcase on each card's first field (Card.head) is the reference.
    joined = "".join("\x00" + text for text in CARDS)
    assert matching_heads(pattern, joined) == _reference_heads(pattern, CARDS)


def test_a_field_match_never_runs_past_its_field() -> None:
    assert matching_heads("RS*b*", "\x00RS1 a b 1k\n") == []
    assert matching_heads("R*1", "\x00RA\x00B1\n") == []


_CARD_ALPHABET = "ab-]![^\\?&~|z. ,=()\t\n"


@settings(max_examples=400, deadline=None)
@given(
    st.text(alphabet=_ALPHABET + " ,(", max_size=8),
    st.lists(st.text(alphabet=_CARD_ALPHABET, min_size=1, max_size=8), max_size=8),
)  # fmt: skip
def test_property_fields_same_as_fnmatch(pattern: str, cards: list[str]) -> None:
    joined = "".join("\x00" + text for text in cards)
    assert matching_heads(pattern, joined) == _reference_heads(pattern, cards)
