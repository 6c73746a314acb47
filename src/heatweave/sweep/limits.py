"""``sweep --check``: every corner's limits, summed up over the sweep.

The limits themselves are checked per corner in the workers (:func:`heatweave.sweep.corners.
run_corner` with :func:`heatweave.checks.limits.evaluate`); this module only reads them back:

* one line per violated limit, naming the corner (its ambient, parameter values and draw),
  in the words of ``check``'s lines (:meth:`heatweave.checks.limits.LimitResult.message`);
* the summary: corners checked, corners failing, and per limit (part or signal and kind)
  the worst margin over the corners and the corner it occurs at;
* the ``check`` object of the JSON report (:func:`as_dict`);
* the JUnit test cases: one per corner and limit, and one ``run`` error case for a corner
  that gave no answer.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

from heatweave.checks.limits import LimitResult
from heatweave.reports.junit import Case, shared_time
from heatweave.sweep.corners import CornerOutcome, SweepResult, corner_ambient, describe


@dataclass(frozen=True, slots=True)
class Worst:
    """The smallest margin of one limit over the corners, and where it occurs."""

    result: LimitResult
    corner: CornerOutcome


def where(result: SweepResult, outcome: CornerOutcome) -> str:
    """``corner 3 (ambient 85 degC, vsup=12, draw 4)`` with the ambient the corner ran at."""
    return describe(outcome.corner, corner_ambient(result, outcome))


def checked(result: SweepResult) -> list[CornerOutcome]:
    """The corners whose limits were checked (every corner that ran)."""
    return [o for o in result.outcomes if o.limits is not None]


def worst_margins(result: SweepResult) -> list[Worst]:
    """Per limit, in the order the corners list them, its smallest margin (the first corner
    with it on a tie)."""
    worst: dict[tuple[str, str], Worst] = {}
    for outcome in checked(result):
        for item in outcome.limits or ():
            key = (item.subject, item.limit)
            if key not in worst or item.margin < worst[key].result.margin:
                worst[key] = Worst(item, outcome)
    return list(worst.values())


def violation_lines(result: SweepResult) -> list[str]:
    """One ``FAIL`` line per violated limit of every corner, in corner order."""
    return [
        item.message(where(result, outcome))
        for outcome in result.outcomes
        for item in outcome.violated
    ]


def summary_lines(result: SweepResult) -> list[str]:
    """``DECK: N corners checked, M failing`` and the worst margin of each limit."""
    ran = checked(result)
    failing = [o for o in ran if o.violated]
    noun = "corner" if len(ran) == 1 else "corners"
    head = f"{result.inputs.deck_path}: {len(ran)} {noun} checked, {len(failing)} failing"
    if result.failed:
        head += f", {len(result.failed)} gave no answer"
    lines = [head]
    worst = worst_margins(result)
    if ran and not worst:
        lines.append("  no limits: the annotation file sets no tmax, power_rating or [limit]")
    for entry in worst:
        item = entry.result
        room = "margin" if item.passed else "over by" if item.upper else "under by"
        lines.append(
            f"  worst {item.subject} {item.limit}: {room} {abs(item.margin):.5g} {item.unit} "
            f"at {where(result, entry.corner)} ({item.value:.5g} {item.unit})"
        )
    return lines


def as_dict(result: SweepResult) -> dict[str, Any]:
    """The JSON report's ``check`` object: ``corners_checked`` (count), ``corners_failing``
    (indices of corners that violate a limit) and ``worst``: per limit, the ``corner``
    index where its margin is smallest and that corner's result, in the shape of the
    corners' ``limits``."""
    ran = checked(result)
    return {
        "corners_checked": len(ran),
        "corners_failing": [o.corner.index for o in ran if o.violated],
        "worst": [
            {"corner": w.corner.corner.index, **w.result.as_dict()} for w in worst_margins(result)
        ],
    }


def junit_cases(result: SweepResult) -> tuple[Case, ...]:
    """One test case per corner and limit (the failure message carries the numbers), and
    one ``run`` error case per corner that gave no answer, in corner order; a corner's
    cases share its run's time equally."""
    classname = f"heatweave.{Path(result.inputs.deck_path).stem}"
    cases: list[Case] = []
    for outcome in result.outcomes:
        corner = where(result, outcome)
        if outcome.limits is None:
            failed = Case(f"{corner} run", classname, error=outcome.error or "failed")
            cases += shared_time((failed,), outcome.seconds)
            continue
        own = [
            Case(f"{corner} {item.subject} {item.limit}", classname,
                 failure=None if item.passed else item.message(corner))
            for item in outcome.limits
        ]  # fmt: skip
        cases += shared_time(own, outcome.seconds)
    return tuple(cases)
