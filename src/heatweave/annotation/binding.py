"""Binding part tables to a deck's elements."""

from __future__ import annotations

import difflib
from collections.abc import Sequence
from typing import Protocol

from heatweave.annotation.types import (
    Annotation,
    BoundPart,
    PartSpec,
)
from heatweave.errors import AnnotationError
from heatweave.spice.globmatch import matching
from heatweave.tempmodels import REGISTRY

RESISTOR = "R"


class TopScope(Protocol):
    """What :func:`bind` needs to know about a deck's top level."""

    @property
    def instances(self) -> bool:
        """True when the top level holds a subcircuit instance (an ``X`` card)."""
        ...


class DeckCatalog(Protocol):
    """What :func:`bind` needs to know about a deck."""

    @property
    def deck_file(self) -> str:
        """The deck's file name, for messages."""
        ...

    def element_paths(self) -> Sequence[str]:
        """Every element with its instance path in the user's spelling: "R1", "X2.R4"."""
        ...

    def element_kind(self, path: str) -> str:
        """The element's first letter, upper case ("R", "Q", ...)."""
        ...

    def matching(self, pattern: str) -> Sequence[tuple[int, str]]:
        """(position in :meth:`element_paths`, path) of every element the glob *pattern*
        matches (``fnmatchcase`` rules, case ignored), in deck order."""
        ...

    @property
    def top(self) -> TopScope:
        """The deck's top level (for the hint when a pattern matches nothing)."""
        ...


def _leaf(path: str) -> str:
    return path.rsplit(".", 1)[-1]


def bind(annotation: Annotation, catalog: DeckCatalog) -> tuple[BoundPart, ...]:
    """Each deck element that a part table names, with that table, in deck order.

    Exact keys beat globs; an element matched by two globs (and no exact key) is an error.
    """
    return _bind(annotation, catalog)


def _bind(annotation: Annotation, catalog: DeckCatalog) -> tuple[BoundPart, ...]:
    if not annotation.parts:
        return ()
    elements: Sequence[str] = ()  # every path, read only for exact keys
    name_of: dict[int, str] = {}  # position -> path, of every element chosen
    # The first position of every name: the first card of a name is the one ngspice keeps.
    first: dict[str, int] | None = None
    exact: dict[int, PartSpec] = {}
    globbed: dict[int, PartSpec] = {}  # position -> the first pattern that matched it
    overlaps: set[int] = set()  # positions two patterns matched
    for spec in annotation.parts:
        if spec.is_glob:
            found = catalog.matching(spec.pattern)
            name_of.update(found)
            hits = dict.fromkeys([at for at, _path in found], spec)
            if not hits:
                raise AnnotationError(
                    f'pattern "{spec.pattern}" matches no element of {catalog.deck_file}',
                    spec.location,
                    _unmatched_hint(catalog),
                )
            overlaps |= globbed.keys() & hits.keys()
            globbed = hits | globbed  # the earlier pattern stays first
            continue
        if first is None:
            # SPICE names ignore case: compared in upper case, folded in one call.
            elements = list(catalog.element_paths())
            uppers = "\n".join(elements).upper().split("\n")
            first = dict(zip(reversed(uppers), range(len(uppers) - 1, -1, -1), strict=True))
        at = first.get(spec.pattern.upper(), -1)
        if at < 0:
            raise AnnotationError(
                f'part "{spec.pattern}" is not in {catalog.deck_file}',
                spec.location,
                _suggest(spec.pattern, elements),
            )
        if at in exact:
            raise AnnotationError(
                f'parts "{exact[at].pattern}" and "{spec.pattern}" name the same element '
                "(SPICE names ignore case)",
                spec.location,
                "merge the two tables",
            )
        exact[at] = spec
        name_of[at] = elements[at]
    clashes = overlaps - exact.keys()  # an exact key beats every pattern
    if clashes:
        at = min(clashes)  # the first in deck order
        element = name_of[at]
        patterns = [p for p in annotation.parts if p.is_glob and _matches(p, element)]
        raise AnnotationError(
            f'element "{element}" matches both "{patterns[0].pattern}" '
            f'and "{patterns[1].pattern}"',
            patterns[1].location,
            f'make the patterns disjoint, or add [part."{element}"], '
            "which takes precedence over patterns",
        )
    chosen = globbed | exact
    # In C-level passes over the chosen positions (a glob may choose a hundred thousand).
    order = sorted(chosen)  # deck order
    names = [name_of[at] for at in order]
    uppers = list(map(str.upper, names))
    if len(set(uppers)) < len(uppers):  # a name twice: ngspice's first card of it counts
        firsts = dict(zip(reversed(uppers), range(len(uppers) - 1, -1, -1), strict=True))
        keep = sorted(firsts.values())
        order, names = [order[k] for k in keep], [names[k] for k in keep]
    specs = [chosen[at] for at in order]
    kinds = [kind.upper() for kind in map(catalog.element_kind, names)]
    for element, kind, spec in zip(names, kinds, specs, strict=True):
        if kind in _NOT_ANNOTATABLE or (kind == RESISTOR) != (spec.model is not None):
            _refuse_kind(element, kind, spec)
    return tuple(map(BoundPart, names, kinds, specs, order))


def _matches(spec: PartSpec, element: str) -> bool:
    return bool(matching(spec.pattern.upper(), element.upper()))


def _unmatched_hint(catalog: DeckCatalog) -> str:
    """What to check when a pattern matches nothing: in a deck with subcircuit instances,
    how to reach inside them; in a flat deck, the element letters it has."""
    if catalog.top.instances:
        return (
            "check the spelling; a pattern covers the whole instance path, "
            "so reach elements inside subcircuit instance X1 with X1.*"
        )
    letters = sorted({path[:1].upper() for path in catalog.element_paths() if path[:1].isalpha()})
    if not letters:
        return f"check the deck: {catalog.deck_file} has no element cards"
    return (
        "check the spelling and the element letter the pattern starts with; the names in "
        f"{catalog.deck_file} start with {', '.join(letters)}"
    )


def _suggest(name: str, elements: Sequence[str]) -> str:
    upper = {e.upper(): e for e in elements}
    near = difflib.get_close_matches(name.upper(), list(upper), n=1, cutoff=0.6)
    if not near:
        leaf = {_leaf(e).upper(): e for e in elements}
        near = [p.upper() for p in (leaf.get(name.upper()),) if p]
    if near:
        return f'did you mean "{upper[near[0]]}"?'
    return "name an element as the deck does: R1, or X2.R4 for R4 inside subcircuit instance X2"


# Elements heatweave reads (lint, node counts) but cannot annotate (issues 15, 17).
_NOT_ANNOTATABLE = {
    "A": (
        "is an XSPICE code-model element: its ports (digital, vector, controlling) carry no "
        "terminal currents heatweave can sense, so it cannot be annotated",
        "annotate the analog element it drives (a resistor, a switch), or a subcircuit "
        "instance around it",
    ),
    "K": (
        "couples two inductors: it has no terminals and dissipates nothing",
        "annotate the inductors' winding resistances instead",
    ),
}


def _refuse_kind(element: str, kind: str, spec: PartSpec) -> None:
    via = f' (matched by "{spec.pattern}")' if spec.is_glob else ""
    if kind in _NOT_ANNOTATABLE:
        why, hint = _NOT_ANNOTATABLE[kind]
        raise AnnotationError(f'"{element}"{via} {why}', spec.location, hint)
    if kind == RESISTOR and spec.model is None:
        raise AnnotationError(
            f'resistor "{element}"{via} has no temperature model',
            spec.location,
            'add model = "linear" and tc1_ppm = ..., or another model: '
            + ", ".join(sorted(REGISTRY)),
        )
    if kind != RESISTOR and spec.model is not None:
        raise AnnotationError(
            f'model "{spec.model}" is for resistors; "{element}"{via} is a {kind} element',
            spec.location,
            "remove model and its keys: the element is then heat only, its V*I heats `to`",
        )
