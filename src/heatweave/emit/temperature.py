"""The ambient is the temperature of the whole circuit, not only of the annotated parts.

ngspice evaluates every element without its own ``temp=`` at the circuit temperature, which
a ``.temp`` card sets (ngspice manual, ``.TEMP`` and ``.OPTIONS TEMP``).  The emitted deck
ends with ``.temp`` at the run's ambient, so a diode, a transistor or a resistor with
``tc1`` that carries no annotation sees the ambient heatweave reports.  Checked with
ngspice 39: the last ``.temp`` card of a deck wins, and a ``.temp`` card wins over
``.options temp=`` wherever each stands, so heatweave's card decides.

A deck's own ``.temp`` or ``.options temp=`` that disagrees with the run's ambient is
reported and overridden, never silently used.  ``tnom`` (the temperature the device models'
parameters were measured at) is no ambient: it is kept, and reported when it disagrees.
An ambient profile drives the thermal networks over time, but ``.temp`` holds one value
per run: the elements without a thermal network stay at the profile's value at t = 0.
"""

from __future__ import annotations

from collections.abc import Iterable

from heatweave.emit.splice import insert_before_end, line_ending
from heatweave.errors import Finding
from heatweave.quantities import format_number, parse_number
from heatweave.spice.deck import Card, Deck, iter_cards
from heatweave.spice.options import option_settings
from heatweave.spice.syntax import Param
from heatweave.thermal.circuit import ThermalCircuit

_KEYS = ("temp", "tnom")
#: Two temperatures this close (K) are the same setting written differently.
SAME = 1e-9


def circuit_temperature(circuit: ThermalCircuit) -> float:
    """The one temperature (degC) ngspice runs the elements without a thermal network at:
    the fixed ambient, or a profile's value at t = 0."""
    return float(circuit.ambient_at_start)


def temp_card(circuit: ThermalCircuit) -> str:
    """The ``.temp`` line that sets the circuit temperature to the run's ambient."""
    return f".temp {format_number(circuit_temperature(circuit))}"


def with_temp(deck: Deck, circuit: ThermalCircuit) -> Deck:
    """*deck* ending with :func:`temp_card` before its ``.end``: the plain deck a run with
    no thermal network (no annotated part, or the co-simulation's) hands ngspice."""
    eol = line_ending(deck)
    body = insert_before_end(list(deck.body), Card(temp_card(circuit) + eol), eol)
    return deck.with_body(tuple(body))


def no_parts_note(circuit: ThermalCircuit) -> Finding:
    """What a run of an annotation file that annotates no part does, said plainly."""
    return Finding(
        "note",
        "no annotated parts: the annotation file names no part of the deck, so nothing heats; "
        "the deck runs as written with the whole circuit at the ambient, "
        f"{format_number(circuit_temperature(circuit))} degC, and only its node values and "
        "currents are reported",
        None,
        "add a [part.NAME] table for each element whose self-heating you want to see",
    )


def temperature_findings(
    decks: Iterable[tuple[Deck, str]], circuit: ThermalCircuit
) -> list[Finding]:
    """What the user must hear about the circuit temperature: each ``.temp``, ``temp=`` or
    ``tnom=`` of the deck or its includes that disagrees with the run's ambient, and what
    an ambient profile cannot reach.  *decks* are each file's deck and its text in lower
    case (searched first, so a deck without such a card costs one scan)."""
    ambient = circuit_temperature(circuit)
    found: list[Finding] = []
    if isinstance(circuit.ambient, tuple):
        found.append(
            Finding(
                "note",
                "the ambient profile drives the annotated parts' thermal networks over time; "
                "ngspice's circuit temperature (.temp) holds one value per run, so every "
                "element without annotation (and the device models of heat-only parts) "
                f"stays at {format_number(ambient)} degC, the profile's value at t = 0",
                None,
                "sweep --ambient over the profile's span to see those elements at each temperature",
            )
        )
    for deck, low in decks:
        if ".temp" not in low and "temp" not in low and "tnom" not in low:
            continue
        # Options cards as ngspice 39 reads them (any name starting with .opt), in file
        # order with the .temp cards.
        settings: dict[int, list[Param]] = {}
        for card, param in option_settings(deck):
            if param.key.key in _KEYS:
                settings.setdefault(id(card), []).append(param)
        for card in iter_cards(deck.body):
            if card.name == ".temp":
                found.extend(_temp_card(card, ambient))
            elif id(card) in settings:
                found.extend(_option_card(card, settings[id(card)], ambient))
    return found


def _disagrees(text: str, ambient: float) -> bool:
    value = parse_number(text)
    return value is None or abs(value - ambient) > SAME


def _temp_card(card: Card, ambient: float) -> list[Finding]:
    fields = card.fields()[1:]
    written = " ".join(fields)
    if len(fields) == 1 and not _disagrees(fields[0], ambient):
        return []
    return [
        Finding(
            "warning",
            f"the deck's .temp {written} is not used: heatweave runs the whole circuit at the "
            f"run's ambient, {format_number(ambient)} degC ([ambient] of the annotation file, "
            "or --ambient)",
            card.location(),
            "set the temperature you mean in [ambient] or with --ambient, and delete this card",
        )
    ]


def _option_card(card: Card, params: list[Param], ambient: float) -> list[Finding]:
    out = []
    logical = card.logical().text
    for param in params:
        key = param.key.key
        value = logical[param.value.offset : param.value.end]
        if not _disagrees(value, ambient):
            continue
        where = card.location(param.offset)
        if key == "temp":
            out.append(
                Finding(
                    "warning",
                    f"the deck's temp={value} is not used: heatweave runs the whole circuit at "
                    f"the run's ambient, {format_number(ambient)} degC ([ambient] of the "
                    "annotation file, or --ambient)",
                    where,
                    "set the temperature you mean in [ambient] or with --ambient, and delete "
                    "temp= from this card",
                )
            )
        else:
            out.append(
                Finding(
                    "warning",
                    f"the deck's tnom={value} is kept: it is the temperature its device "
                    "models' parameters were measured at, not the circuit's; the circuit runs "
                    f"at the run's ambient, {format_number(ambient)} degC",
                    where,
                    "delete tnom= if it was meant as the ambient; set that in [ambient] or "
                    "with --ambient",
                )
            )
    return out
