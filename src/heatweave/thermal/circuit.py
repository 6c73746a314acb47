"""The thermal circuit of a deck: every heated part, shared node and coupling, with names.

This is the one description of the thermal side that every later stage reads: the emitter
turns it into netlist cards, the fast run path and ``settle`` assemble its linear network.
It is built from the bound annotation (:func:`heatweave.annotation.bind`) and the deck:
each part gets its temperature model (with the deck's value as nominal resistance), its
network form, and reserved node names.

Naming: every name heatweave adds starts with :data:`PREFIX` (``hw_``) after the element's
type letter, e.g. node ``hw_t_rsense`` (the hot spot of ``RSENSE``), ``hw_n_board`` (shared
node ``board``), ``hw_amb`` (ambient), elements ``Bhw_rsense``, ``Rhw_n_board``.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from heatweave.annotation import AMBIENT, Annotation, BoundPart, NetworkSpec, PartSpec
from heatweave.errors import AnnotationError, EmitError, Finding, Location
from heatweave.networks import NetworkError, NetworkForm, from_annotation
from heatweave.spice.deck import Card
from heatweave.spice.grammar import syntax_of
from heatweave.spice.hierarchy import DeckIndex, Resolved
from heatweave.spice.netlist import (
    card_nodes,
    resistor_value,
    scope_params,
    simple_resistor,
    top_funcs,
    top_params,
)
from heatweave.tempmodels.base import TempModel

PREFIX = "hw_"
AMBIENT_NODE = "hw_amb"

_UNSAFE = re.compile(r"[^a-z0-9_]")


def safe(text: str) -> str:
    """A path or node name as a lower-case fragment usable inside SPICE names."""
    low = text.lower().replace(".", "_")
    if low.isascii() and low.isidentifier():  # letters, digits, "_": nothing to replace
        return low
    return _UNSAFE.sub("_", low)


def hot_node(path: str) -> str:
    """The hot-spot node of the part at instance path *path*."""
    return f"{PREFIX}t_{safe(path)}"


def shared_node(name: str) -> str:
    """The netlist node of the annotation's ``[node.NAME]``."""
    return f"{PREFIX}n_{safe(name)}"


@dataclass(frozen=True, slots=True)
class PartPlan:
    """One heated part: a resistor with a temperature model, or a heat-only element."""

    path: str  # instance path as the deck spells it, e.g. "X2.R4"
    model_name: str | None  # annotation ``model``; None for heat-only parts
    model: TempModel | None
    network: NetworkForm
    to: str  # netlist node the network's cold end connects to
    to_label: str  # the annotation's name for it ("board", "ambient")
    power_rating: float | None
    tmax: float | None
    derating_knee: float
    location: Location | None
    nominal_resistance: float | None = None  # the deck's value (ohm), holding at tref
    terminals: tuple[str, ...] = ()  # the element's nodes as written on its card
    resolved: Resolved | None = field(default=None, compare=False, repr=False)
    name: str = field(init=False, compare=False)  # the path as a fragment of SPICE names
    node: str = field(init=False, compare=False)  # the part's hot-spot node

    def __post_init__(self) -> None:
        name = safe(self.path)
        object.__setattr__(self, "name", name)
        object.__setattr__(self, "node", f"{PREFIX}t_{name}")  # hot_node(path)

    @property
    def is_resistor(self) -> bool:
        """True when the part's own resistance depends on its temperature."""
        return self.model is not None


@dataclass(frozen=True, slots=True)
class SharedNode:
    """A shared thermal node (board area, heat sink): Rth and Cth to another node."""

    label: str
    rth: float
    cth: float
    to: str
    to_label: str

    @property
    def node(self) -> str:
        """The node's netlist name."""
        return shared_node(self.label)


@dataclass(frozen=True, slots=True)
class Coupling:
    """An extra thermal resistance between two nodes (``[[path]]``)."""

    a: str
    b: str
    rth: float
    labels: tuple[str, str]


@dataclass(frozen=True, slots=True)
class ThermalCircuit:
    """Everything the thermal side of one emitted deck holds."""

    ambient: float | tuple[tuple[float, float], ...]
    nodes: tuple[SharedNode, ...]
    parts: tuple[PartPlan, ...]
    couplings: tuple[Coupling, ...]
    start: str  # "cold" | "steady"

    @property
    def ambient_at_start(self) -> float:
        """Ambient temperature at t = 0 (degC)."""
        if isinstance(self.ambient, tuple):
            return self.ambient[0][1]
        return self.ambient

    def node_label(self, node: str) -> str:
        """The annotation's name of a netlist thermal node (for reports)."""
        if node == AMBIENT_NODE:
            return "ambient"
        for shared in self.nodes:
            if shared.node == node:
                return shared.label
        for part in self.parts:
            if part.node == node:
                return part.path
        return node


def build_circuit(
    annotation: Annotation,
    bound: tuple[BoundPart, ...],
    index: DeckIndex,
    ambient: float | None = None,
) -> tuple[ThermalCircuit, tuple[Finding, ...]]:
    """The thermal circuit of a bound annotation, with each resistor's model built from
    the deck's nominal value; also the warnings about card parameters set aside.
    *ambient* (degC) overrides the annotation's; every model must hold there too."""

    findings: list[Finding] = list(annotation.warnings)
    ambients = _ambients(annotation, ambient)
    params = top_params(index)
    funcs = top_funcs(index)

    def node_of(label: str) -> str:
        return AMBIENT_NODE if label == AMBIENT else shared_node(label)

    parts: list[PartPlan] = []
    # What all parts of one table share: its (immutable) network and the cold end's node.
    shared: dict[int, tuple[NetworkForm, str]] = {}
    models: dict[tuple[int, float], TempModel | None] = {}
    scoped: dict[tuple[int, ...], dict[str, float]] = {}  # parameters by instance chain
    for item in bound:
        spec = item.spec
        common = shared.get(id(spec))
        if common is None:
            try:
                network = from_annotation(spec.network.kind, _network_data(spec.network))
            except NetworkError as err:
                raise err.at(spec.location) from None
            common = shared[id(spec)] = (network, node_of(spec.to))
        network, to_node = common
        model = None
        nominal = None
        found = index.element_at(item.position, item.element)
        if found is None:
            raise AnnotationError(f"{item.element} is not in the deck", spec.location)
        card = found.card
        if index.places and id(card) in index.places:
            raise AnnotationError(
                f"{item.element} stands in a branch of an .if block whose condition "
                "heatweave cannot compute, so which of its cards ngspice keeps is unknown",
                spec.location,
                "give the condition's parameters values with .param at the top level "
                "(a condition on a subcircuit's own parameters is decided per instance)",
            )
        simple = simple_resistor(card) if item.kind == "R" else None
        if simple is None:
            syntax_of(card)  # a malformed card is reported where it stands
            terminals = tuple(card_nodes(card, index))
        else:
            terminals = (simple.group(1), simple.group(2))
        if spec.model is not None:
            seen = params
            if found.instances:  # inside subcircuits: their parameters count too
                chain = tuple(map(id, found.instances))
                if chain not in scoped:
                    scoped[chain] = scope_params(params, found, funcs)
                seen = scoped[chain]
            value = resistor_value(card, seen, simple, funcs)
            if value.model is not None and value.model[0].lower() not in index.models:
                _refuse_unknown_model(card, value.model)
            if value.notes:
                findings.extend(
                    Finding("warning", f"{item.element}: {note}", found.card.location())
                    for note in value.notes
                )
            nominal = value.ohms
            key = (id(spec), nominal)
            model = models.get(key)
            if model is None:  # parts of one table with equal values share their model
                model = models[key] = spec.temp_model(nominal)
                _check_model(model, spec, item.element, ambients)
        parts.append(
            PartPlan(
                item.element, spec.model, model, network, to_node, spec.to,
                spec.power_rating, spec.tmax, spec.derating_knee, spec.location, nominal,
                terminals, found,
            )
        )  # fmt: skip
    _check_distinct_nodes(annotation)
    _check_distinct_parts(parts)
    nodes = tuple(SharedNode(n.name, n.rth, n.cth, node_of(n.to), n.to) for n in annotation.nodes)
    couplings = tuple(
        Coupling(node_of(p.between[0]), node_of(p.between[1]), p.rth, p.between)
        for p in annotation.paths
    )
    held: float | tuple[tuple[float, float], ...] = annotation.ambient.temperature
    if ambient is not None:
        held = float(ambient)
    elif annotation.ambient.profile is not None:
        held = tuple(annotation.ambient.profile)
    if annotation.start == "steady":
        _check_steady_start(index)
    circuit = ThermalCircuit(held, nodes, tuple(parts), couplings, annotation.start)
    return circuit, tuple(findings)


def _refuse_unknown_model(card: Card, model: tuple[str, int]) -> None:
    """An annotated resistor naming a model no ``.model`` defines: ngspice 39 refuses the
    card ("unknown parameter"), so the value heatweave reads would be no circuit's."""
    name, at = model
    raise EmitError(
        f"{card.head} names the model {name!r}, which no .model card defines: ngspice 39 "
        f"refuses the card ('unknown parameter ({name.lower()})')",
        card.location(at),
        "a scale factor after a brace expression goes inside it ({2*1k}, not {2}k); or "
        f"define the model (.model {name} R)",
    )


def _check_distinct_nodes(annotation: Annotation) -> None:
    """Two ``[node]`` names that are one node in the deck (ngspice ignores case; other
    characters than letters, digits and ``_`` are written as ``_``) would merge two nodes."""
    seen: dict[str, str] = {}
    for node in annotation.nodes:
        spice = shared_node(node.name)
        first = seen.setdefault(spice, node.name)
        if first != node.name:
            raise AnnotationError(
                f"node {node.name!r} and node {first!r} would be one node in the deck "
                f"({spice}): ngspice reads names without regard to case, and heatweave "
                "writes characters other than letters, digits and '_' as '_'",
                node.location,
                "rename one of them so that the names differ in letters or digits",
            )


def _check_distinct_parts(parts: list[PartPlan]) -> None:
    """Two parts whose instance paths are one name in the deck (``X1.X2.R3`` and
    ``X1_X2.R3``) would share a hot spot and the names of their added cards."""
    seen: dict[str, str] = {}
    for part in parts:
        first = seen.setdefault(part.node, part.path)
        if first != part.path:
            raise AnnotationError(
                f"parts {first} and {part.path} would share one hot-spot node ({part.node}): "
                "heatweave writes the '.' of an instance path as '_'",
                part.location,
                "rename the subcircuit instance whose name holds '_' where the other path "
                "has a '.'",
            )


def _check_steady_start(index: DeckIndex) -> None:
    """A steady start is the operating point ngspice computes before a transient; under
    ``.tran ... uic`` it skips that (manual 15.3.10) and, with no ``.ic``, every thermal
    node would start at 0 V, 0 degC."""
    project = index.project
    for deck in (project.deck, *(include.deck for include in project.includes)):
        for card in deck.cards():
            if card.text.lstrip()[:5].lower() != ".tran":
                continue
            words = [word.lower() for word in card.fields()]
            if words[0] == ".tran" and "uic" in words[1:]:
                raise EmitError(
                    'start = "steady" needs the operating point, which .tran ... uic skips',
                    card.location(),
                    'remove uic from this .tran card, or write start = "cold" in the '
                    "annotation file",
                )


def _network_data(spec: NetworkSpec) -> object:
    """The tuples a network form's ``from_annotation`` takes."""
    if spec.kind == "single":
        return spec.stages[0]
    return spec.stages


def _ambients(annotation: Annotation, ambient: float | None) -> tuple[float, ...]:
    """Every ambient temperature the run sets (degC): the override, else the annotation's."""
    if ambient is not None:
        return (ambient,)
    if annotation.ambient.profile is not None:
        return tuple(t for _, t in annotation.ambient.profile)
    return (annotation.ambient.temperature,)


def _check_model(model: TempModel | None, spec: PartSpec, element: str,
                 ambients: tuple[float, ...]) -> None:  # fmt: skip
    """A located error when *model* has no physical value where the part starts: its
    ``tref`` outside the model's range, or a resistance at or below zero at an ambient."""
    if model is None:
        return
    found = model.valid_range
    if spec.tref is not None and found is not None and spec.tref not in found:
        raise AnnotationError(
            f"{element}: tref = {spec.tref:g} degC lies outside the {spec.model} model's "
            f"range, {found.describe()}",
            spec.location,
            "give the temperature at which the deck's value was measured, inside that range",
        )
    for ambient in ambients:
        ohms = float(model.resistance(ambient))
        if not (ohms > 0 and math.isfinite(ohms)):
            raise AnnotationError(
                f"{element}: its {spec.model} model gives {ohms:.4g} ohm at the ambient "
                f"({ambient:g} degC), not a resistance",
                spec.location,
                "check tref and the temperature coefficients: the formula must hold from "
                "the ambient to the hottest the part gets",
            )
