"""The sweep's self-contained HTML page (``sweep --html``)."""

from __future__ import annotations

import base64
from collections.abc import Mapping
from typing import Any

from heatweave.reports.html import Page, Section, Table
from heatweave.reports.html_pages import PART_HEAD, cell, limits_table, part_cells
from heatweave.reports.inputs import input_files
from heatweave.sweep import plot as sweep_plot
from heatweave.sweep import report as sweep_report
from heatweave.sweep.corners import SweepResult


def _corner_label(corner: Mapping[str, Any]) -> str:
    params = "".join(f", {k}={v:g}" for k, v in corner["params"].items())
    draw = f", draw {corner['draw']}" if corner["draw"] is not None else ""
    return f"{corner['index']}: {cell(corner['ambient'], 'g')} degC{params}{draw}"


def sweep_page(result: SweepResult) -> Page:
    """The page of ``sweep``: one row per corner and part, the limits, the figure."""
    data = sweep_report.as_dict(result)
    rows, marks, failed = [], [], []
    limits: list[dict[str, Any]] = []
    for corner in data["corners"]:
        label = _corner_label(corner)
        if corner["status"] != "ok":
            failed.append(f"corner {label} failed: {corner['error']}")
            continue
        for name, part in corner["parts"].items():
            cells, levels = part_cells(name, part, corner["ambient"])
            rows.append((label, *cells))
            marks.append(("", *levels))
        limits += [
            {**item, "subject": f"{item['subject']} at corner {label}"}
            for item in corner.get("limits") or []
        ]
    table = Table(
        "Parts at every corner",
        ("corner", *PART_HEAD),
        tuple(rows),
        tuple(marks),
        (False, False, False) + (True,) * 7,
    )
    sections = [Section("Parts", paragraphs=tuple(failed), tables=(table,))]
    if limits:
        sections.append(Section("Limits", tables=(limits_table(limits, "Limits at every corner"),)))
    png = base64.b64encode(sweep_plot.render_png(result)).decode("ascii")
    image = f"<img alt='sweep figure' src='data:image/png;base64,{png}'>"
    sections.append(Section("Plots", figures=(image,)))
    passed = all(item["passed"] for item in limits) if result.checked else None
    verdict = "no limits checked"
    if passed is not None:
        violated = sum(not item["passed"] for item in limits)
        verdict = f"{len(limits)} limits checked over the corners, {violated} violated"
    inputs = result.inputs
    corners = len(data["corners"])
    method = (
        f"{inputs.deck_path}: {'; '.join(data['analysis_commands'])}; {corners} corners "
        f"({len(data['failed'])} failed), {data['executor']} executor"
    )
    return Page(
        f"heatweave sweep: {inputs.deck_path}",
        verdict,
        passed,
        method,
        (("", input_files(inputs)),),
        tuple(sections),
        tuple(dict.fromkeys(w for o in result.outcomes for w in o.warnings)),
    )
