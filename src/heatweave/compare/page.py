"""The page of ``compare --html``: old and new side by side, the changes highlighted.

The tables are the rows the terminal and Markdown forms print (:mod:`heatweave.compare.
render`); a change that makes things worse is shaded amber, a crossed threshold red.  The
figure puts the warm-up curves of both sides on one plot (old dashed, new solid) when both
ran a transient (or a settle with ``--warmup``); for an operating point it sets each
part's rise above ambient, old beside new, as bars.
"""

from __future__ import annotations

import hashlib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib.figure import Figure

from heatweave.compare.diff import Comparison
from heatweave.compare.execute import Side
from heatweave.compare.render import (
    LIMIT_HEAD,
    PART_HEAD,
    heading,
    limit_row,
    part_rows,
    thresholds_line,
    verdict,
)
from heatweave.reports.html import Page, Section, Table, svg_of
from heatweave.reports.html_pages import warmup_figure
from heatweave.reports.inputs import InputFile

#: A side's warm-up: its time points and each part's temperature over them.
Curves = tuple[Any, Mapping[str, Any]]
NUMERIC = (False, False, True, True, True, False, False)


def curves_of_side(side: Side) -> Curves | None:
    """A revision's part temperatures over its transient, or ``None`` for an operating point."""
    report = side.report
    if not report.transient or report.results.time is None:
        return None
    return report.results.time, {
        row.path: row.result.temperature_series
        for row in report.rows
        if row.result.temperature_series is not None
    }


def curves_of_data(data: Mapping[str, Any]) -> Curves | None:
    """A saved settle result's warm-up (``envelope``), when it has one."""
    envelope = data.get("envelope")
    if not isinstance(envelope, dict):
        return None
    return np.asarray(envelope["time"], dtype=float), {
        name: np.asarray(values, dtype=float) for name, values in envelope["parts"].items()
    }


def _warmup(comparison: Comparison, old: Curves, new: Curves) -> Figure:
    """Both sides' curves on one time axis (each side keeps its own time points)."""
    figure = warmup_figure(
        [(comparison.old.label, old[0], old[1]), (comparison.new.label, new[0], new[1])]
    )
    figure.axes[0].set_title("Warm-up: old dashed, new solid", fontsize=9, loc="left")
    return figure


def _rise_bars(comparison: Comparison) -> Figure | None:
    """Each part's rise above ambient, old beside new."""
    names = [p.name for p in comparison.parts if p.change("rise") is not None]
    if not names:
        return None
    figure = Figure(figsize=(8.0, 3.4), layout="constrained")
    axes = figure.add_subplot()
    positions = np.arange(len(names))
    for offset, side, colour in ((-0.2, "old", "0.6"), (0.2, "new", "tab:blue")):
        values = []
        for name in names:
            part = next(p for p in comparison.parts if p.name == name)
            change = part.change("rise")
            value = None if change is None else getattr(change, side)
            values.append(np.nan if value is None else value)
        label = comparison.old.label if side == "old" else comparison.new.label
        bars = axes.bar(positions + offset, values, width=0.38, color=colour, label=label)
        axes.bar_label(bars, fmt="%.2f", fontsize=7, padding=2)
    axes.set_xticks(positions, names, fontsize=8)
    axes.set_ylabel("rise above ambient [K]")
    axes.set_title("Rise above ambient, old and new", fontsize=9, loc="left")
    axes.legend(fontsize=8)
    axes.margins(y=0.15)
    axes.grid(True, axis="y", lw=0.4, alpha=0.5)
    return figure


def _table(head: tuple[str, ...], rows: list[Any], caption: str) -> Table:
    body = tuple((r.subject, r.what, r.old, r.new, r.change, r.unit, r.status) for r in rows)
    levels = tuple(
        ("", "", "old", "", r.level, "", "fail" if "FAIL" in r.status else "") for r in rows
    )
    return Table(caption, head, body, levels, NUMERIC)


def _file_inputs(path: str, role: str) -> tuple[InputFile, ...]:
    try:
        digest = hashlib.sha256(Path(path).read_bytes()).hexdigest()
    except OSError:
        digest = "-"
    return (InputFile(role, path, digest),)


def comparison_page(
    comparison: Comparison,
    sides: tuple[Side, Side] | None,
    curves: tuple[Curves | None, Curves | None] = (None, None),
) -> Page:
    """The whole page; *sides* are the runs of ``--against`` (``None`` for saved results,
    whose files are hashed instead), *curves* the warm-ups of saved settle results."""
    if sides is not None:
        inputs = tuple((s.label, s.files) for s in sides)
        curves = (curves_of_side(sides[0]), curves_of_side(sides[1]))
        warnings = tuple(f"{s.label}: {w}" for s in sides for w in s.report.warnings)
    else:
        inputs = tuple(
            (snap.label, _file_inputs(snap.label, f"{snap.kind} result"))
            for snap in (comparison.old, comparison.new)
        )
        warnings = tuple(
            f"{s.label}: {w}" for s in (comparison.old, comparison.new) for w in s.warnings
        )
    old_curves, new_curves = curves
    if old_curves is not None and new_curves is not None:
        figure: Figure | None = _warmup(comparison, old_curves, new_curves)
    else:
        figure = _rise_bars(comparison)
    rows = [row for part in comparison.parts for row in part_rows(part)]
    limits = [limit_row(c) for c in comparison.limits]
    gate = comparison.crossed or ("Every change stays within the gate.",)
    sections = (
        Section("Gate", paragraphs=gate),
        Section(
            "Parts, old and new (worst changes first)",
            tables=(_table(PART_HEAD, rows, "Parts"),) if rows else (),
        ),
        Section(
            "Limits, old and new (margins in brackets)",
            tables=(_table(LIMIT_HEAD, limits, "Limits"),) if limits else (),
            paragraphs=() if limits else ("Neither side sets a limit or a rating.",),
        ),
        Section("Plots", figures=(svg_of(figure),) if figure is not None else ()),
    )
    return Page(
        f"heatweave compare: {comparison.new.deck or comparison.old.deck}",
        verdict(comparison),
        comparison.passed,
        f"{heading(comparison)}; {thresholds_line(comparison.thresholds)}",
        inputs,
        sections,
        warnings,
    )
