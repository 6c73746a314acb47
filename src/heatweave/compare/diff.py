"""Pair two snapshots part by part and limit by limit, and hold the changes to the gate.

The gate has three thresholds, each optional (the annotation file's ``[review]`` table or
the command line's options):

* ``max_rise_growth`` (K): the most a part's rise above the ambient may grow;
* ``max_drift_growth_ppm`` (ppm): the most the size of a part's resistance drift may grow;
* ``max_margin_loss_percent`` (%): the most any limit's margin may shrink, in percent of
  the old margin (a margin that was zero or negative may not shrink at all).

A limit that held and now fails crosses the gate whatever the thresholds.  Parts are sorted
worst first: gate crossings, then limits newly failed, then the growth of the rise, then of
the drift; limits likewise by verdict, then by the margin lost in percent.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass

from heatweave.compare.snapshot import LimitFigures, PartFigures, Snapshot


@dataclass(frozen=True, slots=True)
class Thresholds:
    """The gate's thresholds; ``None`` leaves that quantity ungated."""

    max_rise_growth: float | None = None
    max_drift_growth_ppm: float | None = None
    max_margin_loss_percent: float | None = None

    def over(self, other: Thresholds) -> Thresholds:
        """These thresholds where set, else *other*'s (options over the file's table)."""
        return Thresholds(
            *(
                mine if mine is not None else theirs
                for mine, theirs in zip(self.as_tuple(), other.as_tuple(), strict=True)
            )
        )

    def as_tuple(self) -> tuple[float | None, float | None, float | None]:
        return (self.max_rise_growth, self.max_drift_growth_ppm, self.max_margin_loss_percent)


@dataclass(frozen=True, slots=True)
class Quantity:
    """One figure of a part as comparisons show it."""

    key: str
    title: str
    unit: str
    read: Callable[[PartFigures], float | None]
    worse_up: bool = True  # True when a larger value is worse


QUANTITIES = (
    Quantity("temperature", "final temperature", "degC", lambda p: p.temperature),
    Quantity("peak_temperature", "peak temperature", "degC", lambda p: p.peak),
    Quantity("settled_mean", "settled mean temperature", "degC", lambda p: p.settled_mean),
    Quantity("rise", "rise above ambient", "K", lambda p: p.rise),
    Quantity("drift_ppm", "drift", "ppm", lambda p: p.drift_ppm),
    Quantity("power", "dissipation", "W", lambda p: p.power),
    Quantity("margin_tmax", "tmax margin", "K", lambda p: p.margin_tmax, worse_up=False),
    Quantity("margin_power", "derated power margin", "W", lambda p: p.margin_power, False),
)


@dataclass(frozen=True, slots=True)
class Change:
    """One quantity, old and new (``None`` where a side does not have it)."""

    quantity: Quantity
    old: float | None
    new: float | None

    @property
    def delta(self) -> float | None:
        return None if self.old is None or self.new is None else self.new - self.old


@dataclass(frozen=True, slots=True)
class PartChange:
    """One part across the two sides; ``status`` is ``both``, ``added`` or ``removed``."""

    name: str
    status: str
    changes: tuple[Change, ...]
    crossed: tuple[str, ...]  # the gate's words for each threshold crossed

    def change(self, key: str) -> Change | None:
        return next((c for c in self.changes if c.quantity.key == key), None)

    @property
    def rise_growth(self) -> float | None:
        found = self.change("rise")
        return None if found is None else found.delta

    @property
    def drift_growth(self) -> float | None:
        found = self.change("drift_ppm")
        if found is None or found.old is None or found.new is None:
            return None
        return abs(found.new) - abs(found.old)


@dataclass(frozen=True, slots=True)
class LimitChange:
    """One limit across the two sides."""

    subject: str
    limit: str
    old: LimitFigures | None
    new: LimitFigures | None
    crossed: tuple[str, ...]

    @property
    def status(self) -> str:
        """``added``, ``removed``, ``pass->FAIL``, ``FAIL->pass``, ``pass`` or ``FAIL``."""
        if self.old is None:
            return "added"
        if self.new is None:
            return "removed"
        if self.old.passed != self.new.passed:
            return "pass->FAIL" if self.old.passed else "FAIL->pass"
        return "pass" if self.new.passed else "FAIL"

    @property
    def margin_loss_percent(self) -> float | None:
        """How much of the old margin was lost, in percent (negative: margin gained)."""
        if self.old is None or self.new is None:
            return None
        return margin_loss_percent(self.old.margin, self.new.margin)


def margin_loss_percent(old: float, new: float) -> float:
    """The margin lost from *old* to *new* in percent of ``|old|``; infinite when a zero
    margin shrank."""
    lost = old - new
    if old == 0:
        return 0.0 if lost <= 0 else math.inf
    return lost / abs(old) * 100.0


@dataclass(frozen=True, slots=True)
class Comparison:
    """The whole comparison, parts and limits sorted worst first."""

    old: Snapshot
    new: Snapshot
    thresholds: Thresholds
    parts: tuple[PartChange, ...]
    limits: tuple[LimitChange, ...]

    @property
    def crossed(self) -> tuple[str, ...]:
        """One line per gate crossing, parts first."""
        lines = [f"{p.name}: {why}" for p in self.parts for why in p.crossed]
        lines += [f"{c.subject} {c.limit}: {why}" for c in self.limits for why in c.crossed]
        return tuple(lines)

    @property
    def passed(self) -> bool:
        return not self.crossed


def _num(value: float) -> str:
    return f"{value:.4g}"


def _part_crossings(part: PartChange, gate: Thresholds) -> tuple[str, ...]:
    out = []
    rise = part.rise_growth
    if gate.max_rise_growth is not None and rise is not None and rise > gate.max_rise_growth:
        out.append(f"rise grew by {_num(rise)} K, more than {_num(gate.max_rise_growth)} K")
    drift, limit = part.drift_growth, gate.max_drift_growth_ppm
    if limit is not None and drift is not None and drift > limit:
        out.append(f"drift grew by {_num(drift)} ppm, more than {_num(limit)} ppm")
    return tuple(out)


def _limit_crossings(change: LimitChange, gate: Thresholds) -> tuple[str, ...]:
    if change.old is None or change.new is None:
        return ()
    out = []
    if change.status == "pass->FAIL":
        out.append(
            f"held before and fails now (margin {_num(change.new.margin)} {change.new.margin_unit})"
        )
    loss, limit = change.margin_loss_percent, gate.max_margin_loss_percent
    if limit is not None and loss is not None and loss > limit:
        lost = change.old.margin - change.new.margin
        out.append(
            f"margin shrank by {_num(lost)} {change.new.margin_unit} ({_num(loss)} %), "
            f"more than {_num(limit)} %"
        )
    return tuple(out)


def _part(name: str, old: PartFigures | None, new: PartFigures | None) -> PartChange:
    status = "both" if old and new else ("added" if new else "removed")
    changes = tuple(
        Change(q, q.read(old) if old else None, q.read(new) if new else None) for q in QUANTITIES
    )
    kept = tuple(c for c in changes if c.old is not None or c.new is not None)
    return PartChange(name, status, kept, ())


def _part_key(part: PartChange) -> tuple[float, ...]:
    return (
        -len(part.crossed),
        -(part.rise_growth or 0.0),
        -(part.drift_growth or 0.0),
        {"both": 0, "added": 1, "removed": 2}[part.status],
    )


_STATUS_ORDER = {"pass->FAIL": 0, "FAIL": 1, "added": 2, "removed": 3, "pass": 4, "FAIL->pass": 5}


def _limit_key(change: LimitChange) -> tuple[float, ...]:
    loss = change.margin_loss_percent
    return (
        -len(change.crossed),
        _STATUS_ORDER[change.status],
        -(loss if loss is not None else -math.inf),
    )


def compare(old: Snapshot, new: Snapshot, gate: Thresholds) -> Comparison:
    """Pair *old* and *new* and hold each change to *gate*."""
    names = list(old.parts) + [n for n in new.parts if n not in old.parts]
    parts = []
    for name in names:
        part = _part(name, old.parts.get(name), new.parts.get(name))
        parts.append(PartChange(part.name, part.status, part.changes, _part_crossings(part, gate)))
    keys = list(old.limits) + [k for k in new.limits if k not in old.limits]
    limits = []
    for subject, limit in keys:
        found = LimitChange(
            subject, limit, old.limits.get((subject, limit)), new.limits.get((subject, limit)), ()
        )
        limits.append(
            LimitChange(subject, limit, found.old, found.new, _limit_crossings(found, gate))
        )
    return Comparison(
        old, new, gate, tuple(sorted(parts, key=_part_key)), tuple(sorted(limits, key=_limit_key))
    )
