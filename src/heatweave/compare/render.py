"""The forms of a comparison: terminal table, Markdown, JSON and JUnit XML.

Every form reads the rows :func:`part_rows` and :func:`limit_rows` give, so the terminal,
the Markdown comment, the page and the JSON agree to the digit.  Cells carry a level:
``worse`` (the change makes the part hotter, its drift larger or a margin smaller),
``better``, ``over`` (the gate is crossed) or nothing.
"""

from __future__ import annotations

import json
import math
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

from heatweave import __version__
from heatweave.compare.diff import Change, Comparison, LimitChange, PartChange, Thresholds
from heatweave.compare.snapshot import LimitFigures
from heatweave.reports.cautions import CAUTION_LINE, CAUTION_TEXT
from heatweave.reports.junit import Case, Suite
from heatweave.reports.junit import render as render_junit_xml
from heatweave.reports.table import WIDTH, cell_styles, grid

#: How many parts and limits the Markdown shows before the collapsed section.
SHOWN = 5
DASH = "-"


def number(value: float | None, unit: str, signed: bool = False) -> str:
    """A value as tables show it: temperatures to the mK, drift to 0.1 ppm, others to
    five significant digits."""
    if value is None:
        return DASH
    if math.isinf(value):
        return "inf"
    sign = "+" if signed else ""
    if unit in ("degC", "K"):
        return format(value, f"{sign}.3f")
    if unit in ("ppm", "%"):
        return format(value, f"{sign}.1f")
    return format(value, f"{sign}.5g")


@dataclass(frozen=True, slots=True)
class Row:
    """One line of a part or limit table, already formatted; ``level`` marks the change."""

    subject: str
    what: str
    old: str
    new: str
    change: str
    unit: str
    status: str
    level: str  # "", "worse", "better", "over"


def _level(change: Change) -> str:
    delta = change.delta
    if delta is None or delta == 0:
        return ""
    worse = delta > 0 if change.quantity.worse_up else delta < 0
    if change.quantity.key == "drift_ppm" and change.old is not None and change.new is not None:
        worse = abs(change.new) > abs(change.old)
    return "worse" if worse else "better"


def part_rows(part: PartChange) -> list[Row]:
    """The rows of one part: one per quantity either side has."""
    rows = []
    gated = {"rise" if why.startswith("rise") else "drift_ppm" for why in part.crossed}
    for change in part.changes:
        unit = change.quantity.unit
        over = change.quantity.key in gated
        rows.append(
            Row(
                part.name,
                change.quantity.title,
                number(change.old, unit),
                number(change.new, unit),
                number(change.delta, unit, signed=True),
                unit,
                part.status if part.status != "both" else "",
                "over" if over else _level(change),
            )
        )
    return rows


def _limit_number(figures: LimitFigures | None, attr: str) -> str:
    return DASH if figures is None else number(getattr(figures, attr), figures.unit)


def limit_row(change: LimitChange) -> Row:
    """One limit: old and new value, the margin's change, the verdict."""
    either = change.new or change.old
    unit = either.unit if either is not None else ""
    if either is not None and either.margin_unit != unit:  # degC values, margins in K
        unit = f"{unit} / {either.margin_unit}"
    delta = None
    if change.old is not None and change.new is not None:
        delta = change.new.margin - change.old.margin
    level = "over" if change.crossed else ""
    if not level and delta:
        level = "worse" if delta < 0 else "better"
    return Row(
        change.subject,
        change.limit,
        f"{_limit_number(change.old, 'value')} ({_limit_number(change.old, 'margin')})",
        f"{_limit_number(change.new, 'value')} ({_limit_number(change.new, 'margin')})",
        number(delta, either.margin_unit if either is not None else "", signed=True),
        unit,
        change.status,
        level,
    )


def thresholds_line(gate: Thresholds) -> str:
    """The gate's thresholds in words."""
    bits = [
        f"rise may grow {number(gate.max_rise_growth, 'K')} K"
        if gate.max_rise_growth is not None
        else "",
        f"drift may grow {number(gate.max_drift_growth_ppm, 'ppm')} ppm"
        if gate.max_drift_growth_ppm is not None
        else "",
        f"a margin may shrink {number(gate.max_margin_loss_percent, '%')} %"
        if gate.max_margin_loss_percent is not None
        else "",
    ]
    chosen = [b for b in bits if b]
    every = "; ".join(chosen) if chosen else "no thresholds set"
    return f"gate: {every}; a limit that held may not fail"


def verdict(comparison: Comparison) -> str:
    """``gate passed`` or ``gate crossed N times``."""
    count = len(comparison.crossed)
    return "gate passed" if not count else f"gate crossed {count} time{'s' * (count != 1)}"


def heading(comparison: Comparison) -> str:
    """``OLD -> NEW: deck, analysis``."""
    old, new = comparison.old, comparison.new
    analysis = new.analysis if old.analysis == new.analysis else f"{old.analysis} -> {new.analysis}"
    return f"{old.label} -> {new.label}: {new.deck or old.deck} ({analysis})"


def render_table(comparison: Comparison, colour: bool = False) -> str:
    """The terminal form: heading, part table, limit table, gate lines, caution."""
    styles = cell_styles(colour)
    styles = {**styles, "worse": styles["near"], "better": str}
    lines = [heading(comparison), thresholds_line(comparison.thresholds), ""]
    rows = [row for part in comparison.parts for row in part_rows(part)]
    if rows:
        body = [[r.subject, r.what, r.old, r.new, r.change, r.unit, r.status] for r in rows]
        head = [["part", "quantity", "old", "new", "change", "unit", ""]]
        levels = [["", "", "", "", r.level, "", ""] for r in rows]
        lines += grid(head, body, [True, True, False, False, False, True, True], levels, styles)
    else:
        lines.append("no annotated parts on either side")
    limits = [limit_row(c) for c in comparison.limits]
    if limits:
        lines.append("")
        body = [[r.subject, r.what, r.old, r.new, r.change, r.unit, r.status] for r in limits]
        head = [
            [
                "limit on",
                "limit",
                "old (margin)",
                "new (margin)",
                "margin change",
                "unit",
                "verdict",
            ]
        ]
        levels = [
            ["", "", "", "", r.level, "", "over" if "FAIL" in r.status else ""] for r in limits
        ]
        lines += grid(head, body, [True, True, False, False, False, True, True], levels, styles)
    lines.append("")
    for line in comparison.crossed:
        lines.append(styles["over"]("CROSSED") + f" {line}")
    lines.append(f"{verdict(comparison)}")
    lines += textwrap.wrap(CAUTION_LINE, WIDTH)
    return "\n".join(lines) + "\n"


def _md(text: str) -> str:
    return text.replace("|", "\\|")


def _md_table(head: Sequence[str], rows: Sequence[Row], subject: bool = True) -> list[str]:
    out = [
        "| " + " | ".join(head) + " |",
        "|" + "|".join(["---", "---", "--:", "--:", "--:", "---", "---"]) + "|",
    ]
    marks = {"over": "**", "worse": "*", "better": "", "": ""}
    for r in rows:
        change = f"{marks[r.level]}{r.change}{marks[r.level]}" if r.change != DASH else DASH
        first = f"`{_md(r.subject)}`" if subject else ""
        out.append(
            f"| {first} | {_md(r.what)} | {r.old} | {r.new} | {change} | {r.unit} "
            f"| {_md(r.status)} |"
        )
    return out


PART_HEAD = ("Part", "Quantity", "Old", "New", "Change", "Unit", "")
LIMIT_HEAD = (
    "Limit on",
    "Limit",
    "Old (margin)",
    "New (margin)",
    "Margin change",
    "Unit",
    "Verdict",
)


def render_markdown(comparison: Comparison) -> str:
    """A comment for a code review or a CI job's summary: the verdict, the worst changes,
    and everything else in a collapsed ``<details>`` section."""
    passed = comparison.passed
    lines = [
        f"### heatweave compare: {_md(heading(comparison))}",
        "",
        f"**{'Gate passed' if passed else verdict(comparison).capitalize()}** "
        f"({_md(thresholds_line(comparison.thresholds))})",
        "",
    ]
    lines += [
        f"- **crossed** `{_md(line.split(': ', 1)[0])}`: {_md(line.split(': ', 1)[1])}"
        for line in comparison.crossed
    ]
    if comparison.crossed:
        lines.append("")
    changed = [p for p in comparison.parts if p.status != "both" or any(c.delta for c in p.changes)]
    top = changed[:SHOWN]
    rest = [p for p in comparison.parts if p not in top]
    if top:
        lines.append(f"Worst changes first ({len(top)} of {len(comparison.parts)} parts):")
        lines.append("")
        lines += _md_table(PART_HEAD, [r for p in top for r in part_rows(p)])
    else:
        lines.append("No part changed.")
    notable = [c for c in comparison.limits if c.crossed or c.status not in ("pass", "FAIL")]
    if notable:
        lines += ["", "Limits that crossed the gate, changed verdict, appeared or went:", ""]
        lines += _md_table(LIMIT_HEAD, [limit_row(c) for c in notable])
    folded = []
    if rest:
        folded.append(f"the other parts ({len(rest)})")
    if comparison.limits:
        folded.append(f"every limit ({len(comparison.limits)})")
    if not folded:
        return "\n".join([*lines, "", f"> {CAUTION_LINE}", ""])
    summary = " and ".join(folded)
    lines += ["", f"<details><summary>{summary[0].upper()}{summary[1:]}</summary>", ""]
    if rest:
        lines += [*_md_table(PART_HEAD, [r for p in rest for r in part_rows(p)]), ""]
    if comparison.limits:
        lines += _md_table(LIMIT_HEAD, [limit_row(c) for c in comparison.limits])
    lines += ["", "</details>", "", f"> {CAUTION_LINE}", ""]
    return "\n".join(lines)


def _value(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def _limit_side(figures: LimitFigures | None) -> dict[str, Any] | None:
    if figures is None:
        return None
    return {
        "value": _value(figures.value),
        "bound": _value(figures.bound),
        "unit": figures.unit,
        "margin": _value(figures.margin),
        "passed": figures.passed,
    }


def as_dict(comparison: Comparison) -> dict[str, Any]:
    """The comparison as plain data (``compare --json``); keys documented in the README."""
    gate = comparison.thresholds
    side = {
        name: {
            "label": s.label,
            "kind": s.kind,
            "deck": s.deck,
            "analysis": s.analysis,
            "annotations_sha256": s.annotations_sha256,
            "ambient": _value(s.ambient),
        }
        for name, s in (("old", comparison.old), ("new", comparison.new))
    }
    return {
        "heatweave_version": __version__,
        **side,
        "thresholds": {
            "max_rise_growth": gate.max_rise_growth,
            "max_drift_growth_ppm": gate.max_drift_growth_ppm,
            "max_margin_loss_percent": gate.max_margin_loss_percent,
        },
        "passed": comparison.passed,
        "crossed": list(comparison.crossed),
        "parts": [
            {
                "name": p.name,
                "status": p.status,
                "crossed": list(p.crossed),
                "quantities": {
                    c.quantity.key: {
                        "old": _value(c.old),
                        "new": _value(c.new),
                        "change": _value(c.delta),
                        "unit": c.quantity.unit,
                    }
                    for c in p.changes
                },
            }
            for p in comparison.parts
        ],
        "limits": [
            {
                "subject": c.subject,
                "limit": c.limit,
                "status": c.status,
                "old": _limit_side(c.old),
                "new": _limit_side(c.new),
                "margin_loss_percent": _value(c.margin_loss_percent),
                "crossed": list(c.crossed),
            }
            for c in comparison.limits
        ],
        "cautions": CAUTION_TEXT,
    }


def render_json(comparison: Comparison) -> str:
    """The JSON text (indented, newline at the end)."""
    return json.dumps(as_dict(comparison), indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def render_junit(comparison: Comparison, name: str, elapsed: float = 0.0) -> str:
    """One test case per part and per limit; a crossing is the case's failure."""
    classname = "heatweave.compare"
    cases = [
        Case(
            f"{p.name} change",
            classname,
            failure="\n".join(p.crossed) or None,
            failure_type="GateCrossed",
        )
        for p in comparison.parts
    ]
    cases += [
        Case(
            f"{c.subject} {c.limit} change",
            classname,
            failure="\n".join(c.crossed) or None,
            failure_type="GateCrossed",
        )
        for c in comparison.limits
    ]
    return render_junit_xml([Suite(name, tuple(cases), elapsed)], name="heatweave compare")
