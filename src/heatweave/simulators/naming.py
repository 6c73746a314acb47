"""One naming scheme for plots and vectors, whichever back end produced them.

ngspice names the same quantity differently depending on where it is read: the raw file
says ``v(out)``, ``i(v1)`` and ``v(v-sweep)``; the shared library's memory says ``out``,
``v1#branch`` and ``v-sweep``.  Everything a back end returns goes through
:func:`vector_name` so that callers see one spelling:

* node voltages ``v(node)`` in lower case, hierarchical names kept (``v(x1.n3)``);
* branch currents ``i(element)`` (``v1#branch`` becomes ``i(v1)``);
* the scale unwrapped: ``time``, ``frequency``, ``v-sweep``, ``i-sweep``, ``temp-sweep``;
* anything else (``@r1[i]``, noise densities, user ``let`` vectors) lower-cased as is.
"""

from __future__ import annotations

import re

VOLTAGE = "voltage"
CURRENT = "current"
TIME = "time"
FREQUENCY = "frequency"

_WRAPPED = re.compile(r"^([vi])\((.*)\)$")
_BRANCH = "#branch"

# Titles ngspice writes in a raw file's ``Plotname:`` line, and the kind each one is.
_TITLE_KINDS = {
    "operating point": "op",
    "transient analysis": "tran",
    "ac analysis": "ac",
    "dc transfer characteristic": "dc",
    "noise spectral density curves": "noise",
    "integrated noise": "noise",
    "transfer function": "tf",
    "sensitivity analysis": "sens",
    "ac sensitivity analysis": "sens",
    "pole-zero analysis": "pz",
    "distortion analysis": "disto",
    "s-parameter analysis": "sp",
}


def is_scale_name(name: str, vector_type: str | None) -> bool:
    """True for a vector ngspice uses as the x axis of a plot."""
    if vector_type in (TIME, FREQUENCY):
        return True
    match = _WRAPPED.match(name.lower())
    bare = match.group(2) if match else name.lower()
    return bare in (TIME, FREQUENCY) or bare.endswith("-sweep")


def vector_name(raw: str, vector_type: str | None, *, scale: bool = False) -> str:
    """The normalised name of vector *raw* whose ngspice type is *vector_type*."""
    name = raw.strip().lower()
    match = _WRAPPED.match(name)
    if scale:
        return match.group(2) if match else name
    if name.endswith(_BRANCH):
        return f"i({name[: -len(_BRANCH)]})"
    if match or name.startswith("@"):
        return name
    if vector_type == VOLTAGE:
        return f"v({name})"
    if vector_type == CURRENT:
        return f"i({name})"
    return name


def kind_from_title(title: str) -> str:
    """The analysis kind (``op``, ``tran``, ``ac``, ``dc`` ...) of a raw file's plot title."""
    key = title.strip().lower()
    if key in _TITLE_KINDS:
        return _TITLE_KINDS[key]
    return key.split()[0] if key else "unknown"


def kind_from_plot_name(name: str) -> str:
    """The analysis kind of an in-memory plot name such as ``tran2``."""
    return name.rstrip("0123456789").lower() or "unknown"


def number_plots(kinds: list[str]) -> list[str]:
    """Names ``tran1``, ``tran2``, ``op1`` ... in run order, independent of ngspice's counters."""
    counts: dict[str, int] = {}
    names = []
    for kind in kinds:
        counts[kind] = counts.get(kind, 0) + 1
        names.append(f"{kind}{counts[kind]}")
    return names
