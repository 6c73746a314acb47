"""The deck's only independent source, when dissipation scales with its square.

For a deck of linear elements with one independent source every current and voltage is
proportional to that source, so every dissipation is proportional to its square: the
runaway diagnosis (:mod:`heatweave.run.runaway`) then turns the critical share of the full
dissipation into the source's critical value.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from heatweave.quantities import parse_number
from heatweave.spice.deck import Card

if TYPE_CHECKING:
    from heatweave.spice.hierarchy import DeckIndex

LINEAR_LETTERS = frozenset("RCLKVI")
# Controlled sources with a plain gain: E/G name n+ n- nc+ nc- gain, F/H name n+ n- vname gain.
CONTROLLED_FIELDS = {"E": 6, "G": 6, "F": 5, "H": 5}


def single_source(index: DeckIndex) -> tuple[str, float] | None:
    """The deck's only independent source and its DC value, when every element is linear
    (R, C, L, K, V, I, and E, F, G, H with a plain gain): then dissipation scales with the
    square of that source."""
    sources = []
    for path in index.element_paths():
        resolved = index.resolve(path)
        if resolved is None:
            return None
        letter = resolved.card.head[:1].upper()
        if letter not in LINEAR_LETTERS and not linear_controlled(resolved.card):
            return None
        if resolved.card.head[:1].upper() in "VI":
            sources.append(resolved.card)
    if len(sources) != 1:
        return None
    fields = sources[0].fields()[3:]
    if fields and fields[0].lower() == "dc":
        fields = fields[1:]
    value = source_value(index, fields[0]) if fields else None
    return None if value is None else (sources[0].head, value)


def source_value(index: DeckIndex, text: str) -> float | None:
    """A source's written value: a number, or ``{name}`` of a top-level ``.param`` that
    assigns a plain number (the last such card wins, as in ngspice)."""
    value = parse_number(text)
    if value is not None or not (text.startswith("{") and text.endswith("}")):
        return value
    name = text[1:-1].strip().lower()
    for node in index.project.deck.body:
        if isinstance(node, Card) and node.name == ".param":
            fields = node.fields()
            for i in range(1, len(fields) - 2):
                if fields[i].lower() == name and fields[i + 1] == "=":
                    value = parse_number(fields[i + 2])
    return value


def linear_controlled(card: Card) -> bool:
    """True for a controlled source written with a plain numeric gain (no POLY, VALUE,
    TABLE or parameter expression)."""
    fields = card.fields()
    count = CONTROLLED_FIELDS.get(card.head[:1].upper())
    return count is not None and len(fields) == count and parse_number(fields[-1]) is not None
