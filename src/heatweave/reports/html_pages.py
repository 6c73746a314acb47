"""The pages of ``run``, ``check``, ``settle`` and ``sweep`` (``--html FILE``).

Each page shows the same numbers as the command's JSON report (the tables read the JSON's
plain data, :func:`heatweave.reports.json_report.as_dict` and its siblings), the figure of
``--plot`` as inline SVG (the sweep's as an inline PNG), the limits with their verdicts,
the warnings and the cautions.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

import numpy as np
from matplotlib.figure import Figure

from heatweave.checks.limits import LimitResult
from heatweave.emit.emitter import Inputs
from heatweave.reports import json_report, plot
from heatweave.reports import settle as settle_report
from heatweave.reports.html import Page, Section, Table, svg_of
from heatweave.reports.inputs import input_files
from heatweave.reports.model import RunReport
from heatweave.reports.plot import palette, time_scale
from heatweave.settle.periodic import Settled

DASH = "-"
PPM = 1e6


def cell(value: object, spec: str = ".3f") -> str:
    """A number for a table cell; ``-`` where there is none."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return DASH
    return format(value, spec)


def _drift(part: Mapping[str, Any]) -> float | None:
    ppm = part.get("resistance_change_ppm")
    if isinstance(ppm, int | float):
        return float(ppm)
    resistance, nominal = part.get("resistance"), part.get("nominal_resistance")
    if isinstance(resistance, int | float) and isinstance(nominal, int | float) and nominal:
        return (resistance / nominal - 1.0) * PPM
    return None


def _margin_level(value: object) -> str:
    return "" if not isinstance(value, int | float) else ("fail" if value < 0 else "pass")


PART_HEAD = (
    "part",
    "model",
    "temperature [degC]",
    "peak [degC]",
    "rise [K]",
    "drift [ppm]",
    "dissipation [W]",
    "tmax margin [K]",
    "power margin [W]",
)


def part_cells(
    name: str, part: Mapping[str, Any], ambient: float | None
) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """One part's cells (as :data:`PART_HEAD` names them) and their marks."""
    temperature = part.get("temperature")
    margins = part.get("margins") or {}
    rise = None
    if isinstance(temperature, int | float) and ambient is not None:
        rise = temperature - ambient
    cells = (
        name,
        str(part.get("model") or DASH),
        cell(temperature),
        cell(part.get("peak_temperature")),
        cell(rise),
        cell(_drift(part), "+.1f"),
        cell(part.get("power"), ".5g"),
        cell(margins.get("temperature")),
        cell(margins.get("power"), ".5g"),
    )
    marks = ("",) * 7 + (
        _margin_level(margins.get("temperature")),
        _margin_level(margins.get("power")),
    )
    return cells, marks


def parts_table(parts: Mapping[str, Any], ambient: float | None, caption: str) -> Table:
    """Parts as ``run --json`` (or ``settle --json``) writes them, one row each."""
    found = [part_cells(name, part, ambient) for name, part in parts.items()]
    return Table(
        caption,
        PART_HEAD,
        tuple(c for c, _ in found),
        tuple(m for _, m in found),
        (False, False) + (True,) * 7,
    )


def nodes_table(nodes: Mapping[str, Any]) -> Table:
    """Shared thermal nodes and their temperatures."""
    rows = tuple((name, cell(value)) for name, value in nodes.items())
    return Table("Shared thermal nodes", ("node", "temperature [degC]"), rows, (), (False, True))


def limits_table(limits: Sequence[Mapping[str, Any]], caption: str) -> Table:
    """Limits in :meth:`~heatweave.checks.limits.LimitResult.as_dict` form, with their verdicts."""
    head = ("limit on", "limit", "value", "bound", "margin", "unit", "verdict", "detail")
    rows, levels = [], []
    for item in limits:
        passed = bool(item.get("passed"))
        rows.append(
            (
                str(item.get("subject")),
                str(item.get("limit")),
                cell(item.get("value"), ".5g"),
                cell(item.get("bound"), ".5g"),
                cell(item.get("margin"), ".5g"),
                str(item.get("unit")),
                "pass" if passed else "FAIL",
                str(item.get("detail") or ""),
            )
        )
        levels.append(("",) * 6 + ("pass" if passed else "fail", ""))
    return Table(
        caption,
        head,
        tuple(rows),
        tuple(levels),
        (False, False, True, True, True, False, False, False),
    )


def rating_limits(data: Mapping[str, Any]) -> list[dict[str, Any]]:
    """A run's ``tmax`` and derated ``power_rating`` limits, from its parts' margins."""
    out: list[dict[str, Any]] = []
    for name, part in (data.get("parts") or {}).items():
        ratings, margins = part.get("ratings") or {}, part.get("margins") or {}
        for limit, bound, margin, unit in (
            ("tmax", ratings.get("tmax"), margins.get("temperature"), "degC"),
            ("power_rating", ratings.get("allowed_power"), margins.get("power"), "W"),
        ):
            if isinstance(bound, int | float) and isinstance(margin, int | float):
                out.append(
                    {
                        "subject": name,
                        "limit": limit,
                        "value": bound - margin,
                        "bound": bound,
                        "margin": margin,
                        "unit": unit,
                        "passed": margin >= 0,
                        "detail": "",
                    }
                )
    return out


def method_line(report: RunReport) -> str:
    """What ran and how: deck, analyses, back end, method and why, ambient."""
    analyses = "; ".join(report.analyses) or report.results.analysis
    how = report.simulated
    why = f": {report.method_reason}" if report.method_reason else ""
    return (
        f"{report.deck}: {analyses}; ngspice, {report.backend} back end, {how}{why}; "
        f"ambient {report.results.ambient:.2f} degC"
    )


def run_page(
    report: RunReport,
    inputs: Inputs,
    limits: Sequence[LimitResult] | None = None,
    command: str = "run",
) -> Page:
    """The page of ``run`` (limits from the ratings) or ``check`` (*limits* as checked)."""
    data = json_report.as_dict(report)
    checked = [item.as_dict() for item in limits] if limits is not None else rating_limits(data)
    passed = all(item["passed"] for item in checked) if checked else None
    failed = sum(not item["passed"] for item in checked)
    noun = "limits checked" if limits is not None else "ratings (tmax, derated power)"
    verdict = "no limits set" if passed is None else f"{len(checked)} {noun}, {failed} violated"
    tables = [parts_table(data["parts"], data["ambient"], "Parts")]
    if data["nodes"]:
        tables.append(nodes_table(data["nodes"]))
    sections = [
        Section("Parts and nodes", tables=tuple(tables)),
        Section(
            "Limits",
            tables=(limits_table(checked, "Limits and ratings"),) if checked else (),
            paragraphs=() if checked else ("The annotation file sets no limit and no rating.",),
        ),
        Section("Plots", figures=(svg_of(plot.build_figure(report)),)),
    ]
    return Page(
        f"heatweave {command}: {report.deck}",
        verdict,
        passed,
        method_line(report),
        (("", input_files(inputs)),),
        tuple(sections),
        report.warnings,
    )


def settle_page(
    settled: Settled,
    inputs: Inputs,
    limits: Sequence[LimitResult] | None = None,
    command: str = "settle",
) -> Page:
    """The page of ``settle``: the settled period's parts and nodes, the warm-up curve, and
    with *limits* (``settle --check``, or ``check`` on a periodic deck) the limits."""
    data = settle_report.as_dict(settled, inputs, limits)
    tables = [
        parts_table(
            data["parts"],
            data["ambient"],
            "Parts over the settled period "
            "(temperature: cycle mean; peak: highest within the period)",
        )
    ]
    if data["nodes"]:
        tables.append(nodes_table(data["nodes"]))
    figures: tuple[str, ...] = ()
    if settled.envelope is not None:
        figures = (svg_of(warmup_figure([("", settled.envelope.time, settled.envelope.parts)])),)
    method = (
        f"{inputs.deck_path}: periodic steady state, "
        f"period {settle_report.seconds(settled.period)}, "
        f"{settled.iterations} iterations, last change {settled.final_change:.3g} K; "
        f"ambient {settled.ambient:.2f} degC"
    )
    if settled.drive is not None:
        method += f"; period {settled.drive.describe()}"
    checked = data["limits"] or []
    passed = all(item["passed"] for item in checked) if checked else None
    verdict = "settled"
    if limits is not None:
        failed = sum(not item["passed"] for item in checked)
        verdict = f"settled; {len(checked)} limits checked, {failed} violated"
    sections = [
        Section("Parts and nodes", tables=tuple(tables)),
        Section(
            "Warm-up from cold",
            figures=figures,
            paragraphs=() if figures else ("Not computed: add --warmup TSTOP.",),
        ),
    ]
    if limits is not None:
        sections.insert(
            1,
            Section(
                "Limits over the settled period",
                tables=(limits_table(checked, "Limits and ratings"),) if checked else (),
                paragraphs=() if checked else ("The annotation file sets no limit and no rating.",),
            ),
        )
    return Page(
        f"heatweave {command}: {inputs.deck_path}",
        verdict,
        passed,
        method,
        (("", input_files(inputs)),),
        tuple(sections),
        tuple(data["warnings"]),
    )


def warmup_figure(sides: Sequence[tuple[str, Any, Mapping[str, Any]]]) -> Figure:
    """Part temperatures over time, one (label, time, part curves) per side; with two
    sides the first is dashed and the second solid, a part keeping its colour."""
    figure = Figure(figsize=(8.0, 3.8), layout="constrained")
    axes = figure.add_subplot()
    names = sorted({name for _, _, parts in sides for name in parts})
    colours = palette(names)
    factor, unit = time_scale(max(float(time[-1]) for _, time, _ in sides))
    styles = ("--", "-") if len(sides) > 1 else ("-",)
    for style, (label, time, parts) in zip(styles, sides, strict=False):
        for name, values in parts.items():
            axes.plot(
                np.asarray(time) / factor,
                values,
                ls=style,
                color=colours[name],
                lw=1.5,
                label=f"{name}, {label}" if label else name,
            )
    axes.set_xlabel(f"time [{unit}]")
    axes.set_ylabel("temperature [degC]")
    axes.grid(True, lw=0.4, alpha=0.5)
    if names:
        axes.legend(fontsize=7, loc="lower right")
    return figure
