"""The summary table ``heatweave run`` prints: one row per part, then the thermal nodes.

Two header lines (quantity, then unit) over right-aligned numbers, so columns read like a
datasheet table; ``-`` marks a value that does not apply (no rating, a heat-only part).  On a
terminal, exceeded ratings are shown in bold red and nearly used ratings in yellow; elsewhere
the text is plain.
"""

from __future__ import annotations

import textwrap
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import click

from heatweave.reports.cautions import CAUTION_LINE
from heatweave.reports.model import PartRow, RunReport

#: Share of a rating above which the table marks a part as nearly at its limit.
NEAR_LIMIT = 0.8
#: Width the caution line is wrapped to.
WIDTH = 88

Style = Callable[[str], str]


@dataclass(frozen=True, slots=True)
class Column:
    """One table column: quantity, unit, how to read and write a row's value."""

    title: str
    unit: str
    cell: Callable[[PartRow], str]
    left: bool = False
    level: Callable[[PartRow], str] = lambda row: ""  # "", "near", "over"


#: Past this magnitude a fixed-point column would print a string of meaningless digits
#: (an NTC far below its range changes by 1e15 %); such values print in e-notation.
FIXED_LIMIT = 1e6


def number(value: float | None, spec: str) -> str:
    """A table cell: ``-`` for no value, e-notation past :data:`FIXED_LIMIT` in a fixed column."""
    if value is None:
        return "-"
    if abs(value) >= FIXED_LIMIT and spec.endswith("f"):
        return format(value, "+.4g" if spec.startswith("+") else ".4g")
    return format(value, spec)


def _margin_level(margin: float | None, scale: float | None) -> str:
    if margin is None:
        return ""
    if margin < 0:
        return "over"
    if scale and margin < (1 - NEAR_LIMIT) * scale:
        return "near"
    return ""


def _load_level(row: PartRow) -> str:
    load = row.margins.load
    if load is None:
        return ""
    return "over" if load > 1 else ("near" if load > NEAR_LIMIT else "")


def _temp_level(row: PartRow) -> str:
    scale = None if row.tmax is None else row.tmax - row.local_ambient
    return _margin_level(row.margins.temperature, scale)


def _peak(row: PartRow) -> float | None:
    return row.result.peak_temperature


def _percent(row: PartRow) -> float | None:
    change = row.result.resistance_change
    return None if change is None else change * 100


COLUMNS: tuple[Column, ...] = (
    Column("part", "", lambda r: r.path, left=True),
    Column("model", "", lambda r: r.result.model or "heat only", left=True),
    Column("T final", "degC", lambda r: number(r.result.temperature, ".2f")),
    Column("T peak", "degC", lambda r: number(_peak(r), ".2f")),
    Column("dR", "%", lambda r: number(_percent(r), "+.4f")),
    Column("dR", "ppm", lambda r: number(r.change_ppm, "+.1f")),
    Column("P", "W", lambda r: number(r.result.power, ".4g")),
    Column("P allowed", "W", lambda r: number(r.margins.allowed, ".4g")),
    Column("P margin", "W", lambda r: number(r.margins.power, ".4g"), level=_load_level),
    Column("to Tmax", "K", lambda r: number(r.margins.temperature, ".1f"), level=_temp_level),
)


def cell_styles(colour: bool) -> dict[str, Style]:
    if not colour:
        return {"": str, "near": str, "over": str, "head": str}
    return {
        "": str,
        "near": lambda text: click.style(text, fg="yellow"),
        "over": lambda text: click.style(text, fg="red", bold=True),
        "head": lambda text: click.style(text, bold=True),
    }


def grid(
    header: Sequence[Sequence[str]],
    body: Sequence[Sequence[str]],
    left: Sequence[bool],
    levels: Sequence[Sequence[str]],
    styles: dict[str, Style],
) -> list[str]:
    """Aligned lines; cells are padded before they are styled so colour codes never
    disturb the alignment."""
    widths = [max(len(line[i]) for line in (*header, *body)) for i in range(len(left))]

    def pad(text: str, i: int) -> str:
        return text.ljust(widths[i]) if left[i] else text.rjust(widths[i])

    lines = [
        styles["head"]("  ".join(pad(c, i) for i, c in enumerate(line)).rstrip()) for line in header
    ]
    lines.append("  ".join("-" * w for w in widths))
    for cells, marks in zip(body, levels, strict=True):
        lines.append(
            "  ".join(
                styles[m](pad(c, i)) for i, (c, m) in enumerate(zip(cells, marks, strict=True))
            ).rstrip()
        )
    return lines


def _settings(report: RunReport) -> str:
    analyses = "; ".join(report.analyses) or report.results.analysis
    how = report.simulated
    return (
        f"{report.deck}: {analyses} (ngspice, {report.backend} back end, {how}), "
        f"ambient {report.results.ambient:.2f} degC"
    )


def _exceeded(report: RunReport) -> list[str]:
    """Parts past a rating, so a plain (uncoloured) log shows them too."""
    found = []
    for row in report.rows:
        what = []
        if row.margins.power is not None and row.margins.power < 0:
            what.append("dissipation above the derated rating")
        if row.margins.temperature is not None and row.margins.temperature < 0:
            what.append("hotter than tmax")
        if what:
            found.append(f"{row.path} ({', '.join(what)})")
    return found


def render(report: RunReport, colour: bool = False) -> str:
    """The whole summary: settings line, part table, thermal nodes, caution line."""
    styles = cell_styles(colour)
    transient = report.transient
    columns = [c for c in COLUMNS if transient or c.title != "T peak"]
    left = [c.left for c in columns]
    header = [[c.title for c in columns], [c.unit for c in columns]]
    body = [[c.cell(row) for c in columns] for row in report.rows]
    levels = [[c.level(row) for c in columns] for row in report.rows]
    lines = [_settings(report), ""]
    if report.rows:
        lines += grid(header, body, left, levels, styles)
    else:
        lines.append("no annotated parts")
    nodes = [(label, value) for label, value in report.results.nodes.items()]
    nodes.append(("ambient", report.results.ambient))
    node_lines = [[label, format(value, ".2f")] for label, value in nodes]
    lines += [""]
    lines += grid(
        [["thermal node", "T final"], ["", "degC"]],
        node_lines,
        [True, False],
        [["", ""] for _ in node_lines],
        styles,
    )
    exceeded = _exceeded(report)
    if exceeded:
        lines += ["", styles["over"]("over rating: " + "; ".join(exceeded))]
    lines += ["", *textwrap.wrap(CAUTION_LINE, WIDTH)]
    return "\n".join(lines) + "\n"
