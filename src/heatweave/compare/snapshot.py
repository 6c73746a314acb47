"""One side of a comparison, read from the JSON result a command wrote.

``run --json``, ``settle --json`` and ``sweep --json`` results are all understood; the keys
are read with the meaning their writers document (:mod:`heatweave.reports.json_report`,
:mod:`heatweave.reports.settle`, :mod:`heatweave.sweep.report`), so a key whose definition
changes there changes here with it.  A sweep's parts and limits are named per corner
(``R1 @ 85 degC, rload=100``) so that corners pair up by what they ran, not by position.

Limits come from the result's ``limits`` list where it has one (``check``'s
:meth:`~heatweave.checks.limits.LimitResult.as_dict` form); a result without one still holds its
parts' ``tmax`` and derated ``power_rating`` margins, which become the same two limits.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import PureWindowsPath
from typing import Any

from heatweave import files
from heatweave.errors import Location, UnreadableInputError, UsageError

PPM = 1e6


@dataclass(frozen=True, slots=True)
class PartFigures:
    """What a result says about one part; ``None`` where it does not apply or is not given."""

    temperature: float | None  # final (run) or settled cycle mean (settle), degC
    peak: float | None  # hottest in a transient or within the settled period, degC
    settled_mean: float | None  # settle only, degC
    rise: float | None  # temperature above the ambient, K
    drift_ppm: float | None  # resistance against the deck's value, ppm
    power: float | None  # W
    margin_tmax: float | None  # K
    margin_power: float | None  # W


@dataclass(frozen=True, slots=True)
class LimitFigures:
    """One limit of one side: the value, its bound, the room left and the verdict."""

    value: float
    bound: float
    unit: str
    margin: float
    passed: bool

    @property
    def margin_unit(self) -> str:
        """The margin's unit: a temperature difference is in K, whatever the value's."""
        return "K" if self.unit == "degC" else self.unit


@dataclass(frozen=True, slots=True)
class Snapshot:
    """Everything one side contributes: where it came from, its parts and its limits."""

    label: str  # "HEAD~1", "old.json", ...
    kind: str  # "run", "settle" or "sweep"
    deck: str
    annotations_sha256: str
    analysis: str
    ambient: float | None
    parts: Mapping[str, PartFigures]
    limits: Mapping[tuple[str, str], LimitFigures]
    warnings: tuple[str, ...] = ()
    #: The deck's path inside its git work tree ("/"-separated) and the SHA-256 of its
    #: bytes, as the result records them (``None``: not in a repository, or not recorded).
    deck_in_repository: str | None = None
    deck_sha256: str | None = None


def _text(value: object) -> str | None:
    return value if isinstance(value, str) and value else None


def _float(value: object) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    return float(value) if math.isfinite(value) else None


def _dict(value: object) -> dict[str, Any]:
    return value if isinstance(value, dict) else {}


def kind_of(data: Mapping[str, Any]) -> str:
    """``sweep``, ``settle`` or ``run``: which command wrote *data*."""
    if "corners" in data:
        return "sweep"
    if data.get("analysis") == "settle":
        return "settle"
    return "run"


def part_figures(part: Mapping[str, Any], ambient: float | None, settled: bool) -> PartFigures:
    """A part object of a result (``parts.NAME``) as :class:`PartFigures`."""
    temperature = _float(part.get("temperature"))
    drift = _float(part.get("resistance_change_ppm"))
    if drift is None:  # settle writes the resistance and its nominal value only
        resistance, nominal = _float(part.get("resistance")), _float(part.get("nominal_resistance"))
        if resistance is not None and nominal:
            drift = (resistance / nominal - 1.0) * PPM
    margins = _dict(part.get("margins"))
    rise = None if temperature is None or ambient is None else temperature - ambient
    return PartFigures(
        temperature=None if settled else temperature,
        peak=_float(part.get("peak_temperature")),
        settled_mean=temperature if settled else None,
        rise=rise,
        drift_ppm=drift,
        power=_float(part.get("power")),
        margin_tmax=_float(margins.get("temperature")),
        margin_power=_float(margins.get("power")),
    )


def limits_from_margins(
    name: str, part: Mapping[str, Any], figures: PartFigures
) -> dict[tuple[str, str], LimitFigures]:
    """A part's ``tmax`` and derated ``power_rating`` limits, from its ratings and margins
    (for results written without a ``limits`` list)."""
    ratings = _dict(part.get("ratings"))
    out: dict[tuple[str, str], LimitFigures] = {}
    tmax, allowed = _float(ratings.get("tmax")), _float(ratings.get("allowed_power"))
    if tmax is not None and figures.margin_tmax is not None:
        margin = figures.margin_tmax
        out[(name, "tmax")] = LimitFigures(tmax - margin, tmax, "degC", margin, margin >= 0)
    if allowed is not None and figures.margin_power is not None:
        margin = figures.margin_power
        out[(name, "power_rating")] = LimitFigures(
            allowed - margin, allowed, "W", margin, margin >= 0
        )
    return out


def limit_figures(item: Mapping[str, Any]) -> tuple[tuple[str, str], LimitFigures] | None:
    """One entry of a ``limits`` list, keyed by (subject, limit)."""
    value, bound, margin = (_float(item.get(k)) for k in ("value", "bound", "margin"))
    subject, limit = item.get("subject"), item.get("limit")
    if None in (value, bound, margin) or not isinstance(subject, str) or not isinstance(limit, str):
        return None
    assert value is not None and bound is not None and margin is not None
    figures = LimitFigures(
        value, bound, str(item.get("unit", "")), margin, bool(item.get("passed"))
    )
    return (subject, limit), figures


def _side(
    data: Mapping[str, Any], ambient: float | None, settled: bool, suffix: str = ""
) -> tuple[dict[str, PartFigures], dict[tuple[str, str], LimitFigures]]:
    parts: dict[str, PartFigures] = {}
    derived: dict[tuple[str, str], LimitFigures] = {}
    for name, part in _dict(data.get("parts")).items():
        figures = part_figures(_dict(part), ambient, settled)
        parts[name + suffix] = figures
        derived.update(limits_from_margins(name + suffix, _dict(part), figures))
    listed = data.get("limits")
    if not isinstance(listed, list):
        return parts, derived
    limits: dict[tuple[str, str], LimitFigures] = {}
    for item in listed:
        found = limit_figures(_dict(item))
        if found is not None:
            (subject, limit), checked = found
            limits[(subject + suffix, limit)] = checked
    return parts, limits


def corner_label(corner: Mapping[str, Any]) -> str:
    """`` @ 85 degC, rload=100, draw 3``: what a sweep corner ran, for naming its parts."""
    bits = []
    ambient = _float(corner.get("ambient"))
    if ambient is not None:
        bits.append(f"{ambient:g} degC")
    bits += [f"{name}={value:g}" for name, value in _dict(corner.get("params")).items()]
    if corner.get("draw") is not None:
        bits.append(f"draw {corner['draw']}")
    return " @ " + ", ".join(bits) if bits else f" @ corner {corner.get('index')}"


def snapshot_of(data: Mapping[str, Any], label: str) -> Snapshot:
    """The :class:`Snapshot` of a result's plain data (as its JSON holds it)."""
    kind = kind_of(data)
    parts: dict[str, PartFigures] = {}
    limits: dict[tuple[str, str], LimitFigures] = {}
    ambient = _float(data.get("ambient"))
    if kind == "sweep":
        for raw in data.get("corners") or []:
            corner = _dict(raw)
            if corner.get("status") != "ok":
                continue
            more_parts, more_limits = _side(
                corner, _float(corner.get("ambient")), False, corner_label(corner)
            )
            parts.update(more_parts)
            limits.update(more_limits)
        analysis = ", ".join(str(a) for a in data.get("analysis_commands") or []) or "sweep"
    else:
        parts, limits = _side(data, ambient, kind == "settle")
        analysis = str(data.get("analysis", ""))
    annotations = _dict(data.get("annotations"))
    return Snapshot(
        label=label,
        kind=kind,
        deck=str(data.get("deck", "")),
        annotations_sha256=str(annotations.get("sha256", "")),
        analysis=analysis,
        ambient=ambient,
        parts=parts,
        limits=limits,
        warnings=tuple(str(w) for w in data.get("warnings") or []),
        deck_in_repository=_text(data.get("deck_in_repository")),
        deck_sha256=_text(data.get("deck_sha256")),
    )


def other_deck(old: Snapshot, new: Snapshot) -> str | None:
    """Why *old* and *new* are results of two different decks, or ``None``.

    A deck is known by what the results record of it: where it sits in its repository
    (two checkouts hold one deck at one place; ``amp/board.cir`` and ``psu/board.cir`` are
    two), else its bytes (one deck under two names), else its file name (results of decks
    outside a repository, or written before heatweave recorded more: revisions of one
    design keep the name, whatever the folder).  Results with parts and none in common are
    two designs, whose changes mean nothing.  A deck read from standard input (``-``) has
    no name to hold.
    """
    places = [side.deck_in_repository for side in (old, new)]
    # The name after the last "/" or "\\": a result may have been written on either system.
    names = [PureWindowsPath(side.deck).name for side in (old, new)]
    same_bytes = old.deck_sha256 is not None and old.deck_sha256 == new.deck_sha256
    if same_bytes:
        pass  # one deck, whatever its names
    elif places[0] is not None and places[1] is not None:
        if places[0] != places[1]:
            return f"{old.label} is a result of {places[0]} and {new.label} of {places[1]}"
    elif "-" not in names and "" not in names and names[0] != names[1]:
        return f"{old.label} is a result of {names[0]} and {new.label} of {names[1]}"
    if old.parts and new.parts and not _designs(old) & _designs(new):
        return f"{old.label} and {new.label} have no part in common"
    return None


def _designs(side: Snapshot) -> set[str]:
    """The parts of *side* without a sweep's corner (``R1 @ 85 degC`` is ``R1``): a sweep
    over other corners still holds the same parts."""
    return {name.split(" @ ", 1)[0] for name in side.parts}


def read_result(path: str) -> dict[str, Any]:
    """A saved ``run``/``settle``/``sweep`` JSON result, or a refusal in words."""
    try:  # a pipe or device is refused, not waited on or read to no end
        text = files.read_bytes(path).decode("utf-8")
    except (OSError, UnicodeDecodeError) as err:
        raise UnreadableInputError(
            f"cannot read the result {path}: {getattr(err, 'strerror', None) or err}",
            hint="give the JSON file a run, settle or sweep wrote with --json",
        ) from None
    try:
        data = json.loads(text)
    except json.JSONDecodeError as err:
        raise UsageError(
            f"{path} is not JSON: {err.msg}",
            Location(path, err.lineno, err.colno),
            "give the JSON file a run, settle or sweep wrote with --json",
        ) from None
    if not isinstance(data, dict) or not isinstance(
        data.get("parts", data.get("corners")), dict | list
    ):
        raise UsageError(
            f"{path} is not a heatweave result: it has no parts",
            hint="give the JSON file a run, settle or sweep wrote with --json",
        )
    return data
