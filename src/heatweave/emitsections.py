"""The parts of an emitted deck around the rewritten cards: the header that names its
sources, the thermal section (ambient, shared nodes, couplings, shared models, ``.global``
and the cold start), and the check that no added name is already the deck's."""

from __future__ import annotations

import hashlib

from heatweave import __version__
from heatweave.deck import Deck
from heatweave.emitforms import TRTOL_NOTE, preamble, shared_nodes
from heatweave.errors import EmitError
from heatweave.hierarchy import DeckIndex, Project
from heatweave.quantities import format_number
from heatweave.thermal_circuit import AMBIENT_NODE, PREFIX, ThermalCircuit

MARK = "*hw* "  # marks lines heatweave writes around replaced cards


def sha256(text: str) -> str:
    """Hex SHA-256 of a text as heatweave reads files (lossless UTF-8)."""
    from heatweave.files import encode

    return hashlib.sha256(encode(text)).hexdigest()


def header(deck_name: str, deck_text: str, annotation_name: str, annotation_text: str) -> str:
    """The comment block after the title: sources, their hashes, the unit convention."""
    lines = [
        f"* electrothermal deck written by heatweave {__version__}; edit the sources, not this",
        f"* source deck: {deck_name} sha256 {sha256(deck_text)}",
        f"* annotations: {annotation_name} sha256 {sha256(annotation_text)}",
        "* units: thermal node voltages are temperatures, 1 V = 1 degC (1 K of rise);",
        "*        currents into thermal nodes are heat flows, 1 A = 1 W;",
        "*        thermal resistors 1 ohm = 1 K/W; thermal capacitors 1 F = 1 J/K",
    ]
    return "".join(line + "\n" for line in lines)


def stale_reason(committed: str, fresh: str) -> str:
    """Which input changed between a committed emitted deck and a fresh one."""

    def tagged(text: str, tag: str) -> str | None:
        for line in text.splitlines()[:12]:
            if line.startswith(tag):
                return line
        return None

    reasons = []
    for tag, what in (
        ("* source deck:", "the deck changed"),
        ("* annotations:", "the annotation file changed"),
        ("* electrothermal deck written by", "heatweave's version changed"),
    ):
        if tagged(committed, tag) != tagged(fresh, tag):
            reasons.append(what)
    return "; ".join(reasons) or _first_difference(committed, fresh)


def _first_difference(committed: str, fresh: str) -> str:
    """Where a committed emitted deck departs from a fresh one whose inputs match it: an
    included file changed (its annotated parts are copied in), or a hand edit."""
    old, new = committed.splitlines(), fresh.splitlines()
    if old == new:
        return "only its line ends differ from what emit writes now (CRLF against LF?)"
    number = next(
        (n for n, (a, b) in enumerate(zip(old, new, strict=False), 1) if a != b),
        min(len(old), len(new)) + 1,
    )

    def shown(lines: list[str]) -> str:
        return repr(lines[number - 1]) if number <= len(lines) else "(end of file)"

    return (
        "the deck, the annotation file and heatweave's version are unchanged, but it "
        f"differs from line {number}: it has {shown(old)}, emit writes now {shown(new)} "
        "(an included file changed, or the emitted deck was edited by hand)"
    )


def thermal_section(
    circuit: ThermalCircuit,
    thermal: list[str],
    shared: bool,
    form: str = "reference",
    options: list[str] | None = None,
    heating: bool = True,
) -> str:
    """Ambient source, shared nodes, couplings, the card form's shared models and
    *options* lines, and for the thermal nodes: ``.global`` when subcircuit copies reach
    them (*shared*), ``.ic`` at ambient for a cold start."""
    lines = [f"{MARK}thermal network"]
    # Each model object once (parts of one table with equal values share one).
    models = list({id(p.model): p.model for p in circuit.parts if p.model is not None}.values())
    shared_models = preamble(form, models, heating)
    if any(card.startswith(".model") for card in shared_models):  # code models: XSPICE's trtol
        lines.append(TRTOL_NOTE)
    lines.extend(shared_models)
    lines.extend(options or ())
    if isinstance(circuit.ambient, tuple):
        points = " ".join(f"{format_number(t)} {format_number(v)}" for t, v in circuit.ambient)
        lines.append(f"V{AMBIENT_NODE} {AMBIENT_NODE} 0 PWL({points})")
    else:
        lines.append(f"V{AMBIENT_NODE} {AMBIENT_NODE} 0 DC {format_number(circuit.ambient)}")
    for node in circuit.nodes:
        lines.append(f"R{node.node} {node.node} {node.to} {format_number(node.rth)}")
        if node.cth > 0:
            lines.append(f"C{node.node} {node.node} 0 {format_number(node.cth)}")
    for k, coupling in enumerate(circuit.couplings, start=1):
        lines.append(
            f"R{PREFIX}path{k} {coupling.a} {coupling.b} {format_number(coupling.rth)}"
            f" ; {coupling.labels[0]} - {coupling.labels[1]}"
        )
    if shared:
        lines.extend(_wrap(".global", [*thermal, *shared_nodes(form, models, heating)]))
    if circuit.start == "cold":
        t0 = format_number(circuit.ambient_at_start)
        lines.extend(_wrap(".ic", [f"V({n})={t0}" for n in thermal if n != AMBIENT_NODE]))
    return "".join(line + "\n" for line in lines)


def _wrap(card: str, items: list[str], width: int = 90) -> list[str]:
    """A card with many items, continued with ``+`` lines to stay readable."""
    lines: list[str] = []
    current = card
    for item in items:
        if len(current) + 1 + len(item) > width and current not in (card, "+"):
            lines.append(current)
            current = "+"
        current += " " + item
    lines.append(current)
    return lines


def folded_files(project: Project, written: str | None = None) -> list[tuple[Deck, str, bool]]:
    """Each file's deck, its text in lower case and whether it has a title line: the deck
    as it stands now (*written*, ``project.deck.write()``, when the caller has it; a sweep
    edits it), then each included file as read (heatweave never edits those)."""
    top = project.deck.write() if written is None else written
    out = [(project.deck, top.lower(), True)]
    for include in project.includes:
        deck = include.deck
        text = deck.write() if deck.source is None else deck.source.text
        out.append((deck, text.lower(), False))
    return out


def check_names(
    index: DeckIndex,
    added: list[str],
    folded: list[tuple[Deck, str, bool]] | None = None,
) -> None:
    """Every added name must be new: a collision is an error, never a silent rename.

    Only cards whose text holds the reserved prefix can collide, so the files are searched
    for it first (in *folded*, each deck's text in lower case, when the caller has it);
    the field-level check runs on those cards alone.
    """
    if folded is None:
        folded = folded_files(index.project)
    wanted: set[str] | None = None
    for card in (c for deck, low, _t in folded if PREFIX in low for c in deck.cards()):
        if PREFIX not in card.text.lower():
            continue
        if wanted is None:
            wanted = {name.lower() for name in added}
        for field_text in card.fields():
            low = field_text.lower()
            if PREFIX in low and (low in wanted or low[1:] in wanted):
                raise EmitError(
                    f"the deck already uses the name {field_text!r}, which heatweave reserves",
                    card.location(),
                    hint=f"rename it: names containing {PREFIX!r} are heatweave's",
                )
