"""Names that only an included file not proven SPICE holds, kept out of every report.

A node or element name is content of the file it is written in: a deck from elsewhere may
include a file whose cards run (``.include board_rc``) and whose words are not for showing
(:func:`heatweave.spice.project.proven`).  Messages already withhold its lines
(:attr:`heatweave.errors.Location.withheld`); a report does not list a signal whose name
holds a word found in such a file and in no quotable one, unless the user named it (an
annotated part, a ``--probe``), since what the user wrote is theirs to see.
"""

from __future__ import annotations

import re

from heatweave.errors import Plain
from heatweave.spice.deck import Deck
from heatweave.spice.project import Project

# How ngspice and heatweave split a card into words (blanks, , = ( ) quotes braces, and the
# dots of expanded names such as r.x1.rs).
WORDS = re.compile(r"[^\s,=(){}'\".]+")


def quotable(deck: Deck) -> bool:
    """True when messages may quote *deck*'s lines (see the module docstring)."""
    return deck.source is None or deck.source.quotable


def hidden_files(project: Project) -> list[Deck]:
    """The included files of *project* whose lines no message or report may show."""
    return [inc.deck for inc in project.includes if not quotable(inc.deck)]


def private_words(project: Project) -> frozenset[str]:
    """Every word (lower case) of a hidden file that no quotable file of *project* holds."""
    hidden = hidden_files(project)
    if not hidden:
        return frozenset()
    words: set[str] = set()
    for deck in hidden:
        words.update(WORDS.findall(deck.write().lower()))
    for deck in (project.deck, *(inc.deck for inc in project.includes if quotable(inc.deck))):
        words.difference_update(WORDS.findall(deck.write().lower()))
    return frozenset(words)


def is_private(name: str, words: frozenset[str]) -> bool:
    """True when signal *name* (``x1.mid``, ``vsense#branch``) holds a private word."""
    return bool(words) and any(w in words for w in WORDS.findall(name.lower().replace("#", " ")))


def left_out_note(project: Project, count: int) -> Plain:
    """What a report says when it leaves *count* signals out (heatweave's own words)."""
    names = ", ".join(sorted({d.path.rsplit("/", 1)[-1] for d in hidden_files(project)}))
    return Plain(
        f"{count} signal{'s' if count != 1 else ''} named in {names} left out: a name is "
        "content of its file, which is not proven to be a SPICE file; name the file with a "
        "SPICE suffix (.inc, .cir, .lib ...), or ask for a signal with --probe, to see it"
    )
