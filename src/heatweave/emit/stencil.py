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

import operator
import re
from collections.abc import Callable, Hashable
from dataclasses import dataclass

#: What a maker returns: the text, and groups of names it adds (nodes, thermal nodes).
Made = tuple[str, tuple[str, ...], tuple[str, ...]]
Maker = Callable[..., Made]

_SLOTS = tuple(chr(c) for c in range(1, 9))
_UNCHECKED = object()
_FIELD = re.compile("[\x01-\x08]")


@dataclass(frozen=True, slots=True)
class _Piece:
    """One text with placeholders as a printf-style template, and the getter that picks
    the values in the order the placeholders occur (one C-level call each to fill in);
    a text that is one placeholder alone is that value (*whole*, its index)."""

    template: str
    pick: Callable[[tuple[str, ...]], object] | None
    whole: int = -1

    @classmethod
    def of(cls, text: str) -> _Piece:
        order = [ord(m.group(0)) - 1 for m in _FIELD.finditer(text)]
        if len(text) == 1 and order:
            return cls(text, None, order[0])
        template = _FIELD.sub("%s", text.replace("%", "%%"))
        return cls(template, operator.itemgetter(*order) if order else None)

    def fill(self, values: tuple[str, ...]) -> str:
        if self.whole >= 0:
            return values[self.whole]
        if self.pick is None:
            return self.template % ()
        return self.template % self.pick(values)


@dataclass(frozen=True, slots=True)
class _Stencil:
    text: _Piece
    first: tuple[_Piece, ...]
    second: tuple[_Piece, ...]

    def fill(self, values: tuple[str, ...]) -> Made:
        return (
            self.text.fill(values),
            tuple([p.fill(values) for p in self.first]),
            tuple([p.fill(values) for p in self.second]),
        )


def _stencil(made: Made) -> _Stencil:
    text, first, second = made
    return _Stencil(
        _Piece.of(text), tuple(map(_Piece.of, first)), tuple(map(_Piece.of, second))
    )


class Stencils:
    """Stencils by key, each checked on its first use."""

    def __init__(self) -> None:
        self._made: dict[Hashable, _Stencil | object | None] = {}

    def get(self, key: Hashable, make: Maker, payload: object, values: tuple[str, ...]) -> Made:
        """What ``make(payload, *values)`` returns, for *values* the part's names and nodes
        (at most eight): filled in from the stencil of *key* where its check passed.  The
        key must stand for everything of *payload* that *make* reads."""
        stencil = self._made.get(key, _UNCHECKED)
        if type(stencil) is _Stencil and "".join(values).isprintable():
            return stencil.fill(values)
        if stencil is not _UNCHECKED or len(values) > len(_SLOTS):
            return make(payload, *values)
        direct = make(payload, *values)
        if "".join(values).isprintable():
            made = _stencil(make(payload, *_SLOTS[: len(values)]))
            self._made[key] = made if made.fill(values) == direct else None
        return direct
