"""Stencils: a part's emitted text made once per kind of part, then filled in per part.

A glob may annotate a hundred thousand resistors with one table; every part of it with
the same model and network gets the same cards up to its names and nodes.  A stencil
makes those cards once with placeholders in place of the names (control characters that
no deck name holds), checks on that first part that filling the placeholders in gives
exactly what making the cards directly gives, and from then on fills in instead of
making.  A key whose check fails, and any part whose names are not printable text, is
always made directly, so the output never depends on the shortcut.
"""

from __future__ import annotations

from collections.abc import Callable, Hashable

#: What a maker returns: the text, and groups of names it adds (nodes, thermal nodes).
Made = tuple[str, tuple[str, ...], tuple[str, ...]]
Maker = Callable[..., Made]

_SLOTS = tuple(chr(c) for c in range(1, 9))
_SEP = "\x0b"  # between the text and the names inside one stencil string
_UNCHECKED = object()


def _pack(made: Made, count: int) -> tuple[str, int] | None:
    """The made text and names as one format string, the placeholders as its fields."""
    text, first, second = made
    pieces = [text, *first, *second]
    if any(_SEP in piece for piece in pieces):
        return None
    packed = _SEP.join(pieces).replace("{", "{{").replace("}", "}}")
    for k, slot in enumerate(_SLOTS[:count]):
        packed = packed.replace(slot, "{%d}" % k)  # noqa: UP031 - a format field being made
    return packed, len(first)


def _fill(stencil: tuple[str, int], values: tuple[str, ...]) -> Made:
    packed, count = stencil
    pieces = packed.format(*values).split(_SEP)
    return pieces[0], tuple(pieces[1 : 1 + count]), tuple(pieces[1 + count :])


class Stencils:
    """Stencils by key, each checked on its first use."""

    def __init__(self) -> None:
        self._made: dict[Hashable, tuple[str, int] | object | None] = {}

    def get(self, key: Hashable, make: Maker, payload: object, values: tuple[str, ...]) -> Made:
        """What ``make(payload, *values)`` returns, for *values* the part's names and nodes
        (at most eight): filled in from the stencil of *key* where its check passed.  The
        key must stand for everything of *payload* that *make* reads."""
        if len(values) > len(_SLOTS) or not "".join(values).isprintable():
            return make(payload, *values)
        stencil = self._made.get(key, _UNCHECKED)
        if stencil is None:
            return make(payload, *values)
        if stencil is _UNCHECKED:
            direct = make(payload, *values)
            packed = _pack(make(payload, *_SLOTS[: len(values)]), len(values))
            ok = packed is not None and _fill(packed, values) == direct
            self._made[key] = packed if ok else None
            return direct
        return _fill(stencil, values)  # type: ignore[arg-type]  # a stencil, checked above
