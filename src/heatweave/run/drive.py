"""The period of a deck's drive: what a result's ``power`` is averaged over.

``power`` means the same in every method: the mean dissipation over the last period of the
deck's periodic sources, or the final value when none is periodic (all DC, or a single
pulse that has ended).  The periodic independent sources are ``SIN(vo va freq ...)``
(period 1/freq), ``PULSE(v1 v2 td tr tf pw per)`` with a period, and ``SFFM``/``AM``
(their slowest frequency).  Several periods share the smallest common multiple, looked
for up to :data:`MAX_MULTIPLE` times the slowest; without one the slowest is used and
:func:`period_note` says so.
"""

from __future__ import annotations

import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from heatweave.errors import Finding
from heatweave.quantities import format_number, parse_number
from heatweave.spice.hierarchy import DeckIndex

_PERIODIC = re.compile(r"\b(sin|pulse|sffm|am)\s*\(([^)]*)\)", re.IGNORECASE)
#: The common period is looked for among this many multiples of the slowest period.
MAX_MULTIPLE = 64
#: Relative tolerance of "a period divides the common one".
DIVIDES = 1e-6


@dataclass(frozen=True, slots=True)
class Drive:
    """The periods of a deck's periodic sources and the one results average over."""

    periods: tuple[float, ...]
    period: float | None
    common: bool  # the period is a multiple of every source's period


def numbers(words: Iterable[str]) -> list[float] | None:
    """The words as numbers, or ``None`` if one is not a plain SPICE number."""
    out = []
    for word in words:
        value = parse_number(word)
        if value is None:
            return None
        out.append(value)
    return out


def source_functions(cards: Sequence[str]) -> Iterable[tuple[str, list[float]]]:
    """``(kind, values)`` of every SIN/PULSE/SFFM/AM of the independent sources in *cards*
    whose arguments are plain numbers."""
    for text in cards:
        if text[:1].lower() not in ("v", "i"):
            continue
        for match in _PERIODIC.finditer(text):
            values = numbers(match.group(2).replace(",", " ").split())
            if values is not None:
                yield match.group(1).lower(), values


def source_cards(index: DeckIndex) -> list[str]:
    """The logical text of every element card of the deck and its includes."""
    texts = [card.logical().text for card in index.project.deck.cards() if card.is_element]
    for include in index.project.includes:
        texts += [card.logical().text for card in include.deck.cards() if card.is_element]
    return texts


def period_of(kind: str, values: list[float]) -> float | None:
    """The period (s) of one source function, ``None`` when it does not repeat."""
    if kind == "sin":
        return 1.0 / values[2] if len(values) >= 3 and values[2] > 0 else None
    if kind == "pulse":
        return values[6] if len(values) >= 7 and values[6] > 0 else None
    freqs = [v for v in values[2:] if v > 0]
    return 1.0 / min(freqs) if freqs else None


def drive(cards: Sequence[str]) -> Drive:
    """The periods of the sources in *cards* and the period results average over."""
    found = sorted({p for kind, v in source_functions(cards) if (p := period_of(kind, v))})
    if not found:
        return Drive((), None, True)
    slowest = found[-1]
    for multiple in range(1, MAX_MULTIPLE + 1):
        common = slowest * multiple
        if all(abs(common / p - round(common / p)) <= DIVIDES * common / p for p in found):
            return Drive(tuple(found), common, True)
    return Drive(tuple(found), slowest, False)


def deck_drive(index: DeckIndex) -> Drive:
    """:func:`drive` of the deck's own source cards (includes too)."""
    return drive(source_cards(index))


def period_note(found: Drive, span: float | None) -> Finding | None:
    """A note when ``power`` cannot be the mean over one common period: no common multiple
    of the sources' periods, or a transient shorter than the period (*span*, s)."""
    if found.period is None:
        return None
    if not found.common:
        listed = ", ".join(format_number(p) for p in found.periods)
        return Finding(
            "note",
            f"the deck's periodic sources (periods {listed} s) share no common period within "
            f"{MAX_MULTIPLE} times the slowest: power is the mean over the slowest, "
            f"{format_number(found.period)} s",
            None,
        )
    if span is not None and span < found.period * (1 - DIVIDES):
        return Finding(
            "note",
            f"the transient saves {format_number(span)} s, less than the drive's period "
            f"{format_number(found.period)} s: power is the mean over the whole transient",
            None,
            "run the transient for at least one period",
        )
    return None
