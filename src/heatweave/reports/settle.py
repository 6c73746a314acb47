"""What ``heatweave settle`` writes: the JSON report, the warm-up CSV, the terminal table.

The CSV and the table's caution follow ``run``'s (:mod:`heatweave.reports.csv_report`,
:mod:`heatweave.reports.table`).

Each part carries every key of ``run``'s report, written by the same function
(:func:`heatweave.reports.json_report.part_dict` on :func:`heatweave.reports.model.part_row`
of :meth:`~heatweave.settle.periodic.Settled.as_results`), read over the settled period:
``temperature`` is the cycle mean, ``peak_temperature`` the highest within the period,
``power`` the cycle-mean dissipation, ``resistance`` the resistance at the cycle-mean
temperature, ``ratings.local_ambient`` the warmest local ambient within the period, and the
margins are the ones ``settle --check`` judges; added after ``peak_temperature``:
``valley_temperature`` (the lowest within the period) and ``ripple`` (peak minus valley,
K).  Added at the top level: ``period``, ``period_from`` (the
sources it was taken from, or ``--period``), ``periods`` (electrical
periods simulated per iteration), ``iterations``, ``final_change`` (K), ``loop_gain``,
``history`` (one object per iteration), ``node_extremes``, ``envelope`` (the warm-up
from cold, with ``--warmup``) and ``limits`` (with ``--check``: each limit as ``check``'s
:meth:`~heatweave.checks.limits.LimitResult.as_dict`, else ``null``).
"""

from __future__ import annotations

import json
import math
import textwrap
from collections.abc import Sequence
from typing import Any

import numpy as np

from heatweave import __version__
from heatweave.checks.limits import LimitResult
from heatweave.emit.emitter import Inputs
from heatweave.reports.cautions import CAUTION_LINE, CAUTION_TEXT
from heatweave.reports.csv_report import TIME_HEADER, render_columns, temperature_header
from heatweave.reports.json_report import part_dict
from heatweave.reports.model import PPM, PartRow, deck_keys, part_row
from heatweave.reports.table import WIDTH, number
from heatweave.run.waves import seconds as seconds  # its home before run/waves
from heatweave.settle.periodic import Settled, Step


def _number(value: float | None) -> float | None:
    """A float for JSON; non-finite values become ``null``."""
    if value is None or not math.isfinite(value):
        return None
    return float(value)


def rows(settled: Settled) -> tuple[PartRow, ...]:
    """Each part's row as ``run``'s reports have it, over the settled period: the margins
    ``settle --check`` judges (:func:`heatweave.reports.model.part_row`)."""
    results = settled.as_results()
    assert results.time is not None
    ambient = np.full(len(results.time), settled.ambient)
    return tuple(part_row(part, results, ambient) for part in results.parts)


def _ripple(row: PartRow) -> float | None:
    part = row.result
    if part.peak_temperature is None or part.valley_temperature is None:
        return None
    return part.peak_temperature - part.valley_temperature


def _part(row: PartRow) -> dict[str, Any]:
    """``run``'s keys (:func:`~heatweave.reports.json_report.part_dict`), with the period's
    valley and ripple after its peak."""
    out: dict[str, Any] = {}
    for key, value in part_dict(row).items():
        out[key] = value
        if key == "peak_temperature":
            out["valley_temperature"] = _number(row.result.valley_temperature)
            out["ripple"] = _number(_ripple(row))
    return out


def as_dict(
    settled: Settled, inputs: Inputs, limits: Sequence[LimitResult] | None = None
) -> dict[str, Any]:
    """The report as plain data, keys in a fixed order; ``limits`` with ``--check``."""
    parts = {row.path: _part(row) for row in rows(settled)}
    envelope = None
    if settled.envelope is not None:
        env = settled.envelope
        envelope = {
            "time": [float(t) for t in env.time],
            "parts": {name: [float(v) for v in values] for name, values in env.parts.items()},
            "nodes": {name: [float(v) for v in values] for name, values in env.nodes.items()},
        }
    return {
        "heatweave_version": __version__,
        "deck": inputs.deck_path,
        **deck_keys(inputs),
        "annotations": {"path": inputs.annotation_path, "sha256": inputs.annotation.sha256},
        "analysis": "settle",
        "period": settled.period,
        "period_from": settled.drive.describe() if settled.drive else None,
        "periods": settled.periods,
        "ambient": _number(settled.ambient),
        "iterations": settled.iterations,
        "final_change": _number(settled.final_change),
        "loop_gain": _number(settled.gain),
        "parts": parts,
        "nodes": {label: _number(value) for label, value in settled.nodes.items()},
        "node_extremes": {
            label: {
                "peak_temperature": _number(settled.node_peaks[label]),
                "valley_temperature": _number(settled.node_valleys[label]),
            }
            for label in settled.nodes
        },
        "voltages": {node: _number(value) for node, value in settled.voltages.items()},
        "history": [_step(step) for step in settled.history],
        "envelope": envelope,
        "limits": None if limits is None else [item.as_dict() for item in limits],
        "warnings": [finding.render() for finding in settled.findings],
        "cautions": CAUTION_TEXT,
    }


def _step(step: Step) -> dict[str, Any]:
    return {
        "iteration": step.iteration,
        "change": _number(step.change),
        "hottest": step.hottest,
        "temperature": _number(step.temperature),
        "periods": step.periods,
        "loop_gain": _number(step.gain),
    }


def render_json(
    settled: Settled, inputs: Inputs, limits: Sequence[LimitResult] | None = None
) -> str:
    """The JSON text (indented, newline at the end)."""
    data = as_dict(settled, inputs, limits)
    return json.dumps(data, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def render_csv(settled: Settled) -> str:
    """The warm-up curve as CSV, in ``run``'s form (:mod:`heatweave.reports.csv_report`):
    ``time [s]``, then the temperature of each part and of each shared node (``@label``)."""
    env = settled.envelope
    if env is None:
        return ""
    cols = [(TIME_HEADER, env.time)]
    cols += [(temperature_header(name), values) for name, values in env.parts.items()]
    cols += [(temperature_header(name, node=True), values) for name, values in env.nodes.items()]
    return render_columns(cols)


def progress_line(step: Step) -> str:
    """One line per iteration for a terminal."""
    gain = "" if step.gain is None else f", loop gain {step.gain:+.3f}"
    return (
        f"iteration {step.iteration}: largest change {step.change:.3g} K "
        f"({step.hottest} at {step.temperature:.2f} degC), {step.periods} periods{gain}"
    )


def render_table(settled: Settled) -> str:
    """The terminal summary: a heading, one row per part and shared node, the caution."""
    gain = "" if settled.gain is None else f", loop gain {settled.gain:+.3f}"
    lines = [
        f"periodic steady state, period {seconds(settled.period)}, ambient "
        f"{settled.ambient:g} degC: settled in {settled.iterations} iteration(s) of "
        f"{settled.periods} periods, last change {settled.final_change:.2g} K{gain}",
    ]
    if settled.drive is not None:
        lines += textwrap.wrap(f"period: {settled.drive.describe()}", WIDTH)
    lines.append("")
    head = ("part", "mean", "peak", "valley", "ripple", "dR", "mean power", "resistance",
            "P allowed", "P margin", "to Tmax")  # fmt: skip
    units = ("", "degC", "degC", "degC", "K", "ppm", "W", "ohm", "W", "W", "K")
    table: list[tuple[str, ...]] = [head, units]
    for row in rows(settled):
        part = row.result
        ppm = None if part.resistance_change is None else part.resistance_change * PPM
        table.append(
            (
                part.path,
                number(part.temperature, ".2f"),
                number(part.peak_temperature, ".2f"),
                number(part.valley_temperature, ".2f"),
                number(_ripple(row), ".3f"),
                number(ppm, "+.1f"),
                number(part.power, ".4g"),
                number(part.resistance, ".5g"),
                number(row.margins.allowed, ".4g"),
                number(row.margins.power, ".4g"),
                number(row.margins.temperature, ".1f"),
            )
        )
    for label, mean in settled.nodes.items():
        peak, valley = settled.node_peaks[label], settled.node_valleys[label]
        table.append(
            (f"[{label}]", f"{mean:.2f}", f"{peak:.2f}", f"{valley:.2f}",
             f"{peak - valley:.3f}", *("",) * 6)
        )  # fmt: skip
    widths = [max(len(row[k]) for row in table) for k in range(len(head))]
    for cells_of in table:
        cells = [cells_of[0].ljust(widths[0])]
        cells += [cell.rjust(widths[k]) for k, cell in enumerate(cells_of) if k]
        lines.append("  ".join(cells).rstrip())
    lines += ["", *textwrap.wrap(CAUTION_LINE, WIDTH)]
    return "\n".join(lines) + "\n"
