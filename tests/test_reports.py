"""Reports of ``heatweave run`` against answers computed outside heatweave.

The self-heated divider: steady state against scipy.optimize.brentq on the power balance
T = Ta + Rth * V^2 R(T) / (R(T) + R2)^2, transient against scipy.integrate.solve_ivp on
C dT/dt = P(T) - (T - Ta) / Rth with T(0) = Ta (a cold start).  Heat-only parts against
P = V * I worked by hand.  Derating against the IEC 60115-1 curve.  Figures by their
matplotlib objects.
"""

from __future__ import annotations

import csv
import io
import itertools
import json
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from heatweave.annotation.ratings import derated_power, margins
from heatweave.emit.emitter import load_inputs
from heatweave.reports import RunReport, build_report, csv_report, json_report, plot
from heatweave.reports.model import parse_probe
from heatweave.run.prepare import RunOptions
from heatweave.run.runner import run

pytestmark = pytest.mark.ngspice

FIXTURES = Path(__file__).parent / "fixtures" / "run"

# ngspice's convergence test (manual, .options): a node voltage is converged when it moves
# less than RELTOL * |V| + VNTOL, defaults 1e-3 and 1 uV.  A thermal node is 1 V = 1 degC,
# so a temperature is trusted to RELTOL * |T| + VNTOL, and a quantity derived from it to
# RELTOL relative.  This is the simulator's own accuracy promise, not a fitted margin.
RELTOL = 1e-3
VNTOL = 1e-6

DEFAULT = RunOptions()  # the deck's own analyses, default back end


def report_of(deck: str, options: RunOptions = DEFAULT, probes: tuple[str, ...] = ()) -> RunReport:
    path = str(FIXTURES / deck)
    annotation = path.replace(".cir", ".thermal.toml")
    inputs = load_inputs(path, annotation)
    signals = tuple(parse_probe(p) for p in probes)
    return build_report(inputs, run(path, annotation, options, inputs=inputs), signals)


def json_of(deck: str, options: RunOptions = DEFAULT) -> dict[str, Any]:
    data: dict[str, Any] = json.loads(json_report.render(report_of(deck, options)))
    return data


def divider_power(temp: float, v: float, r0: float, r2: float, tc1: float, tref: float) -> float:
    """Dissipation of the upper resistor of a divider at temperature *temp* (linear TCR)."""
    r = r0 * (1 + tc1 * (temp - tref))
    return v * v * r / (r + r2) ** 2


# Deck values of the fixtures: (deck, ambient override, V, R1, R2, tc1, Rth, rating, tmax, knee)
DIVIDERS = [
    ("divider.cir", None, 10.0, 100.0, 100.0, 0.004, 50.0, 0.5, 155.0, 70.0),
    ("divider.cir", 60.0, 10.0, 100.0, 100.0, 0.004, 50.0, 0.5, 155.0, 70.0),
    ("divider_hot.cir", None, 24.0, 470.0, 330.0, 3.9e-3, 120.0, 0.25, 125.0, 70.0),
    # above the knee: the derated rating applies
    ("divider_hot.cir", 90.0, 24.0, 470.0, 330.0, 3.9e-3, 120.0, 0.25, 125.0, 70.0),
]


@pytest.mark.parametrize(
    ("deck", "ambient", "v", "r0", "r2", "tc1", "rth", "rating", "tmax", "knee"), DIVIDERS
)
def test_divider_steady_state_matches_brentq(
    deck: str, ambient: float | None, v: float, r0: float, r2: float, tc1: float,
    rth: float, rating: float, tmax: float, knee: float,
) -> None:  # fmt: skip
    ta = 25.0 if ambient is None else ambient
    expected = brentq(
        lambda t: t - ta - rth * divider_power(t, v, r0, r2, tc1, 25.0), ta, ta + 500.0,
        xtol=1e-12,
    )  # fmt: skip
    r_expected = r0 * (1 + tc1 * (expected - 25.0))
    p_expected = divider_power(expected, v, r0, r2, tc1, 25.0)
    data = json_of(deck, RunOptions(analyses=("op",), ambient=ambient))
    part = data["parts"]["R1"]
    t_tol = RELTOL * abs(expected) + VNTOL
    assert data["analysis"] == "op"
    assert data["ambient"] == pytest.approx(ta)
    assert part["temperature"] == pytest.approx(expected, abs=t_tol)
    assert part["peak_temperature"] is None
    assert part["resistance"] == pytest.approx(r_expected, rel=RELTOL)
    assert part["nominal_resistance"] == pytest.approx(r0, rel=1e-12)
    # ppm of R0: an error dT in temperature is 1e6 * tc1 * dT ppm
    assert part["resistance_change_ppm"] == pytest.approx(
        (r_expected / r0 - 1) * 1e6, abs=1e6 * tc1 * t_tol
    )
    assert part["power"] == pytest.approx(p_expected, rel=RELTOL)
    out = next(value for node, value in data["voltages"].items() if node in ("out", "tap"))
    assert out == pytest.approx(v * r2 / (r_expected + r2), rel=RELTOL)
    # IEC 60115-1 derating worked by hand from the curve: full to the knee, linear to tmax
    allowed = rating if ta <= knee else rating * (tmax - ta) / (tmax - knee)
    assert part["ratings"]["allowed_power"] == pytest.approx(allowed, rel=1e-12)
    assert part["margins"]["power"] == pytest.approx(allowed - p_expected, abs=RELTOL * p_expected)
    assert part["margins"]["temperature"] == pytest.approx(tmax - expected, abs=t_tol)


# Times (s) to compare at: early (steep rise), around tau = Rth * C = 0.5 s, and late.
TRANSIENT_TIMES = [0.01, 0.05, 0.1, 0.25, 0.5, 1.0, 1.5, 2.0]


def divider_ode(
    v: float, r0: float, r2: float, tc1: float, rth: float, cth: float, ta: float
) -> Any:
    def rhs(_t: float, y: np.ndarray) -> list[float]:
        return [(divider_power(y[0], v, r0, r2, tc1, 25.0) - (y[0] - ta) / rth) / cth]

    # tight solver tolerances so the reference is far more exact than the check
    return solve_ivp(rhs, (0.0, 2.0), [ta], method="Radau", rtol=1e-11, atol=1e-12,
                     dense_output=True)  # fmt: skip


def test_divider_transient_matches_solve_ivp() -> None:
    # divider_tran.cir: .tran 1m 2 0 1m, a 1 ms max step against tau = 0.5 s
    report = report_of("divider_tran.cir")
    table = list(csv.reader(io.StringIO(csv_report.render(report))))
    header, values = table[0], np.array(table[1:], dtype=float)
    time = values[:, header.index("time [s]")]
    temp = values[:, header.index("T(R1) [degC]")]
    solution = divider_ode(10.0, 100.0, 100.0, 0.004, 50.0, 0.01, 25.0)
    for when in TRANSIENT_TIMES:
        expected = float(solution.sol(when)[0])
        # ngspice's truncation-error control works to RELTOL; 1e-3 of the rise so far,
        # plus VNTOL (linear interpolation between 1 ms points adds ~1e-6 K at most)
        tol = RELTOL * (expected - 25.0) + VNTOL
        assert float(np.interp(when, time, temp)) == pytest.approx(expected, abs=tol), when
    data = json.loads(json_report.render(report))["parts"]["R1"]
    final = float(solution.sol(2.0)[0])
    assert data["temperature"] == pytest.approx(final, abs=RELTOL * (final - 25.0))
    # a cold start rises monotonically, so the peak is the final value
    assert data["peak_temperature"] == pytest.approx(final, abs=RELTOL * (final - 25.0))


# (part, rth K/W) of heat_only.thermal.toml; ambient 30 degC.  D1 carries I1 = 10 mA; X1 is
# a 100 ohm cell across 5 V, P = V^2 / R = 0.25 W (worked by hand).
def test_heat_only_parts_match_v_times_i() -> None:
    data = json_of("heat_only.cir")
    diode, cell = data["parts"]["D1"], data["parts"]["X1"]
    p_diode = data["voltages"]["a"] * 10e-3
    assert diode["model"] is None and diode["resistance"] is None
    assert diode["power"] == pytest.approx(p_diode, rel=RELTOL)
    assert diode["temperature"] == pytest.approx(30.0 + 100.0 * p_diode, abs=RELTOL * 31 + VNTOL)
    assert cell["power"] == pytest.approx(5.0**2 / 100.0, rel=RELTOL)
    assert cell["temperature"] == pytest.approx(30.0 + 40.0 * 0.25, abs=RELTOL * 40 + VNTOL)


# IEC 60115-1 derating curve: rated power to the knee (70 degC), linear to zero at the
# upper category temperature.  (rating W, ambient degC, knee, tmax, allowed W)
DERATING = [
    (0.25, 25.0, 70.0, 155.0, 0.25),
    (0.25, 70.0, 70.0, 155.0, 0.25),
    (0.25, 112.5, 70.0, 155.0, 0.125),  # half way down the slope
    (0.25, 155.0, 70.0, 155.0, 0.0),
    (0.25, 170.0, 70.0, 155.0, 0.0),
    (1.0, 85.0, 70.0, 125.0, 40.0 / 55.0),
    (2.0, 150.0, 70.0, None, 2.0),  # no tmax: no curve to follow
]


@pytest.mark.parametrize(("rating", "ambient", "knee", "tmax", "allowed"), DERATING)
def test_derated_power_follows_iec_60115_1(
    rating: float, ambient: float, knee: float, tmax: float | None, allowed: float
) -> None:
    assert derated_power(rating, ambient, knee, tmax) == pytest.approx(allowed, rel=1e-12)


def test_margins_negative_when_rating_exceeded() -> None:
    found = margins(hottest=160.0, power=0.3, local_ambient=25.0, rating=0.25, tmax=155.0)
    assert found.temperature == pytest.approx(-5.0)
    assert found.power == pytest.approx(-0.05)
    assert found.load == pytest.approx(1.2)
    assert (
        margins(hottest=50.0, power=1.0, local_ambient=25.0, rating=None, tmax=None).power is None
    )


def lines_per_axes(report: RunReport) -> list[int]:
    figure = plot.build_figure(report)
    return [sum(isinstance(a, Line2D) for a in ax.get_children()) for ax in figure.axes]


def test_transient_figure_has_one_curve_per_quantity() -> None:
    # board.cir: parts RA, RB (resistors), DK (heat only), node patch, probes mid and k,
    # and the supply's branch current
    report = report_of("board.cir", probes=("mid", "k", "I(v1)"))
    marks = sum(len(plot.limit_marks(row)) for row in report.rows)
    assert marks >= 1  # the fixture gives some part a tmax
    # temperatures: 3 parts + 1 node + ambient + limit lines; drift: 2 resistors + zero
    # line; voltages: 2; currents: 1
    assert lines_per_axes(report) == [5 + marks, 3, 2, 1]
    figure = plot.build_figure(report)
    assert figure.axes[-1].get_xlabel() == "time [s]"
    # RA drifts by about 15,000 ppm: past 10,000 ppm the axis is in %
    largest = max(abs(row.change_ppm or 0.0) for row in report.rows)
    assert largest > 10_000
    assert [ax.get_ylabel() for ax in figure.axes] == [
        "temperature [degC]", "resistance change [%]", "voltage [V]", "current [A]",
    ]  # fmt: skip
    # the current's curve is the simulated branch current (12 V over RA + RB at the end,
    # to the simulator's tolerance: the resistances drift only by their TCR)
    (current,) = [c for c in figure.axes[3].get_children() if isinstance(c, Line2D)]
    assert current.get_ydata()[-1] == pytest.approx(report.results.currents["v1"], rel=1e-12)
    # one colour per part in every panel
    curves = {"RA", "RB", "DK", "node patch", "ambient"}
    temp_colour = {t.get_text(): t.get_color() for t in figure.axes[0].texts}
    limit = plot.limit_marks(report.rows[0])[1][1]
    assert {name for name in temp_colour if name not in curves} == {
        "RA, RB tmax 155", f"RA derating limit of node patch {limit:.4g}",
    }  # RB dissipates more than its 0.5 W even below the knee: no derating limit
    temp_colour = {name: colour for name, colour in temp_colour.items() if name in curves}
    drift_colour = {t.get_text(): t.get_color() for t in figure.axes[1].texts}
    assert temp_colour["RA"] == drift_colour["RA"] and temp_colour["RB"] == drift_colour["RB"]
    assert len(set(temp_colour.values())) == len(temp_colour)


def test_operating_point_figure_is_bars() -> None:
    report = report_of("board.cir", RunOptions(analyses=("op",)), probes=("I(v1)",))
    figure = plot.build_figure(report)
    bars = [sum(isinstance(p, Rectangle) for p in ax.containers[0]) for ax in figure.axes]
    assert bars == [4, 2, 1]  # 3 parts + node patch; 2 resistors; one branch current
    assert figure.axes[2].get_ylabel() == "current [A]"


@pytest.mark.parametrize(
    ("rating", "power", "knee", "tmax", "expected"),
    [
        # IEC 60115-1 curve inverted by hand: the derated rating equals P at
        # T = knee + (tmax - knee) (1 - P / rating)
        (0.5, 0.25, 70.0, 155.0, 112.5),
        (0.5, 0.5, 70.0, 155.0, 70.0),
        (0.5, 0.0, 70.0, 155.0, 155.0),
        (0.5, 0.6, 70.0, 155.0, None),  # over the rating even below the knee
        (0.5, 0.25, 70.0, None, None),  # no tmax: no curve
    ],
)
def test_derating_limit_inverts_the_curve(
    rating: float, power: float, knee: float, tmax: float | None, expected: float | None
) -> None:
    from heatweave.annotation.ratings import derating_limit

    found = derating_limit(rating, power, knee, tmax)
    if expected is None:
        assert found is None
        return
    assert found == pytest.approx(expected, abs=1e-12)
    assert derated_power(rating, found, knee, tmax) == pytest.approx(power, abs=1e-12)


def test_limit_lines_and_leader_lines() -> None:
    """tmax and derating limit drawn at their values; crowded end labels get leaders."""
    report = report_of("divider_tran.cir")
    (row,) = report.rows
    marks = dict((label, value) for label, value, _ in plot.limit_marks(row))
    assert marks["R1 tmax"] == row.tmax == 155.0
    allowed, margin = row.margins.allowed, row.margins.power
    assert allowed is not None and margin is not None
    knee_limit = 70.0 + (155.0 - 70.0) * (1 - (allowed - margin) / 0.5)
    assert marks["R1 derating limit of ambient"] == pytest.approx(knee_limit, rel=1e-12)
    figure = plot.build_figure(report)
    heights = {
        round(float(line.get_ydata()[0]), 9)
        for line in figure.axes[0].get_lines()
        if len(set(line.get_ydata())) == 1
    }
    assert {155.0, round(knee_limit, 9)} <= heights
    assert {"R1", "ambient"} <= {t.get_text() for t in figure.axes[0].texts}


def test_crowded_end_labels_get_leader_lines() -> None:
    """Ends 0.1 apart on a 0..10 panel (labels need 0.75): the moved labels are tied to
    their curve ends by leader lines; a label that stays at its end gets none."""
    from matplotlib.figure import Figure

    axes = Figure().add_subplot()
    axes.set_ylim(0.0, 10.0)
    ends = [("a", 5.0, "red"), ("b", 5.1, "blue"), ("c", 5.2, "green"), ("far", 9.0, "k")]
    plot._label_ends(axes, ends)
    texts = {t.get_text(): t for t in axes.texts}
    for name, end, _ in ends:
        text = texts[name]
        assert text.xy[1] == end  # the leader (or label) points at the curve's end
        moved = bool(abs(text.xyann[1] - end) > 0.75 / 4)
        assert (text.arrow_patch is not None) is moved
    assert texts["c"].arrow_patch is not None and texts["far"].arrow_patch is None


@pytest.mark.parametrize(
    ("values", "gap"),
    [([1.0, 1.0, 1.0], 0.5), ([3.0, 0.0, 2.9, 3.05], 0.2), ([5.0], 1.0), ([0.0, 10.0], 1.0)],
)
def test_end_labels_never_overlap(values: list[float], gap: float) -> None:
    placed = plot.spread(values, gap)
    ordered = sorted(placed)
    assert all(b - a >= gap - 1e-12 for a, b in itertools.pairwise(ordered))
    # labels keep the order of the curve ends they name
    assert np.argsort(placed, kind="stable").tolist() == np.argsort(values, kind="stable").tolist()


def test_csv_operating_point_is_one_row_without_time() -> None:
    report = report_of("board.cir", RunOptions(analyses=("op",)))
    rows = list(csv.reader(io.StringIO(csv_report.render(report))))
    assert len(rows) == 2
    assert rows[0] == [
        "T(RA) [degC]", "R(RA) [ohm]", "P(RA) [W]",
        "T(RB) [degC]", "R(RB) [ohm]", "P(RB) [W]",
        "T(DK) [degC]", "P(DK) [W]",
        "T(node patch) [degC]",
        *[f"V({node}) [V]" for node in report.results.voltages],  # no probe: no I() column
    ]  # fmt: skip
    assert float(rows[1][0]) == report.results.part("RA").temperature


def test_table_margins_agree_with_check() -> None:
    from heatweave.checks.limits import ambient_series, part_limits

    path = str(FIXTURES / "board.cir")
    annotation = path.replace(".cir", ".thermal.toml")
    inputs = load_inputs(path, annotation)
    outcome = run(path, annotation, inputs=inputs)
    report = build_report(inputs, outcome)
    judged = {
        (r.subject, r.limit): r
        for r in part_limits(outcome.results, ambient_series(outcome.results))
    }
    for row in report.rows:
        if row.power_rating is not None:
            limit = judged[(row.path, "power_rating")]
            assert row.margins.allowed == pytest.approx(limit.bound, rel=1e-12)
            assert row.margins.power == pytest.approx(limit.bound - limit.value, rel=1e-12)
        if row.tmax is not None:
            limit = judged[(row.path, "tmax")]
            assert row.margins.temperature == pytest.approx(limit.bound - limit.value, rel=1e-12)


@pytest.mark.parametrize(
    ("largest_ppm", "unit"),
    # shunt vs NTC drifts; % from 10,000 ppm, where the sweep table switches too
    [(0.0, "ppm"), (499.6, "ppm"), (9_999.9, "ppm"), (1e4, "%"), (926_101.7, "%")],
)
def test_drift_axis_unit(largest_ppm: float, unit: str) -> None:
    from heatweave.reports.plot import drift_unit

    per_unit, label = drift_unit(largest_ppm)
    assert label == unit
    assert per_unit == (1e4 if unit == "%" else 1.0)  # 1 % = 10,000 ppm
