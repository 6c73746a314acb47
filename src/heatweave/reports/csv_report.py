"""The CSV of ``heatweave run --csv FILE``: waveforms, one column per quantity.

One header row; each column name carries its unit in brackets::

    time [s], T(R1) [degC], R(R1) [ohm], P(R1) [W], T(node board) [degC], V(out) [V], I(vamm) [A]

Parts come in annotation order (temperature, resistance for resistors, dissipation), then
shared thermal nodes (``node`` and a space before the node's name: a space can be in no
SPICE name, so a node never reads like a part or like ngspice's ``@device[param]``), then
the deck's node voltages, then the branch currents asked for with ``--probe I(vamm)``.  A
transient gives one row per time point ngspice returned; an operating point one row,
without the time column.
"""

from __future__ import annotations

import csv
import io

import numpy as np

from heatweave.reports.model import RunReport
from heatweave.run.results import FloatArray

#: The time column's header.
TIME_HEADER = "time [s]"


def temperature_header(name: str, *, node: bool = False) -> str:
    """The header of a part's (or, with *node*, a shared thermal node's) temperature."""
    return f"T({'node ' if node else ''}{name}) [degC]"


def columns(report: RunReport) -> list[tuple[str, FloatArray]]:
    """(header, values) for every column, in file order."""
    results = report.results

    def series(final: float, values: FloatArray | None) -> FloatArray:
        return np.asarray([final] if values is None else values, dtype=np.float64)

    out: list[tuple[str, FloatArray]] = []
    if report.transient:
        assert results.time is not None
        out.append((TIME_HEADER, results.time))
    for row in report.rows:
        part = row.result
        temperature = series(part.temperature, part.temperature_series)
        out.append((temperature_header(part.path), temperature))
        if part.resistance is not None:
            out.append((f"R({part.path}) [ohm]", series(part.resistance, part.resistance_series)))
        out.append((f"P({part.path}) [W]", series(part.power, part.power_series)))
    for label, final in results.nodes.items():
        node_series = series(final, results.node_series.get(label))
        out.append((temperature_header(label, node=True), node_series))
    for node, final in results.voltages.items():
        out.append((f"V({node}) [V]", series(final, results.voltage_series.get(node))))
    for probe in report.probes:
        if probe.kind == "i":
            out.append((f"{probe.label} [{probe.unit}]", probe.series(results)))
    return out


def render(report: RunReport) -> str:
    """The CSV text; numbers written with full precision (``repr``)."""
    return render_columns(columns(report))


def render_columns(cols: list[tuple[str, FloatArray]]) -> str:
    """CSV text of (header, values) columns of equal length, numbers at full precision."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow([name for name, _ in cols])
    rows = len(cols[0][1]) if cols else 0
    for i in range(rows):
        writer.writerow([repr(float(values[i])) for _, values in cols])
    return buffer.getvalue()
