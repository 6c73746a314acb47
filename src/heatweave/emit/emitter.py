"""The emitter: a plain deck plus its thermal circuit becomes an electrothermal deck.

What it writes uses standard ngspice cards only (behavioural sources, resistors,
capacitors, voltage sources), so any ngspice 39 runs it as is:

* an annotated resistor ``R1 a b 1k`` becomes ``Bhw_r1 a b I = V(a,b)/(R(T))`` with R(T)
  from its temperature model, plus ``Bhw_p_r1 0 hw_t_r1 I = V(a,b)^2/(R(T))``: its
  dissipation as a heat flow into its hot-spot node ``hw_t_r1``;
* a heat-only element (diode, transistor, subcircuit instance) keeps its card, with
  zero-volt sense sources in series with all but its last terminal, and a behavioural
  source injecting ``sum (V(k) - V(last)) * I(k)`` into its hot-spot node;
* each part's thermal network (single stage, Foster, Cauer) joins the hot spot to its
  ``to`` node; shared nodes, ``[[path]]`` couplings and the ambient source follow at the end;
* a transient starts cold (``.ic`` of every thermal node at ambient) unless the annotation
  asks for ``start = "steady"``; ``.op`` gives the coupled steady state directly.

Parts inside subcircuit instances are handled by specialising the definition for that
instance path (a copy named ``<subckt>__hw_<path>``, placed beside the original), so two
instances of one definition never share a hot spot; thermal nodes are ``.global``.

Unannotated cards are untouched; each replaced card stays above its replacement as a
comment; the output is deterministic, so diffs of emitted decks stay small.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field, replace
from pathlib import Path

from heatweave.annotation import Annotation, BoundPart, bind, load
from heatweave.emit.forms import (
    added_nodes,
    resistor_cards,
    step_limit_options,
)
from heatweave.emit.names import copy_name
from heatweave.emit.placement import placed, refuse_multiplier, refuse_reserved
from heatweave.emit.sections import (
    EMITTED_HEADER,
    MARK,
    analyses,
    analysis_findings,
    folded_files,
    header,
    refuse_unwritable_names,
    thermal_section,
)
from heatweave.emit.splice import end_position, insert_before_end, line_ending, spliced
from heatweave.emit.stencil import Made, Stencils
from heatweave.emit.temperature import no_parts_note, temperature_findings, with_temp
from heatweave.errors import EmitError, Finding, InputError, Location
from heatweave.quantities import format_number
from heatweave.spice.cardparts import x_card_parts
from heatweave.spice.deck import Block, Card, ControlBlock, Deck, Node, SourceFile
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.netlist import positional_spans, rewrite_nodes
from heatweave.spice.project import Project, load_project
from heatweave.thermal.circuit import (
    AMBIENT_NODE,
    PREFIX,
    PartPlan,
    ThermalCircuit,
    build_circuit,
)


@dataclass(frozen=True, slots=True)
class Emitted:
    """An emitted deck: its text, the names it added, and what the user should hear."""

    text: str
    added_nodes: tuple[str, ...]
    findings: tuple[Finding, ...] = ()
    circuit: ThermalCircuit | None = None
    probes: dict[str, str] = field(default_factory=dict)
    form: str = "reference"  # how its resistors are written (:mod:`heatweave.emit.forms`)
    heating: bool = True  # False: every part held at ambient


class _Rewriter:
    """Rewrites bodies for one thermal circuit; keeps the bookkeeping of names and copies."""

    def __init__(
        self, index: DeckIndex, circuit: ThermalCircuit, form: str, heating: bool, eol: str = "\n"
    ) -> None:
        self.index = index
        self.eol = eol  # the deck's line ending, for every line written
        self.circuit = circuit
        self.form = form
        self.heating = heating
        self.findings: list[Finding] = []
        self.added: list[str] = []  # every node name added, for the collision check
        self.thermal: list[str] = []  # hot spots and network nodes, for .ic and .global
        # What to rewrite: by instance path prefix in lower case, then by id of the card (the
        # same card object stands in every instance of its definition).
        self.part_at: dict[str, dict[int, PartPlan]] = {}
        self.instance_at: dict[str, dict[int, str]] = {}
        # instance path prefix (lower) -> definition it needs a specialised copy of
        self.copies: dict[str, Block] = {}
        self.stencils = Stencils()
        self.top_cards: list[tuple[Card, PartPlan]] = []  # parts that are top-level cards
        top: dict[int, PartPlan] = {}
        self.part_at[""] = top
        self.top_in_order = True  # top-level parts come in file order (bind gives deck order)
        last = -1
        for part in circuit.parts:
            found = placed(index, part)
            if not found.instances:  # a top-level card: the common case
                card = found.card
                self.top_cards.append((card, part))
                top[id(card)] = part
                if card.offset < last:
                    self.top_in_order = False
                last = card.offset
                continue
            prefix = ""
            for instance, definition in zip(found.instances, found.definitions, strict=True):
                refuse_multiplier(instance, part)
                spelled = f"{prefix}.{instance.head}" if prefix else instance.head
                self.instance_at.setdefault(prefix.lower(), {})[id(instance)] = spelled
                prefix = spelled
                self.copies[prefix.lower()] = definition
            self.part_at.setdefault(prefix.lower(), {})[id(found.card)] = part
        self.placed: set[str] = set()

    # -- bodies -------------------------------------------------------------------------

    def edits(self, source: SourceFile) -> list[tuple[int, int, str]] | None:
        """The parts' new cards as (start, end, text) spans of *source*, the deck's text as
        read, in file order; ``None`` unless every part is a top-level card of that text
        and no subcircuit needs a copy.  Splicing those into the text rewrites a deck
        without visiting the cards it leaves alone."""
        if self.copies or self.instance_at:
            return None
        if any(card.source is not source or card.offset < 0 for card, _p in self.top_cards):
            return None
        chosen = self.top_cards
        if not self.top_in_order:
            chosen = sorted(chosen, key=lambda item: item[0].offset)
        out: list[tuple[int, int, str]] = []
        append, part_text = out.append, self.part_text
        for card, part in chosen:
            lead, offset, text = card.lead, card.offset, card.text
            if text.find("\n") == len(text) - 1:  # one line: its comment is the mark before it
                new = lead + MARK + text + part_text(card, part)
            else:
                new = lead + self.commented(card) + part_text(card, part)
            append((offset - len(lead), offset + len(text), new))
        return out

    def body(self, nodes: Iterable[Node], prefix: str, top: bool) -> list[Node]:
        out: list[Node] = []
        context = prefix.lower()
        part_at = self.part_at.get(context, {})
        instance_at = self.instance_at.get(context, {})
        append = out.append
        for node in nodes:
            if type(node) is Card:
                key = id(node)
                part = part_at.get(key)
                if part is not None:
                    append(self.replace_part(node, part))
                elif instance_at and key in instance_at:
                    path = instance_at[key]
                    _nodes, sub, _params = x_card_parts(node)
                    append(self.retarget(node, sub, copy_name(sub, path)))
                else:
                    append(node)
            elif isinstance(node, Block) and node.kind == "subckt":
                out.append(node)
                out.extend(self.copies_of(node, prefix, top))
            else:
                out.append(node)
        return out

    def copies_of(self, block: Block, prefix: str, top: bool) -> list[Node]:
        """Specialised copies of *block* that belong in the body being rewritten."""
        out: list[Node] = []
        for path, definition in sorted(self.copies.items()):
            if definition is not block or path in self.placed:
                continue
            parent = path.rsplit(".", 1)[0] if "." in path else ""
            if not top and parent != prefix.lower():
                continue
            self.placed.add(path)
            name = copy_name(block.label, self._spelled(path))
            opening = self.retarget(block.header, block.label, name, comment=False)
            body = tuple(self.body(block.body, self._spelled(path), top=False))
            out.append(Block(opening, body, block.end and _ends(block.end, name, self.eol)))
        return out

    def unplaced(self) -> list[Node]:
        """Copies of definitions that live in included files: written at the top level,
        whether their instance sits at the top level or inside another definition (a
        parent path sorts before its children, so a definition nested in an included
        definition is placed inside its parent's copy first)."""
        out: list[Node] = []
        for path, definition in sorted(self.copies.items()):
            if path not in self.placed:
                out.extend(self.copies_of(definition, "", top=True))
        return out

    def _spelled(self, lower_path: str) -> str:
        """An instance path as the deck spells it."""
        for spelled_at in self.instance_at.values():
            for spelled in spelled_at.values():
                if spelled.lower() == lower_path:
                    return spelled
        return lower_path

    # -- cards ---------------------------------------------------------------------------

    def retarget(self, card: Card, old: str, new: str, comment: bool = True) -> Card:
        """The same card with the subcircuit name *old* replaced by *new*: the first field
        of a ``.subckt`` header, the last positional field of an ``X`` card."""
        spans = [span for span in positional_spans(card) if span[0].lower() != "params:"]
        found = (spans[0] if card.is_dot else spans[-1]) if spans else None
        if found is None or found[0].lower() != old.lower():
            raise EmitError(f"cannot find subcircuit name {old!r} on {card.head}", card.location())
        _text, start, end = found
        logical = card.logical().text
        text = logical[:start] + new + logical[end:] + self.eol
        lead = card.lead + (self.commented(card) if comment else "")
        return Card(text, lead)

    def replace_part(self, card: Card, part: PartPlan) -> Card:
        """The card that replaces *card*: the part's cards, the original commented above."""
        return Card(self.part_text(card, part), card.lead + self.commented(card))

    def commented(self, card: Card) -> str:
        """*card* as comment lines, the last one ending in the deck's line ending when the
        file ended without one."""
        text = card.commented(MARK)
        if self.eol != "\n" and not card.text.endswith("\n"):
            text = text[:-1] + self.eol
        return text

    def part_text(self, card: Card, part: PartPlan) -> str:
        """The lines that replace *part*'s *card*; records the names they add."""
        name = part.name
        if part.is_resistor:
            nodes = part.terminals
            if len(nodes) != 2:
                raise EmitError(f"{card.head} needs two nodes", card.location())
            # Parts of one table with equal values share model and network objects: their
            # cards differ only in names and nodes (see heatweave.emit.stencil).
            key = (id(part.model), id(part.network), part.to, part.to_label, part.model_name)
            text, added, thermal = self.stencils.get(
                key, self._resistor_part, part, (part.path, name, nodes[0], nodes[1], part.node)
            )
        else:
            lines = self.heat_only_cards(card, part, name)
            text, added, thermal = self._with_network(lines, part, part.path, name, part.node)
        self.added.extend(added)
        self.thermal.extend(thermal)
        if self.eol != "\n":
            text = text.replace("\n", self.eol)
        return text

    def _resistor_part(
        self, part: PartPlan, path: str, name: str, a: str, b: str, hot: str
    ) -> Made:
        """An annotated resistor's text and added names, from *part*'s model and network
        and the names given (which may be a stencil's placeholders)."""
        assert part.model is not None
        lines = resistor_cards(self.form, name, a, b, hot, part.model, self.heating)
        extra = added_nodes(self.form, name, part.model, self.heating)
        text, added, thermal = self._with_network(lines, part, path, name, hot)
        return text, (*extra, *added), thermal

    def _with_network(
        self, lines: list[str], part: PartPlan, path: str, name: str, hot: str
    ) -> Made:
        """The part's comment line, *lines*, and its network's elements, as one text; the
        hot spot and network nodes it adds (twice: all added nodes, thermal nodes)."""
        net = part.network.elements(f"{PREFIX}{name}_", hot, part.to, "0")
        out = [f"{MARK}{path}: {describe(part)}", *lines]
        for element in net.elements:
            out.append(
                f"{element.name} {element.node1} {element.node2} {format_number(element.value)}"
            )
        thermal = (hot, *net.nodes)
        return "".join(line + "\n" for line in out), thermal, thermal

    def heat_only_cards(self, card: Card, part: PartPlan, name: str) -> list[str]:
        nodes = part.terminals
        if len(nodes) < 2:
            raise EmitError(
                f"cannot find the terminals of {card.head}",
                card.location(),
                hint="heat-only parts need at least two terminals",
            )
        sensed = [f"{PREFIX}s_{name}_{k + 1}" for k in range(len(nodes) - 1)]
        rewritten = rewrite_nodes(card, dict(enumerate(sensed)), self.index)
        lines = [rewritten.rstrip("\n")]
        terms = []
        for k, node in enumerate(nodes[:-1]):
            source = f"V{PREFIX}s_{name}_{k + 1}"
            lines.append(f"{source} {node} {sensed[k]} 0")
            terms.append(f"(V({node})-V({nodes[-1]}))*I({source})")
        self.added.extend(sensed)
        if self.heating:
            lines.append(f"B{PREFIX}p_{name} 0 {part.node} I = " + " + ".join(terms))
        return lines


def _ends(card: Card, name: str, eol: str = "\n") -> Card:
    """A ``.ends`` for a copy: named when the original named its definition."""
    fields = card.fields()
    if len(fields) > 1:
        return Card(f"{fields[0]} {name}{eol}")
    return Card(card.text if card.text.endswith("\n") else card.text + eol)


def describe(part: PartPlan) -> str:
    """One line saying how a part is modelled, for the comment above its cards."""
    net = part.network
    what = f"model {part.model_name}" if part.model_name else "heat only"
    return f"{what}, {net.kind} network {format_number(net.total_rth)} K/W to {part.to_label}"


def emit_deck(
    project: Project,
    index: DeckIndex,
    circuit: ThermalCircuit,
    head: str,
    *,
    form: str = "reference",
    heating: bool = True,
    written: str | None = None,
) -> Emitted:
    """Rewrite *project*'s top deck for *circuit*; *head* is the header comment block.

    *form* is how annotated resistors are written (:data:`heatweave.emit.forms.FORMS`):
    ``reference``, two behavioural sources a part, is what ``run`` simulates; ``switch``
    gives the same equations through XSPICE code models at a fraction of the cost.

    With ``heating=False`` no part injects its dissipation: every part stays at ambient,
    which is the baseline that drift limits are measured against.  *written* is
    ``project.deck.write()`` when the caller has it.
    """
    deck: Deck = project.deck
    if not circuit.parts:
        # Nothing heats: the deck is written back unchanged, byte for byte.
        return Emitted(deck.write() if written is None else written, (), (), circuit)
    if written is None:
        written = deck.write()
    # Each file's text in lower case, once: the analysis, option and name checks search it.
    folded = folded_files(project, written)
    resistors = any(part.is_resistor for part in circuit.parts)
    form, notes = analysis_findings(analyses(project, folded), form, resistors)
    eol = line_ending(deck)
    rewriter = _Rewriter(index, circuit, form, heating, eol)
    rewriter.findings.extend(notes)
    rewriter.findings.extend(temperature_findings(((d, low) for d, low, _t in folded), circuit))
    title = deck.title or "heatweave electrothermal deck" + eol
    if not title.endswith("\n"):
        title += eol
    edits = None
    end_at = end_position(deck)
    # Splicing needs the deck as read (a sweep may have edited it).
    if deck.source is not None and end_at is not None and written == deck.source.text:
        edits = rewriter.edits(deck.source)
    body: list[Node] = []
    if edits is None:
        body = rewriter.body(deck.body, "", top=True)
        copies = "".join(node.write() for node in rewriter.unplaced())
    thermal = [AMBIENT_NODE, *(n.node for n in circuit.nodes), *rewriter.thermal]
    options = step_limit_options(form, [(low, t) for _d, low, t in folded], folded=True)
    section_text = thermal_section(circuit, thermal, bool(rewriter.copies), form, options, heating)
    if eol != "\n":
        head, section_text = head.replace("\n", eol), section_text.replace("\n", eol)
    section = Card(section_text)
    if edits is not None:
        assert end_at is not None
        text = spliced(deck, written, edits, section, end_at, title + head, eol)
    else:
        # The copies go before .end with the section: the shared library reads no further.
        body = insert_before_end(body, Card(copies + section.text, section.lead), eol)
        text = replace(deck, title=title + head, body=tuple(body)).write()
    refuse_reserved(index, circuit, folded, form, heating)
    last = deck.body[-1] if deck.body else None
    if isinstance(last, ControlBlock) and not last.closed:
        # ngspice 39 drops every .model card of a deck whose .control block has no .endc
        # ("could not find a valid modelname"), the section's code models too: close it.
        text += ("" if text.endswith("\n") else eol) + ".endc" + eol
        rewriter.findings.append(Finding(
            "warning", "the .control block has no .endc; the emitted deck closes it at the "
            "end of the file, where ngspice 39 ends it", last.source.location(last.offset)
            if last.source is not None else None,
        ))  # fmt: skip
    return Emitted(
        text, tuple(rewriter.added), tuple(rewriter.findings), circuit, form=form, heating=heating
    )


@dataclass(frozen=True, slots=True)
class Inputs:
    """A deck with its includes and its annotation file, read, validated and bound."""

    deck_path: str
    annotation_path: str
    project: Project
    index: DeckIndex
    annotation: Annotation
    bound: tuple[BoundPart, ...]


def load_inputs(deck_path: str, annotation_path: str) -> Inputs:
    """Read a deck, its includes and its annotation file, and bind the parts."""

    project = load_project(deck_path)
    refuse_emitted(project.deck)
    annotation = load(annotation_path, deck_name=deck_path)
    index = DeckIndex(project)
    return Inputs(deck_path, annotation_path, project, index, annotation, bind(annotation, index))


def refuse_emitted(deck: Deck) -> None:
    """A deck heatweave emitted is no source deck: its parts are already replaced by their
    self-heating cards and it carries its own thermal network and ambient source."""
    text = deck.source.text if deck.source is not None else ""
    start = text.find("\n") + 1
    if start == 0 or not text.startswith(EMITTED_HEADER, start):
        return
    end = text.find("\n", start)
    line = text[start : end if end >= 0 else len(text)].rstrip("\r")
    raise InputError(
        f"{deck.path} is an electrothermal deck heatweave wrote, not a source deck: its "
        "annotated parts are already replaced and it holds its own thermal network",
        Location(deck.path, 2, 1, line),
        hint="give the source deck named on its next line (after emit --in-place, restore "
        "it from version control)",
    )


def thermal_circuit(
    inputs: Inputs, *, annotation: Annotation | None = None, ambient: float | None = None
) -> tuple[ThermalCircuit, tuple[Finding, ...]]:
    """The thermal circuit of *inputs* and what building it found; *annotation* replaces
    the file's (a Monte Carlo draw, a corner) and *ambient* overrides its ambient."""
    bound = inputs.bound if annotation is None else bind(annotation, inputs.index)
    circuit, findings = build_circuit(annotation or inputs.annotation, bound, inputs.index, ambient)
    return circuit, tuple(findings)


def emit_inputs(
    inputs: Inputs,
    *,
    annotation: Annotation | None = None,
    ambient: float | None = None,
    form: str = "reference",
    heating: bool = True,
) -> Emitted:
    """The emitted deck for *inputs*; *annotation* replaces the file's (a Monte Carlo draw,
    a corner) and *ambient* overrides its ambient temperature.  ``heating=False`` gives
    the same deck with every part held at ambient (see :func:`emit_deck`)."""
    chosen = annotation or inputs.annotation
    circuit, findings = thermal_circuit(inputs, annotation=annotation, ambient=ambient)
    if not circuit.parts:
        # Nothing heats: the deck as written, at the ambient like every run (emit.temperature).
        files = ((d, low) for d, low, _title in folded_files(inputs.project))
        notes = (no_parts_note(circuit), *temperature_findings(files, circuit))
        text = with_temp(inputs.project.deck, circuit).write()
        return Emitted(text, (), findings + notes, circuit)
    deck_text = inputs.project.deck.write()  # not the file's text: a sweep rewrites .param cards
    head = header(
        _basename(inputs.deck_path), deck_text, _basename(inputs.annotation_path), chosen.text
    )
    emitted = emit_deck(
        inputs.project, inputs.index, circuit, head, form=form, heating=heating, written=deck_text
    )
    return replace(emitted, findings=findings + emitted.findings)


def emit_files(deck_path: str, annotation_path: str, *, form: str = "reference") -> Emitted:
    """Read a deck, its includes and its annotation file; return the emitted deck."""
    return emit_inputs(load_inputs(deck_path, annotation_path), form=form)


def refuse_unwritable_inputs(inputs: Inputs) -> None:
    """Refuse now, before a command prints anything, the file names every emitted deck of
    *inputs* would refuse (:func:`heatweave.emit.sections.refuse_unwritable_names`)."""
    refuse_unwritable_names(_basename(inputs.deck_path), _basename(inputs.annotation_path))


def _basename(path: str) -> str:
    return Path(path).name
