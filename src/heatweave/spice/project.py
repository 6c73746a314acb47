"""A deck and every file it includes: ``.include`` and ``.lib FILE SECTION`` followed
relative to the including file, as ngspice does; the files themselves are never changed.
A file that is plainly not SPICE (a key, a password file, binary) is refused without quoting
it; one not proven SPICE is read, but no message shows its lines.
"""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path

from heatweave.errors import DeckStructureError, HeatweaveError, Location, UnreadableInputError
from heatweave.spice.deck import Block, Card, Deck, Node, iter_cards
from heatweave.spice.grammar import syntax_of
from heatweave.spice.reader import read, read_file


@dataclass(frozen=True, slots=True)
class Include:
    """One followed ``.include``/``.lib`` card and what it brought in."""

    card: Card
    path: str
    section: str | None
    deck: Deck
    body: tuple[Node, ...]


@dataclass(frozen=True, slots=True)
class Project:
    """A top-level deck and every file it includes, each read once."""

    deck: Deck
    includes: tuple[Include, ...]

    def include_for(self, card: Card) -> Include | None:
        """The include that a given ``.include``/``.lib`` card brought in."""
        for inc in self.includes:
            if inc.card is card:
                return inc
        return None


def load_project(path: str) -> Project:
    """Read *path* and, recursively, every file it includes."""
    deck = read_file(path)
    includes: list[Include] = []
    cache: dict[str, Deck] = {}
    if deck.source is None or _MAY_INCLUDE.search(deck.source.text):
        _follow(deck.body, deck.path, ((os.path.abspath(path), None),), includes, cache)
    return Project(deck, tuple(includes))


# A cheap first look: a file without such a line includes nothing.
# (A literal first character lets the regex engine skip ahead: ~15 ms on 28 MB, where an
# anchored, case-folded pattern takes ~250 ms.)
_MAY_INCLUDE = re.compile(r"\.(?:[iI][nN][cC]|[lL][iI][bB])")


def include_target(card: Card) -> tuple[str, str | None] | None:
    """(file name, library section) of an include card, or ``None`` for other cards."""
    name = card.name
    # ngspice 39 reads any name starting so (".includex", ".library"): checked with -b.
    library = name.startswith(".lib")
    if not (library or name.startswith(".inc")):
        return None
    fields = card.fields()
    if len(fields) < 2:
        return None
    if library and len(fields) < 3:
        return None  # a section header inside a library file
    target = fields[1].strip("\"'")
    section = _raw_section(card, fields[2]) if library else None
    return target, section


def _raw_section(card: Card, cut: str) -> str:
    """The section name of a ``.lib FILE SECTION`` card as ngspice 39 reads it: up to the
    next blank of the card's first line, with no inline comment cut (``fast;c``, ``fast//c``
    and ``fast,c`` name sections of those names; ``"x.lib";c`` names ``;c``: checked with
    ``ngspice -b``).  *cut* is the field as the comment-cutting reader saw it."""
    line = card.text.split("\n", 1)[0].rstrip("\r").lstrip(" \t")
    rest = line.split(None, 1)[-1]  # after the keyword
    close = rest.find(rest[0], 1) if rest[:1] in ("'", '"') else -1
    after = (
        rest[close + 1 :]
        if close > 0
        else rest.split(None, 1)[-1]
        if " " in rest or "\t" in rest
        else ""
    )
    words = after.split()
    raw = words[0] if words else cut
    return raw.strip("\"'")


def _follow(
    body: tuple[Node, ...],
    including: str,
    chain: tuple[tuple[str, str | None], ...],
    out: list[Include],
    cache: dict[str, Deck],
) -> None:
    for node in body:
        if isinstance(node, Block):
            if node.kind == "lib":
                continue  # sections are followed only when a .lib card names them
            _follow(node.body, including, chain, out, cache)
            continue
        if not isinstance(node, Card):
            continue
        target = include_target(node)
        if target is None:
            continue
        name, section = target
        base = Path(including).parent if including not in ("-", "<deck>") else Path(".")
        full = (base / os.path.expanduser(name)).resolve()
        where = node.location()
        link = (str(full), section.lower() if section is not None else None)
        if link in chain:  # a section may use another section of its own file (2.8)
            cycle = " -> ".join(_shown(c) for c in (*chain, link))
            raise DeckStructureError(
                f"include cycle: {cycle}",
                where,
                hint="remove the include that leads back to a file already being read",
            )
        if full.exists() and not full.is_file():
            raise DeckStructureError(
                f"included file {name!r} is not a regular file ({full})",
                where,
                hint="include a SPICE file; a folder, device or pipe is not read",
            )
        if not full.is_file():
            raise DeckStructureError(
                f"included file {name!r} not found (looked for {full})",
                where,
                hint="paths are relative to the file that holds the include card"
                if including not in ("-", "<deck>")
                else "a deck read from standard input includes relative to the current folder",
            )
        key = str(full)
        deck = cache.get(key)
        if deck is None:
            deck = read_include(key, name, where)
            cache[key] = deck
        if deck.source is not None and not _MAY_INCLUDE.search(deck.source.text):
            out.append(
                Include(
                    node,
                    key,
                    section,
                    deck,
                    library_section(deck, section, where) if section is not None else deck.body,
                )
            )
            continue
        chosen = deck.body
        if section is not None:
            chosen = library_section(deck, section, where)
        out.append(Include(node, key, section, deck, chosen))
        _follow(chosen, key, (*chain, link), out, cache)


def _shown(link: tuple[str, str | None]) -> str:
    name = os.path.basename(link[0])
    return name if link[1] is None else f"{name} section {link[1]}"


#: How many of an included file's first cards :func:`foreign_reason` looks at.
_SAMPLE_CARDS = 50
# A SPICE name: a letter, then no slash and at most one colon (``user:x:0:0:...:/bin/sh``
# is a line of a password file).
_SPICE_NAME = re.compile(r"[A-Za-z][^/\\:]*(?::[^/\\:]*)?\Z")
_CONTROL_BYTES = re.compile(r"[\x00-\x08\x0e-\x1f\x7f]")


#: Name suffixes that mark a file as SPICE (netlists, include and model library files).
SPICE_SUFFIXES = (".cir", ".ckt", ".sp", ".spi", ".spice", ".net", ".inc", ".lib", ".mod",
                  ".mdl", ".model", ".models", ".sub", ".subckt")  # fmt: skip
# Dot cards that define something: what a model or subcircuit file holds, and no key,
# password or configuration file does.
_DEFINING = frozenset({".model", ".subckt", ".param", ".func", ".lib", ".include", ".inc"})


def foreign_reason(deck: Deck) -> str | None:
    """Why an included file is plainly not a SPICE file, or ``None``: binary, a key or a
    certificate, lines that are no cards (a password or configuration file); and, for a file
    whose name has no SPICE suffix (:data:`SPICE_SUFFIXES`), a line that does not parse as
    a card.  Looks at the whole text for bytes and keys, and at the first few cards."""
    text = deck.source.text if deck.source is not None else deck.write()
    if len(_CONTROL_BYTES.findall(text, 0, 65536)) > 2:
        return "it holds control bytes: a binary file"
    if "-----BEGIN " in text:
        return "it holds a key or a certificate"
    for number, card in enumerate(iter_cards(deck.body)):
        if number >= _SAMPLE_CARDS:
            break
        if card.is_dot:
            continue
        fields = card.fields()
        if not _SPICE_NAME.match(card.head) or len(fields) < 3 or fields[1] == "=":
            return "its lines are not SPICE cards"
    if has_spice_suffix(deck.path):
        return None
    for card in iter_cards(deck.body):
        try:
            syntax_of(card)
        except HeatweaveError:
            return "its name has no SPICE suffix and not every line of it is a SPICE card"
    return None


def has_spice_suffix(path: str) -> bool:
    """True when a file's name ends in one of :data:`SPICE_SUFFIXES`."""
    return path.lower().endswith(SPICE_SUFFIXES)


def proven(deck: Deck) -> bool:
    """True when an included file that is not plainly foreign (:func:`foreign_reason`) is
    proven to be SPICE: its name has a SPICE suffix, or a card of it defines a model,
    subcircuit, parameter or function (no key, password or configuration file does).

    Looking card-like is no proof: a netrc line (``machine HOST login USER password
    SECRET``) parses as a MOSFET card.  A file not proven is read all the same (ngspice
    reads it: element cards in ``parasitics.txt``), but its lines are never shown
    (:attr:`heatweave.spice.deck.SourceFile.quotable`)."""
    if has_spice_suffix(deck.path):
        return True
    return any(card.name in _DEFINING for card in iter_cards(deck.body))


def read_include(path: str, name: str, where: Location | None) -> Deck:
    """The included file *path* (spelled *name* on the card at *where*), read: refused when
    plainly foreign (:func:`refuse_foreign`), its lines withheld from every message when not
    proven SPICE (:func:`proven`)."""
    try:
        deck = read_file(path, title=False)
    except UnreadableInputError as err:  # located at the card that names it
        raise DeckStructureError(err.message, where, hint=err.hint) from None
    refuse_foreign(deck, name, where)
    if proven(deck) or deck.source is None:
        return deck
    return read(deck.source.text, path, title=False, quotable=False)


def refuse_foreign(deck: Deck, name: str, where: Location | None) -> None:
    """Refuse an included file that is plainly not a SPICE file, quoting none of its lines:
    a deck from elsewhere may name a key or a password file, whose lines an error would
    show."""
    reason = foreign_reason(deck)
    if reason is not None:
        raise DeckStructureError(
            f"the included file {name!r} is not a SPICE file ({reason}); heatweave does not "
            "read it, and shows none of its lines",
            where,
            hint="check the path on this card: it should name a file of SPICE cards",
        )


def library_section(deck: Deck, section: str, where: Location | None) -> tuple[Node, ...]:
    names = []
    for node in deck.body:
        if isinstance(node, Block) and node.kind == "lib":
            names.append(node.label)
            if node.label.lower() == section.lower():
                return node.body
    known = ", ".join(names) or "none"
    raise DeckStructureError(
        f"library section {section!r} not found in {deck.path}",
        where,
        hint=f"sections in that file: {known}",
    )
