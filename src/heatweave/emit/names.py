"""Every name heatweave adds to a deck, by kind and by scope: the one list of its own names.

The electrothermal deck adds nodes, elements, ``.model`` cards and specialised subcircuit
copies, all marked with :data:`~heatweave.thermal.circuit.PREFIX`; the diagnosis decks of a
run (the runaway continuation, the steady-state scan, ``settle``'s held resistors) add a few
more.  Two ends read this list, so neither needs a pattern:

* the collision check (:func:`heatweave.emit.sections.check_names`) refuses a deck that
  already uses one of these names: a node ``hw_amb`` would be shorted to the ambient source,
  an element ``Bhw_p_r1`` would clash with the part's heat source;
* a run's results (:func:`heatweave.run.results.extract`) leave out exactly the vectors of
  these names (:func:`own_vectors`), and keep every vector of the deck's own, also those
  that merely look alike (``thw_1``, ``x1.hw_out``).

The element names are read off the lines the card forms and the thermal section write, so
this list cannot drift from what the emitter writes.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from heatweave.emit.forms import (
    added_branches,
    added_nodes,
    preamble,
    resistor_cards,
    shared_nodes,
)
from heatweave.emit.sections import thermal_section
from heatweave.errors import EmitError
from heatweave.spice.cardparts import x_card_parts
from heatweave.spice.deck import Deck
from heatweave.spice.hierarchy import DeckIndex, device_name, global_names, top_level_node
from heatweave.thermal.circuit import AMBIENT_NODE, PREFIX, PartPlan, ThermalCircuit, safe

#: The runaway continuation's drive: a node, its source (``run.runaway``).
DRIVE_NODE = f"{PREFIX}drive"
DRIVE_SOURCE = f"V{PREFIX}drive"
#: How many parts the steady-state scan (``run.states``) holds at once, at most.
HELD_AT_ONCE = 2


@dataclass(frozen=True, slots=True)
class Hold:
    """The names with which the steady-state scan holds its *k*-th part: a source on the
    hot spot, a behavioural source giving the temperature from a swept index, the index's
    source, and their two nodes."""

    source: str
    value: str
    index: str
    between: str
    swept: str


def hold(k: int) -> Hold:
    """The names of the *k*-th held part (``k < HELD_AT_ONCE``)."""
    return Hold(f"V{PREFIX}hold{k}", f"B{PREFIX}hold{k}", f"V{PREFIX}hs{k}", f"{PREFIX}hx{k}",
                f"{PREFIX}hs{k}")  # fmt: skip


def fix_source(k: int) -> str:
    """The source the runaway diagnosis holds its *k*-th part's hot spot with."""
    return f"V{PREFIX}fix_{k}"


def power_source(part: PartPlan) -> str:
    """The behavioural source injecting *part*'s dissipation into its hot spot."""
    return f"B{PREFIX}p_{part.name}"


def current_source(part: PartPlan) -> str:
    """The behavioural source carrying resistor *part*'s current in the reference form
    (``Bhw_<name> a b I = V(a,b)/(R(T))``): the first card that form writes for it."""
    assert part.model is not None
    cards = resistor_cards("reference", part.name, "a", "b", part.node, part.model, False)
    return _heads(cards)[0]


def held_resistor(part: PartPlan) -> str:
    """The plain resistor ``settle`` writes for *part* at a fixed temperature."""
    return f"R{PREFIX}fix_{safe(part.path)}"


def copy_name(subckt: str, path: str) -> str:
    """The name of the copy of *subckt* specialised for instance path *path*."""
    return f"{subckt}__{PREFIX}{safe(path)}"


@dataclass(frozen=True, slots=True)
class PartNames:
    """The names one part adds inside its own scope (its card's body: the top level, or
    the specialised copy of its definition)."""

    part: PartPlan
    nodes: tuple[str, ...]  # a form's inner nodes, a heat-only part's sensed terminals
    sources: tuple[str, ...]  # elements with a branch current: current senses, code models


@dataclass(frozen=True, slots=True)
class AddedNames:
    """What the electrothermal deck of one circuit adds, written in one form."""

    global_nodes: tuple[str, ...]  # ambient, shared, hot spots, network and tref nodes
    global_sources: tuple[str, ...]  # the ambient source, the forms' tref sources
    parts: tuple[PartNames, ...]

    def local_nodes(self) -> list[str]:
        """Every node added inside a part's scope."""
        return [node for entry in self.parts for node in entry.nodes]


def added_names(circuit: ThermalCircuit, form: str, heating: bool) -> AddedNames:
    """The nodes and voltage sources the electrothermal deck of *circuit* adds (none when
    no part is annotated: the deck is then written back unchanged)."""
    if not circuit.parts:
        return AddedNames((), (), ())
    models = [p.model for p in circuit.parts if p.model is not None]
    tref = shared_nodes(form, models, heating)
    global_nodes = [AMBIENT_NODE, *(node.node for node in circuit.nodes), *tref]
    parts = []
    inner = _InnerNodes()
    for part in circuit.parts:
        global_nodes.append(part.node)
        global_nodes.extend(inner(part))
        if part.model is not None:
            local = added_nodes(form, part.name, part.model, heating)
            branches = added_branches(form, part.name, part.model, heating)
            parts.append(PartNames(part, tuple(n for n in local if n not in tref), branches))
        else:
            sensed = range(1, len(part.terminals))
            nodes = tuple(f"{PREFIX}s_{part.name}_{k}" for k in sensed)
            parts.append(PartNames(part, nodes, tuple(f"V{n}" for n in nodes)))
    sources = [f"V{AMBIENT_NODE}", *_heads(preamble(form, models, heating))]
    return AddedNames(tuple(global_nodes), tuple(s for s in sources if s[:1] in "Vv"),
                      tuple(parts))  # fmt: skip


class _InnerNodes:
    """A part's network's inner nodes (``prefix + suffix``, :class:`~heatweave.networks.
    base.Realisation`), the suffixes realised once per network object: parts of one table
    share theirs."""

    def __init__(self) -> None:
        self.suffixes: dict[int, tuple[str, ...]] = {}

    def __call__(self, part: PartPlan) -> list[str]:
        found = self.suffixes.get(id(part.network))
        if found is None:
            nodes = part.network.elements("\0", "\1", "\2", "0").nodes
            found = self.suffixes[id(part.network)] = tuple(n[1:] for n in nodes)
        prefix = f"{PREFIX}{part.name}_"
        return [prefix + suffix for suffix in found]


def own_vectors(index: DeckIndex, names: AddedNames) -> frozenset[str]:
    """The vectors of heatweave's own nodes and sources in a plot of the emitted deck,
    named as :mod:`heatweave.simulators.naming` names them (``v(x1.hw_x_x1_r4)``)."""
    found = {f"v({n.lower()})" for n in names.global_nodes}
    found.update(f"i({s.lower()})" for s in names.global_sources)
    globals_: set[str] | None = None
    for entry in names.parts:
        resolved = entry.part.resolved or index.resolve(entry.part.path)
        if resolved is None:
            continue
        if not resolved.instances:  # a top-level card: its names are the plot's
            found.update(f"v({n.lower()})" for n in entry.nodes)
            found.update(f"i({s.lower()})" for s in entry.sources)
            continue
        if globals_ is None:
            globals_ = global_names(index) | {n.lower() for n in names.global_nodes}
        found.update(f"v({top_level_node(resolved, n, globals_)})" for n in entry.nodes)
        found.update(f"i({device_name(resolved, s)})" for s in entry.sources)
    return frozenset(found)


@dataclass(frozen=True, slots=True)
class Reserved:
    """Every name a deck must not use already, in lower case, by kind."""

    nodes: frozenset[str]
    elements: frozenset[str]
    definitions: frozenset[str]  # .model names and subcircuit copies


def reserved(index: DeckIndex, circuit: ThermalCircuit, form: str, heating: bool) -> Reserved:
    """The names the electrothermal deck of *circuit* (and a run's diagnosis decks) add."""
    names = added_names(circuit, form, heating)
    holds = [hold(k) for k in range(HELD_AT_ONCE)]
    nodes = {*names.global_nodes, *names.local_nodes(), DRIVE_NODE}
    nodes.update(n for h in holds for n in (h.between, h.swept))
    elements = {DRIVE_SOURCE, *names.global_sources}
    elements.update(e for h in holds for e in (h.source, h.value, h.index))
    elements.update(fix_source(k) for k in range(len(circuit.parts)))
    models = [p.model for p in circuit.parts if p.model is not None]
    section = thermal_section(circuit, [], False, form, [], heating).splitlines()
    elements.update(_heads(section))
    definitions = {_second(card) for card in preamble(form, models, heating)
                   if card.startswith(".model")}  # fmt: skip
    for entry in names.parts:
        part = entry.part
        elements.update(entry.sources)
        net = part.network.elements(f"{PREFIX}{part.name}_", part.node, part.to, "0")
        elements.update(element.name for element in net.elements)
        if part.model is not None:
            cards = resistor_cards(form, part.name, "a", "b", part.node, part.model, heating)
            elements.update(_heads(cards))
            elements.add(held_resistor(part))
        elif heating:
            elements.add(power_source(part))
        resolved = part.resolved or index.resolve(part.path)
        prefix = ""
        for instance in resolved.instances if resolved is not None else ():
            prefix = f"{prefix}.{instance.head}" if prefix else instance.head
            definitions.add(copy_name(x_card_parts(instance)[1], prefix))
    return Reserved(
        frozenset(n.lower() for n in nodes),
        frozenset(e.lower() for e in elements),
        frozenset(d.lower() for d in definitions),
    )


def _heads(lines: Iterable[str]) -> list[str]:
    """The element names of *lines* (their first words), comments and dot cards left out."""
    out = []
    for line in lines:
        word = line.split(maxsplit=1)[0] if line.strip() else ""
        if word[:1].isalpha():
            out.append(word)
    return out


def _second(card: str) -> str:
    """The name a dot card defines (``.model NAME ...``)."""
    words = card.split()
    return words[1] if len(words) > 1 else ""


def check_names(reserved_names: Reserved, folded: list[tuple[Deck, str, bool]]) -> None:
    """Every added name must be new: a deck already using one is an error at its card,
    never a silent short circuit or a clash of two elements.

    An element's own name is held against the element names added, every other word
    (nodes, model and subcircuit names) against the nodes and definitions.  Only cards
    whose text holds the marker can collide, so the files are searched for it first
    (*folded*: each file's deck and its text in lower case)."""
    for card in (c for deck, low, _t in folded if PREFIX in low for c in deck.cards()):
        if PREFIX not in card.text.lower():
            continue
        for k, field_text in enumerate(card.fields()):
            low = field_text.lower()
            if PREFIX not in low:
                continue
            if k == 0 and not card.is_dot:
                kind = "an element" if low in reserved_names.elements else ""
            elif low in reserved_names.nodes:
                kind = "a node"
            else:
                kind = "a model or subcircuit" if low in reserved_names.definitions else ""
            if kind:
                raise EmitError(
                    f"the deck already uses the name {field_text!r}, which heatweave reserves: "
                    f"it adds {kind} of that name",
                    card.location(),
                    hint="rename it: heatweave would join the two into one, or clash with it",
                )
