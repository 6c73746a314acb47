"""Cards ngspice 39 would read otherwise than they are written: bytes outside ASCII.

ngspice 39 turns every byte above 127 of a card into ``_`` as it reads the deck: a node
``eingäng`` (UTF-8 ``c3 a4`` for the umlaut) becomes ``eing__ng``, and so does ``eingöng``.
Two nodes the user wrote differently would then be one, silently, and heatweave would look
for vectors ngspice never made.  Such cards are refused at the first such character;
comments may hold anything.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator

from heatweave.errors import Finding
from heatweave.files import encode
from heatweave.spice.deck import Card, strip_inline_comment


def as_ngspice_reads(word: str) -> str:
    """*word* as ngspice 39 reads it: every byte above 127 becomes ``_``."""
    return "".join(chr(b) if b < 128 else "_" for b in encode(word))


def non_ascii(cards: Iterable[Card]) -> Iterator[Finding]:
    """An error at the first character outside ASCII of each card (comments aside)."""
    for card in cards:
        text = strip_inline_comment(card.logical().text)
        if text.isascii():
            continue
        at = next(k for k, ch in enumerate(text) if not ch.isascii())
        start = max(text.rfind(" ", 0, at), text.rfind("\t", 0, at)) + 1
        end = len(text)
        for stop in (" ", "\t", "=", "(", ")", ","):
            found = text.find(stop, at)
            if found >= 0:
                end = min(end, found)
        word = text[start:end]
        yield Finding(
            "error",
            f"{word!r} holds characters outside ASCII, which ngspice 39 reads as '_' "
            f"({as_ngspice_reads(word)!r}), so names written differently can become one",
            card.location(at),
            "write names and values in ASCII letters, digits and _ (comments may hold any)",
        )
