"""The parts of an emitted deck around the rewritten cards: the header that names its
sources, the thermal section (ambient, shared nodes, couplings, shared models, ``.global``
and the cold start), and the check that no added name is already the deck's."""

from __future__ import annotations

import hashlib
import re

from heatweave import __version__
from heatweave.emit.forms import TRTOL_NOTE, preamble, shared_nodes
from heatweave.emit.temperature import temp_card
from heatweave.errors import EmitError, Finding, Location
from heatweave.files import encode
from heatweave.quantities import format_number
from heatweave.spice.deck import ControlBlock, Deck, iter_cards, unprintable
from heatweave.spice.project import Project
from heatweave.thermal.circuit import AMBIENT_NODE, PREFIX, ThermalCircuit

MARK = "*hw* "  # marks lines heatweave writes around replaced cards

#: How every emitted deck's second line begins (after the source deck's title).
EMITTED_HEADER = "* electrothermal deck written by heatweave"


def sha256(text: str) -> str:
    """Hex SHA-256 of a text as heatweave reads files (lossless UTF-8)."""

    return hashlib.sha256(encode(text)).hexdigest()


def header(deck_name: str, deck_text: str, annotation_name: str, annotation_text: str) -> str:
    """The comment block after the title: sources, their hashes, the unit convention.

    The two file names are written into the deck (:func:`refuse_unwritable_names`)."""
    refuse_unwritable_names(deck_name, annotation_name)
    lines = [
        f"{EMITTED_HEADER} {__version__}; edit the sources, not this",
        f"* source deck: {deck_name} sha256 {sha256(deck_text)}",
        f"* annotations: {annotation_name} sha256 {sha256(annotation_text)}",
        "* units: thermal node voltages are temperatures, 1 V = 1 degC (1 K of rise);",
        "*        currents into thermal nodes are heat flows, 1 A = 1 W;",
        "*        thermal resistors 1 ohm = 1 K/W; thermal capacitors 1 F = 1 J/K",
    ]
    return "".join(line + "\n" for line in lines)


def refuse_unwritable_names(deck_name: str, annotation_name: str) -> None:
    """Refuse a deck or annotation file name that holds a newline or another control
    character: written into the deck, ngspice would read what follows it as a card."""
    for what, name in (("deck", deck_name), ("annotation file", annotation_name)):
        bad = unprintable(name)
        if bad is not None:
            raise EmitError(
                f"the {what}'s file name {name!r} holds the character {bad}",
                hint="rename the file: names written into the deck must be printable, "
                "on one line",
            )


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
    """Ambient source and ``.temp`` (:mod:`heatweave.emit.temperature`), shared nodes,
    couplings, the card form's shared models and *options* lines, and for the thermal
    nodes: ``.global`` when subcircuit copies reach them (*shared*), ``.ic`` at ambient
    for a cold start."""
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
    lines.append(temp_card(circuit))  # every element without a thermal network: the ambient
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


# The analyses XSPICE code models do not implement (ngspice manual 1.2: "the Code Model
# subsystem ... do[es] not implement Pole-Zero, Distortion, Sensitivity and Noise"): as dot
# cards (found with .control, whose blocks may run them as commands; a literal "." lets the
# regex engine skip ahead), and as commands at the start of a .control block's line.  The
# texts searched are in lower case.
# The AC analysis too: ngspice builds the code models' small-signal response from their
# partial derivatives, which for heatweave's switch and product stages give a wrong answer
# (a 1 V divider read 4.06 V, or NaN where the resistor carries no bias current).
_DOT_ANALYSIS = re.compile(r"\.(pz|disto|sens|noise|ac|control)(?=[ \t\r\n]|\Z)")
_COMMAND = re.compile(r"\n[ \t]*(pz|disto|sens|noise|ac)(?=[ \t\r\n]|\Z)")


def analyses(
    project: Project, folded: list[tuple[Deck, str, bool]]
) -> list[tuple[str, Location | None]]:
    """The pole-zero, distortion, sensitivity, noise and AC analyses the deck asks for, each with
    where it stands: dot cards in the deck and its includes, commands in its ``.control``
    blocks.  *folded* is :func:`folded_files`; a deck without such a line costs one scan."""
    dotted = {"." + word for _d, low, _t in folded for word in _DOT_ANALYSIS.findall(low)}
    if not dotted:
        return []
    found: list[tuple[str, Location | None]] = []
    for deck in (project.deck, *(include.deck for include in project.includes)):
        if ".control" in dotted:  # only then can a block run one as a command
            for node in deck.body:
                if isinstance(node, ControlBlock):
                    found.extend(_commands(node))
        found.extend(
            (card.name[1:], card.location()) for card in iter_cards(deck.body)
            if card.name in dotted and card.name != ".control"
        )  # fmt: skip
    return found


def _commands(block: ControlBlock) -> list[tuple[str, Location | None]]:
    """The analyses a ``.control`` block runs (its own lines, not dot cards)."""
    out: list[tuple[str, Location | None]] = []
    for match in _COMMAND.finditer("\n" + block.text.lower()):
        where = None
        if block.source is not None and block.offset >= 0:
            where = block.source.location(block.offset + match.start(1) - 1)
        out.append((match.group(1), where))
    return out


def analysis_findings(
    found: list[tuple[str, Location | None]], form: str, resistors: bool
) -> tuple[str, list[Finding]]:
    """The card form to write given the analyses *found*, and what the user should hear.

    A form with code models falls back to the reference form where the deck runs an
    analysis code models do not implement (pole-zero, distortion, sensitivity; ngspice may
    crash on them).  Noise runs with either form, but neither behavioural sources nor code
    models have thermal noise, so the annotated resistors' noise is missing from it (the
    switch form keeps that of its fixed share), and the thermal network's resistors add a
    little noise of their own through the temperature dependence."""
    findings: list[Finding] = []
    gaps = [(name, where) for name, where in found if name != "noise"]
    if gaps and form != "reference":
        name, where = gaps[0]
        why = (
            "the code models' small-signal response is wrong for heatweave's stages"
            if name == "ac"
            else "XSPICE code models do not implement this analysis (ngspice manual 1.2)"
        )
        findings.append(
            Finding(
                "warning",
                f".{name}: {why}, so the annotated resistors are written in the reference "
                f"form, not the {form} form",
                where,
                "run the analysis on a copy of the deck if the faster form matters",
            )
        )
        form = "reference"
    noise = [where for name, where in found if name == "noise"]
    if noise and resistors:
        findings.append(
            Finding(
                "warning",
                "noise: the annotated resistors are written as behavioural sources or code "
                "models, which ngspice gives no thermal noise, while the thermal network's "
                "resistors get electrical noise: the analysis is wrong for those parts",
                noise[0],
                "analyse noise on the plain deck with each resistor at the resistance "
                "heatweave run reports for it",
            )
        )
    return form, findings
