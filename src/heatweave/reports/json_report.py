"""The JSON report of ``heatweave run --json FILE``.

Keys appear in this order; numbers are JSON numbers, ``null`` marks a value that does not
apply (a heat-only part has no resistance; a part without ``power_rating`` has no power
margin; an operating point has no peaks).  Temperatures are in degC, temperature
differences in K, resistances in ohm, dissipation in W, voltages in V.

``heatweave_version``
    The heatweave version that wrote the report.
``deck``
    The deck's path as given on the command line.
``deck_in_repository``
    The deck's path inside the git work tree holding it (``amp/board.cir``), or ``null``
    outside one; ``compare`` knows one deck from another of the same name by it.
``deck_sha256``
    The SHA-256 of the deck's text as read (``null`` where there is none).
``annotations``
    ``{"path": ..., "sha256": ...}``: the annotation file and the SHA-256 of its bytes.
``analysis``
    ``"op"`` or ``"tran"``: the analysis the results are read from.
``analysis_commands``
    The analyses that ran, as ngspice commands (``["tran 1m 2"]``) or the deck's cards.
``backend``
    The simulator back end that ran ngspice (``shared`` or ``batch``).
``method``
    ``{"name": ..., "reason": ...}``: ``full`` (the electrothermal deck simulated as
    emitted) or ``cosim`` (the fast path: plain resistors in windows, the thermal network
    advanced exactly between them), and why it was chosen.
``ambient``
    The ambient temperature at the end of the run [degC].
``parts``
    One object per annotated part, by instance path, in annotation order:
    ``model`` (temperature model, ``null`` for heat-only parts), ``temperature`` (final),
    ``peak_temperature`` (highest in a transient), ``resistance`` (at the final
    temperature, ohm), ``nominal_resistance`` (the model's value at its reference
    temperature), ``resistance_change_ppm`` and ``resistance_change_percent`` (final,
    against the nominal), ``power`` (W, the mean over the last period of the deck's
    periodic sources, else the final value: :func:`heatweave.run.results.build_part`),
    ``peak_power`` (instantaneous, transients), ``to`` (the thermal node its path ends at),
    ``ratings`` (``power_rating`` [W], ``tmax`` [degC], ``derating_knee`` [degC],
    ``local_ambient``: the temperature at the cold end of its thermal path where the run
    ends [degC]; ``allowed_power``: the IEC 60115-1 derated rating there, W) and ``margins``
    (``temperature``: ``tmax`` minus the hottest temperature reached, K; ``power``: allowed
    minus ``power``, W; ``load``: ``power`` over allowed dissipation, a fraction).
    Negative margins mean a rating is exceeded; ``check`` judges the same numbers.
``nodes``
    Shared thermal nodes by name: final temperature [degC].
``voltages``
    The deck's own node voltages by node name (lower case, as ngspice names them), final [V].
``currents``
    The branch currents ngspice records for the deck's own devices (voltage sources,
    inductors) by device name (``vamm``, ``v.x1.vs``), final [A].
``probes``
    The signals asked for with ``--probe``, by label (``V(out)``, ``I(vamm)``): ``unit``
    (``V`` or ``A``), ``final``, and over a transient ``min`` and ``max`` over every time
    point ngspice computed, the co-simulation's included (``null`` for an operating point).
``warnings``
    The warnings of the run, as printed on stderr.
``cautions``
    What these numbers are and are not (:data:`heatweave.reports.cautions.CAUTION_TEXT`).
"""

from __future__ import annotations

import json
import math
from typing import Any

from heatweave import __version__
from heatweave.reports.cautions import CAUTION_TEXT
from heatweave.reports.model import PartRow, Probe, RunReport


def _number(value: float | None) -> float | None:
    """A float for JSON; non-finite values (never valid JSON) become ``null``."""
    if value is None or not math.isfinite(value):
        return None
    return float(value)


def part_dict(row: PartRow) -> dict[str, Any]:
    """A part's keys, as ``run``, ``settle`` and every ``sweep`` corner write them."""
    result = row.result
    change = result.resistance_change
    return {
        "model": result.model,
        "temperature": _number(result.temperature),
        "peak_temperature": _number(result.peak_temperature),
        "resistance": _number(result.resistance),
        "nominal_resistance": _number(result.nominal_resistance),
        "resistance_change_ppm": _number(row.change_ppm),
        "resistance_change_percent": _number(None if change is None else change * 100),
        "power": _number(result.power),
        "peak_power": _number(result.peak_power),
        "to": row.to,
        "ratings": {
            "power_rating": _number(row.power_rating),
            "tmax": _number(row.tmax),
            "derating_knee": _number(row.derating_knee),
            "local_ambient": _number(row.local_ambient),
            "allowed_power": _number(row.margins.allowed),
        },
        "margins": {
            "temperature": _number(row.margins.temperature),
            "power": _number(row.margins.power),
            "load": _number(row.margins.load),
        },
    }


def _probe(probe: Probe, report: RunReport) -> dict[str, Any]:
    low, high = probe.extremes(report.results)
    spread = report.transient
    return {
        "unit": probe.unit,
        "final": _number(probe.final(report.results)),
        "min": _number(low) if spread else None,
        "max": _number(high) if spread else None,
    }


def as_dict(report: RunReport) -> dict[str, Any]:
    """The report as plain data, keys in documented order."""
    results = report.results
    return {
        "heatweave_version": __version__,
        "deck": report.deck,
        "deck_in_repository": report.deck_in_repository,
        "deck_sha256": report.deck_sha256,
        "annotations": {"path": report.annotations, "sha256": report.annotations_sha256},
        "analysis": results.analysis,
        "analysis_commands": list(report.analyses),
        "backend": report.backend,
        "method": {"name": report.method, "reason": report.method_reason},
        "ambient": _number(results.ambient),
        "parts": {row.path: part_dict(row) for row in report.rows},
        "nodes": {label: _number(value) for label, value in results.nodes.items()},
        "voltages": {node: _number(value) for node, value in results.voltages.items()},
        "currents": {name: _number(value) for name, value in results.currents.items()},
        "probes": {probe.label: _probe(probe, report) for probe in report.probes},
        "warnings": list(report.warnings),
        "cautions": CAUTION_TEXT,
    }


def json_text(data: dict[str, Any]) -> str:
    """JSON text as every report writes it: indented, UTF-8 safe, newline at the end."""
    return json.dumps(data, indent=2, allow_nan=False, ensure_ascii=False) + "\n"


def render(report: RunReport) -> str:
    """The JSON text of *report*."""
    return json_text(as_dict(report))
