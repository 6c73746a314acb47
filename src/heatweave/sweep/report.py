"""The reports of ``heatweave sweep``: JSON, CSV and the terminal table.

JSON (``--json FILE``), keys in this order:

``heatweave_version``, ``deck``, ``annotations`` (``path``, ``sha256``), ``analysis_commands``
    As in ``run``'s report.
``executor``
    ``local`` or ``dask``: where the corners ran (the numbers never depend on it).
``sweep``
    The plan: ``ambients`` (degC; ``[null]`` for the annotation's own), ``params`` (name:
    list of values), ``monte_carlo`` (``{"draws": N, "seed": S}`` or ``null``).
``corners``
    One object per corner in corner order: ``index``, ``ambient`` [degC], ``params``
    (name: value), ``draw`` (Monte Carlo draw number or ``null``), ``drawn`` (part pattern,
    ``@node`` or ``A~B`` path: the drawn values of its toleranced keys), ``status`` (``ok``
    or ``failed``), ``error`` (the message of a failed corner), ``analysis``, ``backend``,
    and ``parts``, ``nodes``, ``voltages`` exactly as ``run --json`` writes them.  With
    ``--check`` also ``limits``: the corner's limits in ``check``'s order (parts' ``tmax``
    and ``power_rating``, then signal limits), each as
    :meth:`heatweave.checks.limits.LimitResult.as_dict` gives it (``subject``, ``limit``,
    ``value``, ``bound``, ``unit``, ``upper``, ``margin``, ``passed``, ``detail``), or
    ``null`` for a corner that gave no answer.
``summary``
    :func:`heatweave.sweep.corners.summary`.
``failed``
    The indices of corners that failed.
``check``
    With ``--check`` only: :func:`heatweave.sweep.limits.as_dict` (corners checked, the
    indices of corners failing a limit, the worst margin of each limit and its corner).
``cautions``
    What these numbers are and are not.

CSV (``--csv FILE``): one row per corner and part, units in the header.
"""

from __future__ import annotations

import csv
import io
import textwrap
from typing import Any

from heatweave import __version__
from heatweave.quantities import counted
from heatweave.reports.cautions import CAUTION_LINE, CAUTION_TEXT
from heatweave.reports.json_report import json_text
from heatweave.reports.model import PPM_LIMIT, deck_keys
from heatweave.reports.table import WIDTH, cell_styles, grid
from heatweave.run.prepare import deck_analyses_of
from heatweave.sweep import limits as sweep_limits
from heatweave.sweep.corners import (
    PERCENTILES,
    CornerOutcome,
    SweepResult,
    corner_ambient,
    describe,
    summary,
)


def _corner(result: SweepResult, outcome: CornerOutcome) -> dict[str, Any]:
    corner, data = outcome.corner, outcome.data or {}
    out = {
        "index": corner.index,
        "ambient": corner_ambient(result, outcome),
        "params": dict(corner.params),
        "draw": corner.draw,
        "drawn": corner.drawn,
        "status": "ok" if outcome.ok else "failed",
        "error": outcome.error,
        "analysis": data.get("analysis"),
        "backend": data.get("backend"),
        "parts": data.get("parts", {}),
        "nodes": data.get("nodes", {}),
        "voltages": data.get("voltages", {}),
        "currents": data.get("currents", {}),
        "probes": data.get("probes", {}),
    }
    if result.checked:
        limits = outcome.limits
        out["limits"] = None if limits is None else [item.as_dict() for item in limits]
    return out


def analyses(result: SweepResult) -> list[str]:
    """The analyses that ran: the command line's, else the deck's own cards."""
    if result.options.analyses:
        return list(result.options.analyses)
    return deck_analyses_of(result.inputs.project.deck)


def as_dict(result: SweepResult) -> dict[str, Any]:
    """The sweep as plain data, keys in documented order."""
    plan = result.plan
    inputs = result.inputs
    out = {
        "heatweave_version": __version__,
        "deck": inputs.deck_path,
        **deck_keys(inputs),
        "annotations": {"path": inputs.annotation_path, "sha256": inputs.annotation.sha256},
        "analysis_commands": analyses(result),
        "executor": result.executor,
        "sweep": {
            "ambients": list(plan.ambients),
            "params": {name: list(values) for name, values in plan.params},
            "monte_carlo": {"draws": plan.draws, "seed": plan.seed} if plan.draws else None,
        },
        "corners": [_corner(result, o) for o in result.outcomes],
        "summary": summary(result),
        "failed": [o.corner.index for o in result.failed],
    }
    if result.checked:
        out["check"] = sweep_limits.as_dict(result)
    out["cautions"] = CAUTION_TEXT
    return out


def render_json(result: SweepResult) -> str:
    """The JSON text (indented, newline at the end)."""
    return json_text(as_dict(result))


CSV_PART_COLUMNS = (
    ("temperature", "T [degC]"),
    ("peak_temperature", "T peak [degC]"),
    ("resistance", "R [ohm]"),
    ("resistance_change_ppm", "dR [ppm]"),
    ("power", "P [W]"),
)


def probe_columns(result: SweepResult) -> list[tuple[str, str]]:
    """``(label, unit)`` of each ``--probe`` signal, as the corners that ran report them."""
    for outcome in result.outcomes:
        if outcome.data is not None:
            return [(label, p["unit"]) for label, p in outcome.data.get("probes", {}).items()]
    return []


def _probe_finals(outcome: CornerOutcome, columns: list[tuple[str, str]]) -> list[float | None]:
    probes = (outcome.data or {}).get("probes", {})
    return [probes[label]["final"] if label in probes else None for label, _unit in columns]


def render_csv(result: SweepResult) -> str:
    """One row per corner and part (each with the corner's ``--probe`` values, so a row
    stands alone); a failed corner gives one row with its error."""
    names = [name for name, _ in result.plan.params]
    columns = probe_columns(result)
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(
        ["corner", "draw", "ambient [degC]", *names, "part", *(h for _, h in CSV_PART_COLUMNS),
         *(f"{label} [{unit}]" for label, unit in columns), "status", "error"]
    )  # fmt: skip
    for outcome in result.outcomes:
        corner = outcome.corner
        lead = [
            corner.index,
            "" if corner.draw is None else corner.draw,
            repr(corner_ambient(result, outcome)),
            *(repr(corner.params[n]) for n in names),
        ]
        if outcome.data is None:
            blanks = [""] * (1 + len(CSV_PART_COLUMNS) + len(columns))
            writer.writerow([*lead, *blanks, "failed", (outcome.error or "").splitlines()[0]])
            continue
        probed = ["" if v is None else repr(v) for v in _probe_finals(outcome, columns)]
        for part, values in outcome.data["parts"].items():
            cells = ["" if values[k] is None else repr(values[k]) for k, _ in CSV_PART_COLUMNS]
            writer.writerow([*lead, part, *cells, *probed, "ok", ""])
    return buffer.getvalue()


# ------------------------------------------------------------------------------ table


def _num(value: float | None, spec: str) -> str:
    return "-" if value is None else format(value, spec)


def _settings(result: SweepResult) -> str:
    plan = result.plan
    what = [counted(len(result.outcomes), "corner")]
    if plan.draws:
        what.append(f"Monte Carlo {counted(plan.draws, 'draw')}, seed {plan.seed}")
    ran = "; ".join(analyses(result)) or "deck analyses"
    return f"{result.inputs.deck_path}: {ran}, {', '.join(what)} ({result.executor} executor)"


def drift_text(ppm: float | None) -> str:
    """A resistance drift with its unit: ``+123.4 ppm``, or ``-92.44 %`` past 10,000 ppm."""
    if ppm is None:
        return "-"
    if abs(ppm) >= PPM_LIMIT:
        return f"{ppm / 1e4:+.2f} %"
    return f"{ppm:+.1f} ppm"


def rise_text(rise: float | None) -> str:
    """A temperature rise (K) with the digits it needs: two decimals from 1 K up, three
    significant digits below, so a 1 mK self-heating never reads 0.00."""
    if rise is None:
        return "-"
    if abs(rise) >= 1 or rise == 0:
        return f"{rise:.2f}"
    return f"{rise:.3g}"


def _corner_table(result: SweepResult) -> tuple[list[list[str]], list[list[str]], list[bool]]:
    """One row per corner and part (the corner's own cells on its first row only), so the
    table keeps its width however many parts the deck has; the ``--probe`` signals at the
    end of a corner's first row."""
    names = [name for name, _ in result.plan.params]
    columns = probe_columns(result)
    probes = [label for label, _unit in columns]
    header = [
        ["corner", "ambient", *names, "part", "T", "rise", "dR", "P", *probes],
        ["", "degC", *[""] * len(names), "", "degC", "K", "", "W", *(u for _, u in columns)],
    ]
    body = []
    for outcome in result.outcomes:
        corner = outcome.corner
        ambient = corner_ambient(result, outcome)
        lead = [str(corner.index), f"{ambient:.2f}", *(f"{corner.params[n]:.6g}" for n in names)]
        if outcome.data is None:
            body.append([*lead, "failed", *[""] * (4 + len(probes))])
            continue
        # A corner without annotated parts still ran: one row for its probed voltages.
        rows = list(outcome.data["parts"].items()) or [("-", None)]
        for k, (part, values) in enumerate(rows):
            cells = [part, "-", "-", "-", "-"]
            if values is not None:
                temperature = values["temperature"]
                rise = None if temperature is None else temperature - ambient
                cells = [
                    part, _num(temperature, ".2f"), rise_text(rise),
                    drift_text(values["resistance_change_ppm"]), _num(values["power"], ".4g"),
                ]  # fmt: skip
            volts = [_num(value, ".5g") for value in _probe_finals(outcome, columns)]
            first = k == 0
            body.append([*(lead if first else [""] * len(lead)), *cells,
                         *(volts if first else [""] * len(probes))])  # fmt: skip
    left = [False] * len(header[0])
    left[2 + len(names)] = True
    return header, body, left


def _monte_carlo_table(
    result: SweepResult, stats: dict[str, Any]
) -> tuple[list[list[str]], list[list[str]], list[bool]]:
    names = [name for name, _ in result.plan.params]
    labels = [f"p{p:g}" for p in PERCENTILES]
    header = [
        ["ambient", *names, "draws", "part", "quantity", "mean", "std", *labels],
        ["degC", *[""] * len(names), "", "", "", "", "", *[""] * len(labels)],
    ]
    units = {"temperature": ("T", "degC", ".2f"), "resistance_change_ppm": ("dR", "ppm", "+.1f")}
    body = []
    for group in stats["groups"]:
        lead = [_num(group["ambient"], ".2f"), *(f"{group['params'][n]:.6g}" for n in names)]
        for part, quantities in group["parts"].items():
            for key, values in quantities.items():
                symbol, unit, spec = units[key]
                scale = 1.0
                if unit == "ppm" and max(abs(values["p1"]), abs(values["p99"])) >= PPM_LIMIT:
                    scale, unit, spec = 1e4, "%", "+.2f"  # thermistors, as in the corner table
                cells = [format(values[k] / scale, spec) for k in ("mean", "p1", "p50", "p99")]
                cells.insert(1, format(values["std"] / scale, spec.lstrip("+")))
                body.append([*lead, str(group["draws"]), part, f"{symbol} {unit}", *cells])
    left = [False] * len(header[0])
    for i in (len(names) + 2, len(names) + 3):
        left[i] = True
    return header, body, left


def render_table(result: SweepResult, colour: bool = False, caution: bool = True) -> str:
    """Settings line, one row per corner and part (or the Monte Carlo statistics) with each
    corner's ``--probe`` signals, failures, and (with *caution*) the caution line."""
    styles = cell_styles(colour)
    stats = summary(result)
    if result.plan.draws:
        header, body, left = _monte_carlo_table(result, stats)
    else:
        header, body, left = _corner_table(result)
    lines = [_settings(result), ""]
    if body:
        levels = [[""] * len(left) for _ in body]
        lines += grid(header, body, left, levels, styles)
    else:
        lines.append("no corner ran")
    for outcome in result.failed:
        first = (outcome.error or "").splitlines()[0]
        where = describe(outcome.corner, corner_ambient(result, outcome))
        lines.append(styles["over"](f"{where} failed: {first}"))
    if caution:
        lines += caution_lines()
    return "\n".join(lines) + "\n"


def caution_lines() -> list[str]:
    """A blank line and the caution, wrapped: the last thing a sweep prints."""
    return ["", *textwrap.wrap(CAUTION_LINE, WIDTH)]
