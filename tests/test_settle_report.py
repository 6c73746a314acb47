"""What ``settle`` writes follows ``run``'s conventions: the CSV header and numbers of
:mod:`heatweave.reports.csv_report`, the caution wrapped as :mod:`heatweave.reports.table`
wraps it.  The numbers below are arbitrary: these tests check the format, not physics."""

from __future__ import annotations

import csv
import io

import numpy as np

from heatweave import tempmodels
from heatweave.networks.single import Single
from heatweave.reports.cautions import CAUTION_LINE
from heatweave.reports.settle import render_csv, render_table
from heatweave.reports.table import WIDTH
from heatweave.run.results import build_part
from heatweave.settle.periodic import Settled
from heatweave.settle.warmup import Envelope
from heatweave.thermal.circuit import AMBIENT_NODE, PartPlan

# Values chosen to need all 17 significant digits, so rounding anywhere shows.
TIME = np.array([0.0, 0.1234567890123456789, 2.718281828459045])
R1 = np.array([25.0, 25.000000123456789, 31.415926535897932])
PLATE = np.array([25.0, 25.00000000012345, 27.182818284590452])


#: A settled period of R1 (50 ohm, tc1 0.004/K): temperatures and powers over one period.
PERIOD_TIME = np.array([0.0, 0.5e-3, 1e-3])
TEMPS = np.array([31.3, 31.5, 31.4])
POWER = np.array([4.0, 0.0, 4.0])
RATING, TMAX = 5.0, 155.0


def settled(envelope: Envelope | None) -> Settled:
    model = tempmodels.get("linear").from_params({"tc1": 0.004}, 50.0, None)
    plan = PartPlan(
        "R1", "linear", model, Single(3.0, 1.0), AMBIENT_NODE, "ambient", RATING, TMAX, 70.0,
        None,
    )  # fmt: skip
    part = build_part(plan, TEMPS, POWER, time=PERIOD_TIME, period=1e-3, temperature_value=31.4)
    plate = np.full(3, 27.1)
    return Settled(
        period=1e-3, ambient=25.0, parts=(part,), nodes={"plate": 27.1},
        node_peaks={"plate": 27.1}, node_valleys={"plate": 27.1}, voltages={},
        iterations=3, final_change=1e-4, periods=4, gain=0.1, history=(), findings=(),
        envelope=envelope, time=PERIOD_TIME, power=POWER[:, None],
        temperatures=np.column_stack([TEMPS, plate]),
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


def test_table_shows_the_margins_run_shows() -> None:
    """The part row: mean, peak, valley, ripple, drift, mean power, resistance, then the
    allowed power (the rating: the ambient is below the 70 degC knee), its margin and the
    room to tmax, by hand: trapezoid mean of 4, 0, 4 W over two half periods is 2 W;
    R = 50 x (1 + 0.004 x (31.4 - 25)) = 51.28 ohm, +25600 ppm."""
    row = next(line for line in render_table(settled(None)).splitlines() if line[:3] == "R1 ")
    assert row.split()[1:] == [
        "31.40", "31.50", "31.30", "0.200", "+25600.0", "2", "51.28", "5", "3",
        f"{TMAX - 31.5:.1f}",
    ]  # fmt: skip
