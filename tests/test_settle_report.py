"""What ``settle`` writes follows ``run``'s conventions: the CSV header and numbers of
:mod:`heatweave.reports.csv_report`, the caution wrapped as :mod:`heatweave.reports.table`
wraps it.  The numbers below are arbitrary: these tests check the format, not physics."""

from __future__ import annotations

import csv
import io

import numpy as np

from heatweave.reports.cautions import CAUTION_LINE
from heatweave.reports.settle import render_csv, render_table
from heatweave.reports.table import WIDTH
from heatweave.settle.periodic import PartSettled, Settled
from heatweave.settle.warmup import Envelope

# Values chosen to need all 17 significant digits, so rounding anywhere shows.
TIME = np.array([0.0, 0.1234567890123456789, 2.718281828459045])
R1 = np.array([25.0, 25.000000123456789, 31.415926535897932])
PLATE = np.array([25.0, 25.00000000012345, 27.182818284590452])


def settled(envelope: Envelope | None) -> Settled:
    part = PartSettled("R1", "linear", 31.4, 31.5, 31.3, 2.0, 4.0, 52.0, 50.0)
    return Settled(
        period=1e-3, ambient=25.0, parts=(part,), nodes={"plate": 27.1},
        node_peaks={"plate": 27.1}, node_valleys={"plate": 27.1}, voltages={},
        iterations=3, final_change=1e-4, periods=4, gain=0.1, history=(), findings=(),
        envelope=envelope,
    )  # fmt: skip


def test_envelope_csv_uses_runs_header_and_full_precision() -> None:
    text = render_csv(settled(Envelope(TIME, {"R1": R1}, {"plate": PLATE})))
    rows = list(csv.reader(io.StringIO(text)))
    # The names run's CSV gives the same quantities (csv_report's module docstring).
    assert rows[0] == ["time [s]", "T(R1) [degC]", "T(node plate) [degC]"]
    values = np.array([[float(cell) for cell in row] for row in rows[1:]])
    np.testing.assert_array_equal(values, np.column_stack([TIME, R1, PLATE]))


def test_no_envelope_no_csv() -> None:
    assert render_csv(settled(None)) == ""


def test_table_wraps_the_caution_as_run_does() -> None:
    lines = render_table(settled(None)).splitlines()
    start = next(k for k, line in enumerate(lines) if line.startswith("caution:"))
    caution = lines[start:]
    assert len(caution) > 1
    assert all(len(line) <= WIDTH for line in caution)
    assert " ".join(caution) == CAUTION_LINE
