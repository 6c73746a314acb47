"""Lint of a plain deck: the full grammar on every card and structural checks.

Findings are :class:`~heatweave.errors.Finding` objects, one a line when printed
(``FILE:LINE:COL: error|warning: message``).  Errors are what ngspice would reject or what
would make heatweave's output wrong; warnings are what is legal but likely a slip.
"""

from __future__ import annotations

from collections import Counter
from collections.abc import Iterable, Iterator

from heatweave.errors import DeckSyntaxError, Finding, HeatweaveError, Location, Plain
from heatweave.spice.acceptance import rejections
from heatweave.spice.cardparts import subckt_ports, x_card_parts
from heatweave.spice.deck import Block, Card, ControlBlock, Deck, Node
from heatweave.spice.grammar import syntax_of, unclosed_model, unclosed_source
from heatweave.spice.hierarchy import DeckIndex, Scope, global_names
from heatweave.spice.lint_cards import card_problems
from heatweave.spice.netlist import card_nodes
from heatweave.spice.project import Project


def _where(node: Card | ControlBlock) -> Location | None:
    if isinstance(node, Card):
        return node.location()
    return node.source.location(node.offset) if node.source else None


def _structure(body: Iterable[Node], titled: bool = False) -> Iterator[Finding]:
    """Unclosed blocks, stray closers, orphan continuation lines; *titled*: *body* follows
    a deck's title line."""
    previous: Node | None = None
    for node in body:
        before, previous = previous, node
        if isinstance(node, ControlBlock) and not node.closed:
            yield Finding(  # ngspice 39 warns "Missing .endc statement!" and runs it
                "warning", Plain(".control without .endc runs to the end of the file"),
                _where(node), Plain("close the block with .endc"),
            )  # fmt: skip
        elif isinstance(node, Block):
            if node.end is None:
                yield Finding(
                    "error",
                    f".{node.kind} {node.label} is never closed",
                    node.header.location(),
                    "add .ends" if node.kind == "subckt" else "add .endl",
                )
            yield from _structure(node.body)
        elif isinstance(node, Card):
            name = node.name
            if name in (".ends", ".endl"):
                opener = ".subckt" if name == ".ends" else ".lib"
                yield Finding(
                    "error", f"{name} without {opener}", node.location(),
                    f"remove it, or add the {opener} line it should close",
                )  # fmt: skip
            elif node.head.startswith("+"):
                yield _orphan(node, before, titled)


def _orphan(card: Card, before: Node | None, titled: bool) -> Finding:
    """A '+' line with no card above it.  ngspice 39.3 joins it to the title line, or
    drops it after a .control block (both accepted: warnings); in an included file it
    continues the card before the include card, which then fails (an error)."""
    hint = "a '+' line continues the card above it"
    if before is None and titled:
        return Finding("warning", Plain("continuation line after the title: ngspice 39 reads "
                       "it as part of the title"), card.location(), Plain(hint))  # fmt: skip
    if isinstance(before, ControlBlock):
        return Finding("warning", Plain("continuation line after a .control block: ngspice 39 "
                       "ignores it"), card.location(), Plain(hint))  # fmt: skip
    return Finding("error", Plain("continuation line with no card to continue"),
                   card.location(), Plain(hint + "; at the top of an included file ngspice 39 "
                   "joins it to the card before the include card"))  # fmt: skip


def _parse_all(decks: Iterable[Deck], index: DeckIndex) -> Iterator[Finding]:
    """The grammar on every card, then the card rules of :mod:`heatweave.spice.lint_cards`."""

    def model_of(name: str) -> Card | None:
        return index.models.get(name)

    for deck in decks:
        for card in deck.cards():
            if card.head.startswith("+"):
                continue  # reported by the structure check
            try:
                syntax = syntax_of(card)
            except DeckSyntaxError as err:
                yield Finding("error", err.message, err.location, err.hint)
                continue
            logical = card.logical().text
            opening = unclosed_model(logical)
            if opening is not None:
                yield Finding(
                    "warning", "the '(' of this .model never closes; ngspice 39 reads the "
                    "card to its end", card.location(opening), "add the ')'",
                )  # fmt: skip
            opening = unclosed_source(logical)
            if opening is not None:
                yield Finding(
                    "warning", "the '(' of this source function never closes; ngspice 39 "
                    "closes it before the next ac, dc or distof keyword, else at the card's end",
                    card.location(opening), "add the ')'",
                )  # fmt: skip
            for problem in card_problems(syntax, logical, model_of):
                where = card.location(problem.offset)
                yield Finding(problem.severity, problem.message, where, problem.hint)


def _scopes(scope: Scope) -> Iterator[tuple[Scope, Block | None]]:
    yield scope, None
    for key, inner in scope.scopes.items():
        for found, block in _scopes(inner):
            yield found, block if block is not None else scope.subckts[key]


def _connections(
    index: DeckIndex, scope: Scope, block: Block | None, globals_: set[str]
) -> Iterator[Finding]:
    """Unknown subcircuits, nodes with a single connection (ground and
    ``.global`` nodes aside: one net everywhere, connected in other scopes too)."""

    counts: Counter[str] = Counter()
    first: dict[str, Card] = {}
    for card in scope.cards:
        if card.letter == "X":
            _nodes, sub, _params = x_card_parts(card)
            if index.lookup_subckt(sub, scope) is None:
                yield Finding(
                    "error",
                    f"{card.head} uses unknown subcircuit {sub!r}",
                    card.location(),
                    "define it with .subckt, or include the file that does",
                )
        try:
            nodes = card_nodes(card, index)
        except HeatweaveError:
            continue
        for node in nodes:
            low = node.lower()
            counts[low] += 1
            first.setdefault(low, card)
    ports = {p.lower() for p in subckt_ports(block)} if block is not None else set()
    for node, count in counts.items():
        if count == 1 and node not in globals_ and node not in ports:
            card = first[node]
            yield Finding(
                "warning",
                f"node {node} has a single connection ({card.head})",
                card.location(),
                "connect it, or check the spelling of the node name",
            )


def _line(card: Card) -> int:
    location = card.location()
    return location.line if location else 0


def lint_project(project: Project, index: DeckIndex | None = None) -> list[Finding]:
    """Every finding for a deck and its includes, in file and line order."""
    decks = [project.deck, *(inc.deck for inc in project.includes)]
    index = index or DeckIndex(project)
    findings = list(_parse_all(decks, index))
    for deck in decks:
        findings.extend(_structure(deck.body, titled=deck.title is not None))
    globals_ = global_names(index)
    for scope, block in _scopes(index.top):
        findings.extend(_connections(index, scope, block, globals_))
    seen = {(f.location, f.message) for f in findings}  # the grammar may have said it
    findings.extend(f for f in rejections(index) if (f.location, f.message) not in seen)
    # Findings at a withheld line all read alike (heatweave.errors.shown): say each once.
    return sorted(dict.fromkeys(findings), key=order)


def order(finding: Finding) -> tuple[str, int, int]:
    loc = finding.location
    return (loc.file, loc.line, loc.column) if loc else ("", 0, 0)
