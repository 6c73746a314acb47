"""Where the annotated parts stand, and the parts the emitter cannot rewrite there.

The checks run before any card is written, so a run by another method (the
co-simulation, which emits nothing) refuses the same decks as the electrothermal deck.
"""

from __future__ import annotations

import re

from heatweave.emit.names import added_names, check_names, reserved
from heatweave.errors import EmitError
from heatweave.spice.cardparts import x_card_parts
from heatweave.spice.deck import Card, Deck
from heatweave.spice.hierarchy import DeckIndex, Resolved
from heatweave.thermal.circuit import PREFIX, PartPlan, ThermalCircuit


def placed(index: DeckIndex, part: PartPlan) -> Resolved:
    """Where *part* stands in the deck; an error for a part the emitter cannot rewrite
    there: one missing, or a top-level card of an included file."""
    found = part.resolved or index.resolve(part.path)
    if found is None:
        raise EmitError(f"part {part.path!r} is not in the deck", part.location)
    if not found.instances and found.card.source is not index.project.deck.source:
        where = found.card.source.path if found.card.source else "an included file"
        raise EmitError(
            f"{part.path} is defined in an included file ({where})",
            part.location,
            hint="heatweave leaves included files untouched: move the card into the "
            "deck, or into a subcircuit definition (those are specialised in the deck)",
        )
    return found


def refuse_unplaced(index: DeckIndex, circuit: ThermalCircuit) -> None:
    """The errors emitting *circuit* would raise about where its parts stand
    (:func:`placed`, a multiplied instance above a part), without emitting: a run by
    another method refuses the same decks as the electrothermal deck."""
    for part in circuit.parts:
        for instance in placed(index, part).instances:
            refuse_multiplier(instance, part)


MULTIPLIER = re.compile(r"(?i)(?<=[\s,)])m\s*=")


def refuse_multiplier(instance: Card, part: PartPlan) -> None:
    """An ``X`` card with ``m=`` above a part is an error: ngspice pushes the multiplier
    into the definition's R, C, D, ... but not into behavioural or code-model sources
    (manual 3.2.1), so the replaced resistor would lose it and the part's thermal network
    would gain it."""
    _nodes, _sub, params = x_card_parts(instance)
    if not any(f.lower() == "m" and params[i + 1 : i + 2] == ["="] for i, f in enumerate(params)):
        return
    found = MULTIPLIER.search(instance.logical().text)
    raise EmitError(
        f"{instance.head} multiplies its subcircuit (m=), which holds the annotated part "
        f"{part.path}",
        instance.location(found.start() if found else 0),
        hint="write the multiplier on the resistor card inside (m= there sets its nominal "
        "value), or place one instance per physical part",
    )


def reserved_nodes(circuit: ThermalCircuit, form: str, heating: bool = True) -> list[str]:
    """Every node name the electrothermal deck of *circuit* adds (written in *form*): the
    ambient source's, the shared nodes, and per part its hot spot, its network's inner
    nodes, and its form's nodes (a resistor) or current-sense nodes (a heat-only part)."""
    names = added_names(circuit, form, heating)
    return [*names.global_nodes, *names.local_nodes()]


def refuse_reserved(
    index: DeckIndex,
    circuit: ThermalCircuit,
    folded: list[tuple[Deck, str, bool]],
    form: str = "reference",
    heating: bool = True,
) -> None:
    """An error for a deck that already uses a name the electrothermal deck adds, whatever
    method runs it: the co-simulation writes none of them but refuses the same decks, so a
    deck's answer never depends on the method.  *folded* is each file's deck and its text in
    lower case (:func:`heatweave.emit.sections.folded_files`); a deck without the reserved
    marker anywhere costs one search of it."""
    if any(PREFIX in low for _deck, low, _title in folded):
        check_names(reserved(index, circuit, form, heating), folded)
