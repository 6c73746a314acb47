"""``r=`` and ``td=`` of independent sources, as ngspice 39 takes them (manual 4.1.4).

Held against ngspice 39.3 (tests/test_lint_pwl_repeat.py runs it on every form): a V
source's ``PWL(...) r=R`` repeats from R, which must equal one of its times as ngspice reads
the numbers (:func:`heatweave.quantities.ngspice_double`: ``0.3m`` and ``300u`` differ) and
lie before the last one; R equal to the last time is a repeat of zero length, on which the
transient never finishes; a negative R holds the last value.  A current source takes
neither ``r=`` nor ``td=`` ("unknown parameter"), whatever its function.  Written inside the
parentheses or after them, the last one on the card wins.
"""

from __future__ import annotations

from collections.abc import Iterable, Iterator

from heatweave.errors import DeckSyntaxError, Finding
from heatweave.quantities import ngspice_double
from heatweave.spice.deck import Card
from heatweave.spice.grammar import syntax_of
from heatweave.spice.syntax import ElementSyntax, Field, Param, Value, ValueKind

_KEYS = ("r", "td")


def source_option_errors(cards: Iterable[Card]) -> Iterator[Finding]:
    """Each ``r=``/``td=`` of a V or I card that ngspice 39 refuses or never finishes, as a
    located error at its key."""
    for card in cards:
        if card.letter.upper() not in ("V", "I"):
            continue
        if "=" not in card.logical().text:
            continue  # no key=value at all: nothing to check
        try:
            syntax = syntax_of(card)
        except DeckSyntaxError:
            continue  # the grammar's finding
        if isinstance(syntax, ElementSyntax):
            yield from _card_errors(card, syntax)


def _card_errors(card: Card, syntax: ElementSyntax) -> Iterator[Finding]:
    function = syntax.source(card.logical().text).function
    inside = function.params if function is not None else ()
    given = sorted((p for p in (*inside, *syntax.params) if p.key.key in _KEYS),
                   key=lambda p: p.key.offset)  # fmt: skip
    if not given:
        return
    name = syntax.name.text
    if card.letter.upper() == "I":
        for key in dict.fromkeys(p.key.key for p in given):
            last = [p for p in given if p.key.key == key][-1]
            yield Finding(
                "error",
                f"{name}: a current source takes no {key}= (ngspice 39 stops on it as an "
                "unknown parameter)",
                card.location(last.key.offset),
                "write the waveform out in full, or give the PWL to a voltage source and "
                "drive a G source from it, e.g. G1 0 a vctl 0 1",
            )
        return
    repeats = [p for p in given if p.key.key == "r"]
    if repeats and function is not None and function.name.key == "pwl":
        found = _repeat_error(name, repeats[-1], function.args)
        if found is not None:
            message, hint = found
            yield Finding("error", message, card.location(repeats[-1].key.offset), hint)


def _repeat_error(name: str, repeat: Param, args: tuple[Field, ...]) -> tuple[str, str] | None:
    """Why ngspice 39 refuses (or never finishes) a PWL repeating from *repeat*, if it does;
    ``None`` when it runs, or when a value is not a plain number heatweave can read."""
    value = _plain(repeat.value)
    read = [_plain(arg) for arg in args[0::2]]
    times = [t for t in read if t is not None]
    if value is None or not times or len(times) < len(read) or value < 0:
        return None
    assert isinstance(repeat.value, Value)  # _plain read it
    said = f"{name}'s PWL repeats from r={repeat.value.text}"
    last = times[-1]
    if value > last:
        return (f"{said}, after its last time point: ngspice 39 stops on it",
                "repeat from one of the PWL's times, or r=-1 to hold the last value")  # fmt: skip
    if value == last:
        return (f"{said}, its last time point: a repeat of no length, on which ngspice 39 "
                "never finishes the transient",
                "repeat from an earlier time point, or drop r= to hold the last value")  # fmt: skip
    if value not in times:
        return (f"{said}, which is not one of its time points as ngspice 39 reads them: it "
                "stops on it",
                "write r= exactly as that time is written in the PWL (ngspice reads 0.3m and "
                "300u as different numbers)")  # fmt: skip
    return None


def _plain(field: Field) -> float | None:
    if isinstance(field, Value) and field.kind is ValueKind.NUMBER:
        return ngspice_double(field.text)
    return None
