"""The deck heatweave hands ngspice: one file in which no line is a command.

ngspice runs interpreter commands (``shell`` among them) from these places in a deck
(manual 16.4.3, 17.5.80; each checked against ngspice 39):

* ``.control`` ... ``.endc`` blocks, in the deck, in every file it includes, in ``.lib``
  sections and ``.subckt`` bodies (ngspice matches the words as prefixes: ``.controls``
  opens a block too);
* every line starting with ``*#``, in any file: ngspice wraps it in a ``.control`` block;
* a whole file whose first line starts with ``*ng_script``: ngspice reads it as a script.

:func:`safe_deck` therefore inlines every ``.include`` and ``.lib FILE SECTION`` (ngspice
reads no file but the one deck: a file it read itself could hold any of the above), drops
each ``.control`` block unless the user allows them, turns ``*#`` lines into plain comments
and replaces a script title.  The fourth place, the init files ``.spiceinit`` and
``spice.rc``, is closed by the back ends, which run ngspice with a private working folder and
home (:func:`heatweave.simulators.base.private_environment`).
"""

from __future__ import annotations

import os
import re
from collections.abc import Iterable
from dataclasses import dataclass, replace
from pathlib import Path

from heatweave.emit.sections import MARK
from heatweave.errors import DeckStructureError, Finding, Location, Plain
from heatweave.spice.deck import Block, Card, ControlBlock, Deck, Node, SourceFile
from heatweave.spice.project import Project, include_target, library_section, read_include
from heatweave.spice.transform import line_ended

#: A line ngspice runs as a command although it looks like a comment (manual 17.5.80).
_HASH_LINE = re.compile(r"(?m)^([ \t]*)\*#")
_SCRIPT_TITLE = "*ng_script"
_SCRIPT = re.compile(r"[ \t]*\*ng_script", re.IGNORECASE)
# What a text holds when there is anything to do: an include card, a command line or block.
_LOOK = re.compile(r"\.(?:inc|lib|control)|\*#", re.IGNORECASE)
ALLOW_HINT = "pass --allow-control to keep them if you trust this deck and every file it includes"


@dataclass(frozen=True, slots=True)
class SafeDeck:
    """The deck to simulate, its text, and the warnings about what was taken out of it."""

    deck: Deck
    text: str
    findings: tuple[Finding, ...]


def safe_deck(
    deck: Deck, project: Project, folder: str, allow_control: bool, text: str | None = None
) -> SafeDeck:
    """*deck* (the tree to simulate: the emitted deck as read, or the plain deck) made safe
    for ngspice, as a new tree; *text* is ``deck.write()`` when the caller has it.

    *project* is the deck as read, with its includes (their texts are taken from there, so
    a file is read once); *folder* is where the deck's relative include paths start.  With
    *allow_control* the ``.control`` blocks and ``*#`` lines stay (the user trusts the deck);
    the includes are inlined and a script title replaced all the same.  No text is read
    here but an included file the project does not hold.
    """
    if text is None:
        text = deck.write()
    script_title = _SCRIPT.match(text) is not None
    if not script_title and _LOOK.search(text) is None:  # the common case: one scan
        return SafeDeck(deck, text, ())
    files = {include.path: include.deck for include in project.includes}
    inliner = _Inliner(files, allow_control)
    body = inliner.body(deck.body, Path(folder), (), top=True)
    title = deck.title
    if script_title:
        title = "heatweave: a title line that asked ngspice to read a script was replaced\n"
    trailer = deck.trailer if allow_control else defuse(deck.trailer)
    safe = replace(deck, title=title, body=tuple(body), trailer=trailer)
    return SafeDeck(safe, safe.write(), findings(project, allow_control))


def defuse(text: str) -> str:
    """*text* with every ``*#`` line turned into a plain comment (``* #``)."""
    if "*#" not in text:
        return text
    return _HASH_LINE.sub(r"\1* #", text)


#: A file being inlined and its section (``None`` for the whole file).
_Link = tuple[str, str | None]


class _Inliner:
    """Inlines includes and drops command lines, one body at a time; new nodes only."""

    def __init__(self, files: dict[str, Deck], allow_control: bool) -> None:
        self.files = files
        self.allow = allow_control

    def body(
        self, nodes: Iterable[Node], folder: Path, chain: tuple[_Link, ...], *, top: bool
    ) -> list[Node]:
        out: list[Node] = []
        for node in nodes:
            if isinstance(node, ControlBlock):
                if self.allow:
                    out.append(node)
                else:
                    note = f"{MARK}a .control block was dropped here\n"
                    out.append(Card(note, defuse(node.lead)))
            elif isinstance(node, Block):
                header, end = self.card(node.header), node.end and self.card(node.end)
                inner = self.body(node.body, folder, chain, top=top)
                out.append(Block(header, tuple(inner), end))
            elif include_target(node) is not None:
                out.extend(self.inline(node, folder, chain))
            elif not top and node.name == ".end":
                # ngspice ignores .end in an included file; the shared library would stop
                # reading the inlined deck there.
                out.append(Card(MARK + node.text, self.card(node).lead))
            else:
                out.append(self.card(node))
        return out

    def card(self, card: Card) -> Card:
        if self.allow or ("*#" not in card.lead and "*#" not in card.text):
            return card
        return replace(card, lead=defuse(card.lead), text=defuse(card.text))

    def inline(self, card: Card, folder: Path, chain: tuple[_Link, ...]) -> list[Node]:
        """The include *card* as a comment, then the body it brings in, made safe."""
        target = include_target(card)
        assert target is not None
        name, section = target
        full = str((folder / os.path.expanduser(name)).resolve())
        where = card.location()
        # A .lib section may use another section of its own file (manual 2.8): only the
        # same file and section again is a cycle.
        link = (full, section.lower() if section is not None else None)
        if link in chain:
            shown = full if section is None else f"{full} section {section}"
            raise DeckStructureError(f"include cycle through {shown}", where)
        deck = self.files.get(full)
        if deck is None:
            if Path(full).exists() and not Path(full).is_file():
                raise DeckStructureError(
                    f"included file {name!r} is not a regular file ({full})",
                    where,
                    hint="include a SPICE file; a folder, device or pipe is not read",
                )
            if not Path(full).is_file():
                raise DeckStructureError(
                    f"included file {name!r} not found (looked for {full})",
                    where,
                    hint="paths are relative to the file that holds the include card",
                )
            deck = read_include(full, name, where)
            self.files[full] = deck
        chosen = deck.body if section is None else library_section(deck, section, where)
        note = Card(f"{MARK}inlined: {card.logical().text}\n", self.card(card).lead)
        inner = self.body(chosen, Path(full).parent, (*chain, link), top=False)
        if inner:
            # ngspice reads the last line of an included file that does not end with a
            # line end as a line of its own: the inlined copy must end it too (else the
            # deck's next card would join it).
            inner[-1] = line_ended(inner[-1])
        return [note, *inner]


def findings(project: Project, allow_control: bool) -> tuple[Finding, ...]:
    """One warning for each ``.control`` block and ``*#`` line taken out of what ngspice
    would have read, located in the user's files; and one for a script title."""
    found: dict[tuple[str, int], Finding] = {}
    title = project.deck.title
    if title is not None and title.lstrip(" \t").lower().startswith(_SCRIPT_TITLE):
        where = project.deck.source.location(0) if project.deck.source else None
        _add(found, Finding(
            "warning",
            "the title line starts with *ng_script, which makes ngspice read the whole deck "
            "as a command script: heatweave gives ngspice another title",
            where,
            "give the deck an ordinary first line (a title)",
        ))  # fmt: skip
    if allow_control:
        return tuple(found.values())
    bodies = [
        deck.body if include is None else include.body
        for deck, include in [(project.deck, None), *((i.deck, i) for i in project.includes)]
        if _has_commands(deck)
    ]
    for body in bodies:
        for node in _walk(body):
            if isinstance(node, ControlBlock):
                _add(found, Finding(
                    "warning",
                    Plain("dropped a .control block: its commands could run anything on this "
                          "machine, so heatweave drives the analyses itself"),
                    _at(node.source, node.offset),
                    Plain(ALLOW_HINT),
                ))  # fmt: skip
            else:
                for offset in _hash_lines(node.lead):
                    at = _at(node.source, node.offset - len(node.lead) + offset)
                    _add(found, _hash_finding(at))
                if isinstance(node, Card):
                    for offset in _hash_lines(node.text):
                        _add(found, _hash_finding(_at(node.source, node.offset + offset)))
    deck = project.deck
    for offset in _hash_lines(deck.trailer):
        start = len(deck.write()) - len(deck.trailer)
        _add(found, _hash_finding(_at(deck.source, start + offset)))
    return tuple(found.values())


_COMMANDS = re.compile(r"\.control|\*#", re.IGNORECASE)


def _has_commands(deck: Deck) -> bool:
    """False when no line of *deck* can be a command (one scan of its text)."""
    text = deck.source.text if deck.source is not None else deck.write()
    return _COMMANDS.search(text) is not None


def _walk(body: Iterable[Node]) -> Iterable[Card | ControlBlock]:
    for node in body:
        if isinstance(node, Block):
            yield node.header
            yield from _walk(node.body)
            if node.end is not None:
                yield node.end
        else:
            yield node


def _hash_lines(text: str) -> list[int]:
    if "*#" not in text:
        return []
    return [match.end(1) for match in _HASH_LINE.finditer(text)]


def _at(source: SourceFile | None, offset: int) -> Location | None:
    if source is None or offset < 0:
        return None
    return source.location(offset)


def _hash_finding(where: Location | None) -> Finding:
    return Finding(
        "warning",
        Plain("a line starting with *# is a command to ngspice, not a comment: heatweave "
              "turned it into a comment"),
        where,
        Plain(ALLOW_HINT),
    )


def _add(found: dict[tuple[str, int], Finding], finding: Finding) -> None:
    where = finding.location
    key = (where.file, where.line) if where is not None else ("", len(found))
    found.setdefault(key, finding)
