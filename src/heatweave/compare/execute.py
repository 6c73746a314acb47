"""Run one side of ``compare DECK --against REV``: the deck, checked as ``check`` checks it.

The result is the plain data ``run --json`` writes (:func:`heatweave.reports.json_report.
as_dict`) with ``check``'s limits added under ``limits``, so a revision run here and a
saved result read from disk are compared by the same code.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from heatweave.checks import limits as checks
from heatweave.checks.periodic import refuse_unsettled
from heatweave.emit.emitter import load_inputs
from heatweave.reports import json_report
from heatweave.reports.inputs import InputFile, input_files
from heatweave.reports.model import RunReport, build_report
from heatweave.run import runner
from heatweave.run.prepare import RunOptions


@dataclass(frozen=True, slots=True)
class Side:
    """One revision run: its label, its result data, its report and the files it read."""

    label: str
    data: dict[str, Any]
    report: RunReport
    limits: tuple[checks.LimitResult, ...]
    files: tuple[InputFile, ...]


def run_side(label: str, deck: str, annotations: str, options: RunOptions) -> Side:
    """Run *deck* with *annotations* under *options* and check its limits."""
    inputs = load_inputs(deck, annotations)
    signals = checks.resolve_limits(inputs.annotation, inputs.index)
    refuse_unsettled(
        inputs, options, "compare --against (it runs each revision, it does not settle it)",
        "settle each revision with 'heatweave settle DECK --json FILE' and compare the two "
        "results (heatweave compare OLD.json NEW.json)",
    )  # fmt: skip
    outcome = runner.run(deck, annotations, options, inputs=inputs)
    baseline = runner.run_baseline(inputs, options) if checks.needs_baseline(signals) else None
    limits = checks.evaluate(outcome, signals, baseline)
    report = build_report(inputs, outcome)
    data = json_report.as_dict(report)
    data["limits"] = [item.as_dict() for item in limits]
    return Side(label, data, report, limits, input_files(inputs))
