"""Model levels this ngspice 39 build has, and a located error for a level it does not.

An element whose ``.model`` names a ``level=`` the build lacks stops ngspice 39 at the
element's line ("could not find a valid modelname" for a MOSFET, "Unknown device type for
model ..." or "Unable to find definition of given model" for the others); a model no
element uses is never looked up and runs.  The table holds, per device family, the levels
1 to 99 that ``ngspice -b`` was seen to load, one deck per level with ``.op`` (the test
``tests/test_model_levels.py`` reruns every level 1 to 100 and holds the table both ways).
Levels 0 and 100 up, and levels not written as whole numbers, are left alone: ngspice 39
takes 0, sets 100 up to level 1 with a warning, and was not probed on fractions.
Diodes take every level (checked 1 to 100), so they have no row.
"""

from __future__ import annotations

from collections.abc import Iterator

from heatweave.errors import DeckSyntaxError, Finding
from heatweave.spice.deck import Card
from heatweave.spice.grammar import CardSyntaxError, parse_card, syntax_of
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.syntax import ElementSyntax, ModelSyntax, Param, Value

# family -> levels 1..99 ngspice 39.3 (this build) loads; model types of each family.
LEVELS: dict[str, frozenset[int]] = {
    "mos": frozenset({1, 2, 3, 4, 5, 6, 8, 9, 10, 14, 49, 54, 55, 56, 57, 58, 60, 68, 73}),
    "bjt": frozenset({1, 2, 4, 8, 9}),
    "jfet": frozenset({1, 2}),
    "mesfet": frozenset({1, 2, 3, 4, 5, 6}),
}
FAMILIES = {"nmos": "mos", "pmos": "mos", "npn": "bjt", "pnp": "bjt", "njf": "jfet",
            "pjf": "jfet", "nmf": "mesfet", "pmf": "mesfet"}  # fmt: skip
LETTERS = {"M": "mos", "Q": "bjt", "J": "jfet", "Z": "mesfet"}
_WORDS = {
    "mos": "could not find a valid modelname",
    "bjt": "Unable to find definition of given model",
    "jfet": "Unknown device type for model",
    "mesfet": "Unknown device type for model",
}


def unknown_levels(index: DeckIndex) -> Iterator[Finding]:
    """One error at the ``level=`` of each model an element uses whose level ngspice 39
    does not have."""
    seen: set[str] = set()
    for scope in index.top.walk():
        for card in scope.cards:
            family = LETTERS.get(card.letter)
            if family is None:
                continue
            try:
                syntax = syntax_of(card)
            except DeckSyntaxError:
                continue  # lint reports the grammar
            if not isinstance(syntax, ElementSyntax):
                continue
            words = [*syntax.nodes, *(w for w in syntax.positional if isinstance(w, Value))]
            name = next((w.text.lower() for w in words if w.text.lower() in index.models), None)
            if name is None or name in seen:
                continue
            model = index.models[name]
            found = model_level(model)
            if found is None or FAMILIES.get(found[0]) != family:
                continue
            seen.add(name)
            kind, param, level = found
            known = LEVELS[family]
            if 1 <= level <= 99 and level not in known:
                yield Finding(
                    "error",
                    f"{syntax.name.text} uses the {kind} model {name} of level={level}, which "
                    f"ngspice 39 does not have: it stops with '{_WORDS[family]}'",
                    model.location(param.value.offset if isinstance(param.value, Value) else 0),
                    f"levels ngspice 39 has for {kind}: "
                    + ", ".join(str(n) for n in sorted(known)),
                )


def model_level(model: Card) -> tuple[str, Param, int] | None:
    """(model type, the level= parameter, its whole-number value), or ``None``."""
    try:
        syntax = parse_card(model.logical().text)
    except CardSyntaxError:
        return None
    if not isinstance(syntax, ModelSyntax):
        return None
    param = syntax.param("level")
    if param is None or not isinstance(param.value, Value):
        return None
    number = param.value.number
    if number is None or not number.is_integer():
        return None
    return syntax.type.text.lower(), param, int(number)
