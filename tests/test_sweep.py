"""``heatweave sweep``: corners against independent answers, Monte Carlo statistics,
independence of -j and of the executor, failures per corner.

Independent answers: scipy.optimize.brentq on the steady-state power balance
``T = Ta + Rth * P(T)`` of each corner; the quadratic formula for a heater straight across
the supply; scipy.stats for the drawn tolerances.  Simulations really run ngspice.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
import shutil
import socket
import xml.etree.ElementTree as ET
from collections.abc import Iterator
from datetime import datetime
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from click.testing import CliRunner, Result
from scipy import stats
from scipy.optimize import brentq

from heatweave.annotation import load
from heatweave.cli.sweep_cmd import sweep
from heatweave.errors import EXIT_BAD_INPUT, EXIT_CHECK_FAILED, EXIT_OK, EXIT_THERMAL_RUNAWAY
from heatweave.sweep.corners import draws
from heatweave.sweep.grid import parse_range

pytestmark = pytest.mark.ngspice

FIXTURES = Path(__file__).parent / "fixtures" / "sweep"
DIVIDER = str(FIXTURES / "divider.cir")
MC_ANNOTATION = str(FIXTURES / "divider.mc.thermal.toml")
HEATER = str(FIXTURES / "heater.cir")
RUNAWAY = str(FIXTURES / "runaway.cir")
PNG_SIGNATURE = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), section 5.2

# ngspice's default convergence tolerances (manual 11.1.2, .options reltol and vntol):
# node voltages, and so temperatures (1 V = 1 degC), are good to reltol * |V| + vntol.
RELTOL = 1e-3
VNTOL = 1e-6


def invoke(*args: str) -> Result:
    return CliRunner().invoke(sweep, list(args), catch_exceptions=False)


def sweep_json(*args: str) -> dict[str, Any]:
    result = invoke(*args, "-q", "--json", "-")
    assert result.exit_code == EXIT_OK, result.output
    data: dict[str, Any] = json.loads(result.stdout)
    return data


def t_tol(expected: float) -> float:
    return RELTOL * abs(expected) + VNTOL


# ------------------------------------------------------------------------------ grids


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("-40:125:55", (-40.0, 15.0, 70.0, 125.0)),  # STOP on the grid: included
        ("0:10:4", (0.0, 4.0, 8.0)),  # STOP off the grid: the grid stops before it
        ("0:1:0.1", tuple(k / 10 for k in range(11))),  # no float creep past STOP
        ("125:-40:-82.5", (125.0, 42.5, -40.0)),  # downwards with a negative step
        ("85", (85.0,)),  # a single value
        ("10m:30m:10m", (0.01, 0.02, 0.03)),  # SPICE scale factors
        ("5:5:1", (5.0,)),
        ("0.2m,1m,5m", (0.0002, 0.001, 0.005)),  # a list, in the order given
        ("-40,0:50:25,125", (-40.0, 0.0, 25.0, 50.0, 125.0)),  # lists of ranges too
    ],
)
def test_range_grid(text: str, expected: tuple[float, ...]) -> None:
    # The grid rule of this tool: START + k * STEP, STOP included when on the grid.
    assert parse_range(text, "--ambient") == pytest.approx(expected, abs=1e-12)


@pytest.mark.parametrize(
    ("args", "message"),
    [
        (("--ambient", "0:10:-1"), "never gets from"),
        (("--ambient", "0:10"), "is not a value or a range"),
        (("--ambient", "hot"), "is not a value or a range"),
        # 1e400 overflows a double (IEEE 754 binary64 tops out near 1.8e308): infinity
        (("--ambient", "0:1e400:1"), "is not a finite temperature"),
        (("--ambient", "1e400"), "is not a finite temperature"),
        (("--param", "vbridge=1e400"), "is not a finite number"),
        (("--param", "vbridge=0:1e300:1e-300"), "points"),  # 1e600 steps: overflows
        (("--param", "vbridge"), "is not NAME=START:STOP:STEP"),
        (("--seed", "3"), "--seed is for --monte-carlo"),
        (("--scheduler", "tcp://127.0.0.1:1"), "--scheduler is for --executor dask"),
        (("-j", "0"), "need at least one worker"),
    ],
)
def test_bad_options_exit_2(args: tuple[str, ...], message: str) -> None:
    result = invoke(DIVIDER, *args, "-q")
    assert result.exit_code == EXIT_BAD_INPUT
    assert message in result.stderr
    assert "Traceback" not in result.output


def test_unknown_param_is_located_with_a_hint() -> None:
    result = invoke(DIVIDER, "--param", "vsupply=1:2:1", "-q")
    assert result.exit_code == EXIT_BAD_INPUT
    # FILE:LINE:COL of the deck's .param card, the card itself, and the names it does have
    assert f"{DIVIDER}:3:1: error: --param vsupply" in result.stderr
    assert ".param vbridge=12" in result.stderr
    assert "hint:" in result.stderr and "vbridge" in result.stderr


@pytest.mark.parametrize(
    "args",
    [
        # ngspice reads "DC 0.3" back as 0.30000000000000004 (its own number parser); the
        # corner must report the ambient that was asked for, the value the plan lists.
        ("--ambient", "0:0.3:0.1"),
        ("--ambient", "-40.7,12.3"),
        ("--ambient", "0.1:0.2:0.1", "--monte-carlo", "2", "--seed", "5", "-a", MC_ANNOTATION),
    ],
)
def test_corner_ambients_are_the_values_asked_for(args: tuple[str, ...]) -> None:
    data = sweep_json(DIVIDER, *args)
    asked = list(parse_range(args[1], "--ambient"))
    assert data["sweep"]["ambients"] == asked
    draws = (data["sweep"]["monte_carlo"] or {"draws": 1})["draws"]
    assert [c["ambient"] for c in data["corners"]] == asked * draws
    if data["summary"]["kind"] == "monte_carlo":
        assert [g["ambient"] for g in data["summary"]["groups"]] == asked


# ------------------------------------------------------------ corners against brentq

# divider.cir / divider.thermal.toml: RUP 220 ohm, tc1 3500 ppm/K (tref 25 degC),
# Rth 120 K/W, in series with RLO 330 ohm across VB = {vbridge} = 12 V.
R_UP, R_LO, TC1, RTH, TREF = 220.0, 330.0, 3500e-6, 120.0, 25.0


def divider_temperature(ta: float, v: float, tc1: float = TC1, rth: float = RTH) -> float:
    """Steady state of the self-heated leg: T = Ta + Rth V^2 R(T) / (R(T) + RLO)^2."""

    def balance(t: float) -> float:
        r = R_UP * (1 + tc1 * (t - TREF))
        return t - ta - rth * v * v * r / (r + R_LO) ** 2

    return float(brentq(balance, ta, ta + 500.0, xtol=1e-12))


def test_ambient_corners_match_brentq() -> None:
    data = sweep_json(DIVIDER, "--ambient", "-40:110:75")
    corners = data["corners"]
    assert [c["ambient"] for c in corners] == [-40.0, 35.0, 110.0]
    for corner in corners:
        ta = corner["ambient"]
        expected = divider_temperature(ta, 12.0)
        part = corner["parts"]["RUP"]
        assert corner["status"] == "ok"
        assert part["temperature"] == pytest.approx(expected, abs=t_tol(expected))
        r = R_UP * (1 + TC1 * (expected - TREF))
        assert part["resistance_change_ppm"] == pytest.approx(
            (r / R_UP - 1) * 1e6, abs=1e6 * TC1 * t_tol(expected)
        )
        assert corner["voltages"]["mid"] == pytest.approx(12.0 * R_LO / (r + R_LO), rel=RELTOL)
    summary = data["summary"]
    assert summary["kind"] == "corners"
    hottest = summary["parts"]["RUP"]["temperature"]
    assert hottest["max_corner"] == 2
    assert hottest["max"] == corners[2]["parts"]["RUP"]["temperature"]


# ------------------------------------------------- .param corners against closed form

# heater.cir / heater.thermal.toml: RH 47 ohm, tc1 0.0039/K (tref 25), Rth 60 K/W, straight
# across VH = {vheat}.  With dT = T - Ta and b = 1 + tc1 (Ta - 25):
#   dT = Rth V^2 / (R0 b (1 + (tc1/b) dT))  =>  (tc1/b) dT^2 + dT - Rth V^2 / (R0 b) = 0,
# whose positive root is the quadratic formula.
R_HEAT, TC1_HEAT, RTH_HEAT = 47.0, 0.0039, 60.0


def heater_temperature(ta: float, v: float) -> float:
    b = 1 + TC1_HEAT * (ta - TREF)
    a, k = TC1_HEAT / b, RTH_HEAT * v * v / (R_HEAT * b)
    return ta + (-1 + math.sqrt(1 + 4 * a * k)) / (2 * a)


def test_param_corners_match_the_closed_form() -> None:
    data = sweep_json(HEATER, "--param", "vheat=3:9:3", "--ambient", "0:50:50", "-j", "2")
    corners = data["corners"]
    # parameters outer, ambient inner
    assert [(c["params"]["vheat"], c["ambient"]) for c in corners] == [
        (3.0, 0.0), (3.0, 50.0), (6.0, 0.0), (6.0, 50.0), (9.0, 0.0), (9.0, 50.0),
    ]  # fmt: skip
    for corner in corners:
        v, ta = corner["params"]["vheat"], corner["ambient"]
        expected = heater_temperature(ta, v)
        part = corner["parts"]["RH"]
        assert part["temperature"] == pytest.approx(expected, abs=t_tol(expected))
        r = R_HEAT * (1 + TC1_HEAT * (expected - TREF))
        assert part["power"] == pytest.approx(v * v / r, rel=RELTOL)
        assert corner["voltages"]["feed"] == pytest.approx(v, rel=1e-9)


def test_param_rewrite_keeps_the_rest_of_the_deck(tmp_path: Path) -> None:
    from heatweave.emit.emitter import load_inputs
    from heatweave.sweep.grid import with_params

    inputs = load_inputs(HEATER, str(FIXTURES / "heater.thermal.toml"))
    changed = with_params(inputs, {"vheat": 7.5})
    before = inputs.project.deck.write().splitlines()
    after = changed.project.deck.write().splitlines()
    assert [i for i, (x, y) in enumerate(zip(before, after, strict=True)) if x != y] == [1]
    assert after[1] == ".param vheat=7.5"


# --------------------------------------------------------------------- Monte Carlo

# divider.mc.thermal.toml: tc1_ppm normal (3500, sigma 300); rth uniform on [105, 135].
TC1_MEAN, TC1_SIGMA = 3500.0, 300.0
RTH_LOW, RTH_HIGH = 105.0, 135.0


def drawn_parameters(count: int, seed: int) -> tuple[np.ndarray, np.ndarray]:
    annotation = load(MC_ANNOTATION)
    tc1, rth = [], []
    for drawn in draws(annotation, count, seed):
        part = drawn.parts[0]
        tc1.append(part.param_map["tc1_ppm"])
        rth.append(part.network.stages[0][0])
    return np.asarray(tc1, dtype=float), np.asarray(rth, dtype=float)


def test_drawn_tolerances_follow_the_requested_distributions() -> None:
    n = 4000
    tc1, rth = drawn_parameters(n, seed=20261201)
    # Mean within 4 standard errors (two-sided probability of a false alarm 6e-5, normal
    # distribution tables); sample variance inside the central 99.99 % of the chi-square
    # distribution with n - 1 degrees of freedom (the textbook variance test).
    assert abs(tc1.mean() - TC1_MEAN) < 4 * TC1_SIGMA / math.sqrt(n)
    chi2 = (n - 1) * tc1.var(ddof=1) / TC1_SIGMA**2
    low, high = stats.chi2.ppf([5e-5, 1 - 5e-5], n - 1)
    assert low < chi2 < high
    # Whole-distribution checks: Kolmogorov-Smirnov against scipy.stats' normal and uniform.
    assert stats.kstest(tc1, stats.norm(TC1_MEAN, TC1_SIGMA).cdf).pvalue > 1e-4
    assert stats.kstest(rth, stats.uniform(RTH_LOW, RTH_HIGH - RTH_LOW).cdf).pvalue > 1e-4
    assert rth.min() >= RTH_LOW and rth.max() <= RTH_HIGH


def test_draws_do_not_depend_on_how_many_are_asked_for() -> None:
    # SeedSequence.spawn: child k is the same whatever the number of children.
    few = drawn_parameters(5, seed=7)
    many = drawn_parameters(50, seed=7)
    assert np.array_equal(few[0], many[0][:5]) and np.array_equal(few[1], many[1][:5])


@pytest.fixture(scope="module")
def monte_carlo() -> dict[str, Any]:
    return sweep_json(
        DIVIDER, "-a", MC_ANNOTATION, "--monte-carlo", "40", "--seed", "11",
        "--ambient", "25:85:60", "-j", "2",
    )  # fmt: skip


def test_monte_carlo_corners_match_brentq_with_their_drawn_values(
    monte_carlo: dict[str, Any],
) -> None:
    corners = monte_carlo["corners"]
    assert len(corners) == 80
    # each draw (one manufactured unit) at each ambient, ambient innermost
    assert [(c["draw"], c["ambient"]) for c in corners[:4]] == [
        (0, 25.0), (0, 85.0), (1, 25.0), (1, 85.0),
    ]  # fmt: skip
    assert corners[0]["drawn"] == corners[1]["drawn"]
    for corner in corners[::7]:
        drawn = corner["drawn"]["RUP"]
        expected = divider_temperature(
            corner["ambient"], 12.0, tc1=drawn["tc1_ppm"] * 1e-6, rth=drawn["rth"]
        )
        got = corner["parts"]["RUP"]["temperature"]
        assert got == pytest.approx(expected, abs=t_tol(expected))


def test_monte_carlo_summary_is_numpy_statistics_of_the_corners(
    monte_carlo: dict[str, Any],
) -> None:
    groups = monte_carlo["summary"]["groups"]
    assert [g["ambient"] for g in groups] == [25.0, 85.0]
    for group in groups:
        temps = [
            c["parts"]["RUP"]["temperature"]
            for c in monte_carlo["corners"]
            if c["ambient"] == group["ambient"]
        ]
        figures = group["parts"]["RUP"]["temperature"]
        assert group["draws"] == len(temps) == 40
        assert figures["mean"] == pytest.approx(float(np.mean(temps)), rel=1e-12)
        assert figures["std"] == pytest.approx(float(np.std(temps, ddof=1)), rel=1e-12)
        for p in (1, 50, 99):
            assert figures[f"p{p}"] == pytest.approx(float(np.percentile(temps, p)), rel=1e-12)


def test_same_seed_same_numbers_other_seed_other_draws(monte_carlo: dict[str, Any]) -> None:
    args = (DIVIDER, "-a", MC_ANNOTATION, "--monte-carlo", "40", "--ambient", "25:85:60")
    again = sweep_json(*args, "--seed", "11", "-j", "1")
    assert again["summary"] == monte_carlo["summary"]
    assert again["corners"] == monte_carlo["corners"]
    other = sweep_json(*args, "--seed", "12", "-j", "2")
    ours = [c["drawn"]["RUP"]["tc1_ppm"] for c in monte_carlo["corners"]]
    theirs = [c["drawn"]["RUP"]["tc1_ppm"] for c in other["corners"]]
    assert not set(ours) & set(theirs)
    assert other["summary"]["groups"][0]["parts"] != monte_carlo["summary"]["groups"][0]["parts"]


def test_monte_carlo_without_seed_reports_the_seed_that_reproduces_it() -> None:
    args = (DIVIDER, "-a", MC_ANNOTATION, "--monte-carlo", "3", "-j", "1")
    first = sweep_json(*args)
    seed = first["sweep"]["monte_carlo"]["seed"]
    assert isinstance(seed, int)
    assert sweep_json(*args, "--seed", str(seed))["corners"] == first["corners"]


@pytest.mark.parametrize(
    ("annotation", "warned"),
    [
        (str(FIXTURES / "divider.thermal.toml"), True),  # no tolerance: every draw nominal
        (MC_ANNOTATION, False),
    ],
)
def test_monte_carlo_over_no_tolerance_is_warned(annotation: str, warned: bool) -> None:
    result = invoke(DIVIDER, "-a", annotation, "--monte-carlo", "2", "--seed", "1", "-q")
    assert result.exit_code == EXIT_OK, result.output
    assert ("gives no tolerance" in result.stderr) is warned


# -------------------------------------------------------- independence of -j / executor


def corner_numbers(data: dict[str, Any]) -> list[Any]:
    return [
        {k: c[k] for k in ("index", "ambient", "params", "draw", "drawn", "parts", "voltages")}
        for c in data["corners"]
    ]


@pytest.fixture(scope="module")
def dask_scheduler() -> Iterator[str]:
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(
        n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1",
        dashboard_address=":0",
    )  # fmt: skip
    try:
        yield str(cluster.scheduler_address)
    finally:
        cluster.close()


SWEEP_ARGS = (
    DIVIDER, "-a", MC_ANNOTATION, "--ambient", "-40:85:125", "--param", "vbridge=10:14:4",
    "--monte-carlo", "3", "--seed", "5",
)  # fmt: skip


def test_results_do_not_depend_on_jobs_or_executor(dask_scheduler: str) -> None:
    serial = sweep_json(*SWEEP_ARGS, "-j", "1")
    parallel = sweep_json(*SWEEP_ARGS, "-j", "2")
    on_dask = sweep_json(*SWEEP_ARGS, "--executor", "dask", "--scheduler", dask_scheduler)
    assert len(serial["corners"]) == 2 * 3 * 2
    assert corner_numbers(parallel) == corner_numbers(serial)
    assert corner_numbers(on_dask) == corner_numbers(serial)
    assert on_dask["executor"] == "dask" and serial["executor"] == "local"


def test_unreachable_scheduler_is_bad_input() -> None:
    result = invoke(DIVIDER, "--executor", "dask", "--scheduler", "tcp://127.0.0.1:9", "-q")
    assert result.exit_code == EXIT_BAD_INPUT
    assert "cannot reach the Dask scheduler" in result.stderr


# ------------------------------------------------------------------------- failures


def test_a_failing_corner_is_named_and_the_others_run() -> None:
    # runaway.thermal.toml, hand-worked from the linear model at Ta = tref: a current I
    # gives dT = Rth I^2 R0 (1 + tc1 dT), so dT = Rth I^2 R0 / (1 - g) with loop gain
    # g = I^2 R0 tc1 Rth = 20 I^2; above I = 0.2236 A (g = 1) no steady state exists.
    result = invoke(RUNAWAY, "--param", "idrive=0.1:0.3:0.2", "--json", "-")
    assert result.exit_code == EXIT_CHECK_FAILED
    data = json.loads(result.stdout)
    ok, failed = data["corners"]
    assert ok["status"] == "ok" and failed["status"] == "failed"
    i, r0, tc1, rth = 0.1, 100.0, 0.004, 50.0
    expected = 25.0 + i * i * r0 * rth / (1 - i * i * r0 * tc1 * rth)
    got = ok["parts"]["RS"]["temperature"]
    assert got == pytest.approx(expected, abs=t_tol(expected))
    assert data["failed"] == [1]
    assert "runs away" in failed["error"]
    assert "corner 1 (ambient 25 degC, idrive=0.3) failed" in result.stderr


def test_all_corners_failing_gives_the_simulator_status() -> None:
    result = invoke(RUNAWAY, "--param", "idrive=0.3:0.4:0.1", "-q")
    assert result.exit_code == EXIT_THERMAL_RUNAWAY
    assert "corner 0 (ambient 25 degC, idrive=0.3) failed" in result.stderr
    assert "corner 1 (ambient 25 degC, idrive=0.4) failed" in result.stderr


# -------------------------------------------------------------------------- outputs


def test_table_csv_and_plot(tmp_path: Path) -> None:
    deck = tmp_path / "divider.cir"
    shutil.copy(DIVIDER, deck)
    shutil.copy(FIXTURES / "divider.thermal.toml", tmp_path / "divider.thermal.toml")
    csv_file, png = tmp_path / "c.csv", tmp_path / "c.png"
    result = invoke(
        str(deck), "--ambient", "0:50:25", "--param", "vbridge=6:12:6",
        "--csv", str(csv_file), "--plot", str(png),
    )  # fmt: skip
    assert result.exit_code == EXIT_OK, result.output
    lines = result.stdout.splitlines()
    assert lines[0].endswith("6 corners (local executor)")
    assert lines[-1].startswith("licensed practice") or "caution:" in result.stdout
    rows = list(csv.DictReader(io.StringIO(csv_file.read_text())))
    assert len(rows) == 6  # one row per corner and part
    assert [float(r["ambient [degC]"]) for r in rows[:3]] == [0.0, 25.0, 50.0]
    expected = divider_temperature(50.0, 12.0)
    assert float(rows[-1]["T [degC]"]) == pytest.approx(expected, abs=t_tol(expected))
    assert png.read_bytes().startswith(PNG_SIGNATURE)


def test_monte_carlo_table_and_plot(tmp_path: Path) -> None:
    png = tmp_path / "mc.png"
    result = invoke(
        DIVIDER, "-a", MC_ANNOTATION, "--monte-carlo", "20", "--seed", "1", "--plot", str(png)
    )
    assert result.exit_code == EXIT_OK, result.output
    assert "Monte Carlo 20 draws, seed 1" in result.stdout
    header = result.stdout.splitlines()[2].split()
    assert header[-5:] == ["mean", "std", "p1", "p50", "p99"]
    assert png.read_bytes().startswith(PNG_SIGNATURE)


@pytest.mark.parametrize("ambients", [(25.0,), (25.0, 85.0)], ids=["histograms", "bands"])
def test_monte_carlo_plot_shows_the_rise(tmp_path: Path, ambients: tuple[float, ...]) -> None:
    """Monte Carlo panels show the rise above ambient as the corner panels do: the draws'
    T - Ta and their 1/50/99 percentiles (numpy's, of the same corner data the JSON holds),
    and over ambient the allowed rise tmax - Ta dashed."""
    from heatweave.emit.emitter import load_inputs
    from heatweave.run.prepare import RunOptions
    from heatweave.sweep.corners import SweepPlan, run_sweep
    from heatweave.sweep.executors import make_executor
    from heatweave.sweep.plot import build_figure

    annotation = tmp_path / "divider.thermal.toml"
    annotation.write_text(Path(MC_ANNOTATION).read_text() + "tmax = 110.0\n")
    inputs = load_inputs(DIVIDER, str(annotation))
    pool = make_executor("local", 1)
    try:
        result = run_sweep(inputs, SweepPlan(ambients, (), 12, 5), RunOptions(), pool)
    finally:
        pool.close()
    rises = {
        ta: [o.data["parts"]["RUP"]["temperature"] - ta for o in result.outcomes
             if o.data is not None and o.corner.ambient == ta]
        for ta in ambients
    }  # fmt: skip
    assert all(len(values) == 12 and min(values) > 1.0 for values in rises.values())
    rise_axes, drift_axes = build_figure(result).axes[:2]
    # drifts of 4 to 30 % (3500 ppm/K over 12 to 87 K): in % past 10,000 ppm, as the table
    drift_label = drift_axes.get_xlabel() if len(ambients) == 1 else drift_axes.get_ylabel()
    assert drift_label == "RUP: resistance drift vs deck value [%]"
    wanted = [float(np.percentile(rises[ambients[0]], p)) for p in (1, 50, 99)]
    if len(ambients) == 1:
        assert rise_axes.get_xlabel() == "RUP: rise above ambient [K]"
        marks = [line.get_xdata()[0] for line in rise_axes.get_lines()]
        assert marks == pytest.approx(wanted, rel=1e-12)
        bars = [patch.get_x() for patch in rise_axes.patches]
        assert min(bars) == pytest.approx(min(rises[25.0]), rel=1e-12)
        return
    assert rise_axes.get_ylabel() == "RUP: rise above ambient [K]"
    curves = {line.get_label(): line for line in rise_axes.get_lines()}
    median = [float(np.percentile(rises[ta], 50)) for ta in ambients]
    assert list(curves["RUP: p50"].get_ydata()) == pytest.approx(median, rel=1e-12)
    allowed = curves["RUP: tmax - ambient (allowed rise)"]
    assert list(allowed.get_ydata()) == [110.0 - ta for ta in ambients]
    assert allowed.get_linestyle() == "--"


def test_dask_without_scheduler_starts_and_stops_its_own_cluster() -> None:
    pytest.importorskip("distributed")
    data = sweep_json(HEATER, "--param", "vheat=4:8:4", "--executor", "dask", "-j", "1")
    assert data["executor"] == "dask"
    for corner in data["corners"]:
        expected = heater_temperature(25.0, corner["params"]["vheat"])
        got = corner["parts"]["RH"]["temperature"]
        assert got == pytest.approx(expected, abs=t_tol(expected))


def test_control_block_dropped_with_one_warning_for_all_corners() -> None:
    deck = str(FIXTURES / "heater_control.cir")
    result = invoke(deck, "--ambient", "0:40:20", "-q")
    assert result.exit_code == EXIT_OK, result.output
    assert result.stderr.count("dropped a .control block") == 1
    assert "this block must not run" not in result.output


def test_param_of_an_included_file_is_swept(tmp_path: Path) -> None:
    # The supply voltage is set in an included file, which sweep leaves untouched: each
    # corner's own .param before .end overrides it (ngspice keeps the last assignment).
    (tmp_path / "supply.inc").write_text("* supply settings\n.param vheat=5\n")
    deck = tmp_path / "heater.cir"
    deck.write_text(
        "heater across a supply set in an include\n.include supply.inc\n"
        "VH feed 0 DC {vheat}\nRH feed 0 47\n.op\n.end\n"
    )
    shutil.copy(FIXTURES / "heater.thermal.toml", tmp_path / "heater.thermal.toml")
    data = sweep_json(str(deck), "--param", "vheat=3:9:3")
    for corner in data["corners"]:
        v = corner["params"]["vheat"]
        expected = heater_temperature(25.0, v)
        assert corner["parts"]["RH"]["temperature"] == pytest.approx(expected, abs=t_tol(expected))
        assert corner["voltages"]["feed"] == pytest.approx(v, rel=1e-9)
    assert (tmp_path / "supply.inc").read_text() == "* supply settings\n.param vheat=5\n"


# ------------------------------------------------------------ a deck on standard input


def divider_with_include(folder: Path) -> str:
    """divider.cir's text with its lower leg moved into ``leg.inc`` in *folder*, which the
    text includes by a relative path."""
    (folder / "leg.inc").write_text("RLO mid 0 330\n")
    text = Path(DIVIDER).read_text()
    assert "RLO mid 0 330\n" in text
    return text.replace("RLO mid 0 330\n", ".include leg.inc\n")


@pytest.mark.parametrize(
    "where",
    [
        ("-j", "1"),  # this process
        ("-j", "2"),  # local worker processes: they get the deck's text, not the path -
        ("--executor", "dask"),  # a cluster started elsewhere: another current folder
    ],
    ids=["serial", "processes", "dask"],
)
def test_deck_on_stdin_matches_brentq(
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    request: pytest.FixtureRequest,
    where: tuple[str, ...],
) -> None:
    """``sweep -``: the deck is read from stdin once and its include found from the
    current folder, wherever the corners run."""
    if "dask" in where:
        where = (*where, "--scheduler", request.getfixturevalue("dask_scheduler"))
    text = divider_with_include(tmp_path)
    annotation = str(FIXTURES / "divider.thermal.toml")
    monkeypatch.chdir(tmp_path)
    args = ["-", "-a", annotation, "--ambient", "-40:110:75", *where, "-q", "--json", "-"]
    result = CliRunner().invoke(sweep, args, input=text, catch_exceptions=False)
    assert result.exit_code == EXIT_OK, result.output
    data = json.loads(result.stdout)
    assert data["deck"] == "-"
    assert [c["ambient"] for c in data["corners"]] == [-40.0, 35.0, 110.0]
    for corner in data["corners"]:
        expected = divider_temperature(corner["ambient"], 12.0)
        assert corner["parts"]["RUP"]["temperature"] == pytest.approx(expected, abs=t_tol(expected))


# ------------------------------------------------------------------ --check: limits

# divider.limits.thermal.toml: the divider's RUP with power_rating 0.25 W derated from a knee
# of 70 degC to zero at tmax 110 degC, and [limit."V(mid)"] min = 6.6 V (demo values).
LIMITS = str(FIXTURES / "divider.limits.thermal.toml")
DRIFT = str(FIXTURES / "divider.drift.thermal.toml")
RATING_UP, KNEE_UP, TMAX_UP, V_MID_MIN = 0.25, 70.0, 110.0, 6.6
DRIFT_MAX_PPM = 10000.0
CHECK_AMBIENTS = "0:120:30"


def r_up(t: float, tc1: float = TC1) -> float:
    """Linear TCR, R = R0 (1 + tc1 (T - tref)) (the first-order TCR definition)."""
    return R_UP * (1 + tc1 * (t - TREF))


def iec_allowed(ambient: float) -> float:
    """IEC 60115-1 derating: the full rating up to the knee (rated ambient temperature),
    then linear to zero at the upper category temperature (tmax)."""
    if ambient <= KNEE_UP:
        return RATING_UP
    return RATING_UP * max(0.0, (TMAX_UP - ambient) / (TMAX_UP - KNEE_UP))


def expected_limits(ta: float, v: float = 12.0) -> dict[str, tuple[float, float, bool]]:
    """(value, bound, passes) of each limit of divider.limits.thermal.toml at ambient *ta*,
    from the brentq steady state of the divider."""
    t = divider_temperature(ta, v)
    r = r_up(t)
    p = v * v * r / (r + R_LO) ** 2
    mid = v * R_LO / (r + R_LO)
    allowed = iec_allowed(ta)
    return {
        "RUP tmax": (t, TMAX_UP, t <= TMAX_UP),
        "RUP power_rating": (p, allowed, p <= allowed),
        "V(mid) min": (mid, V_MID_MIN, mid >= V_MID_MIN),
    }


def limit_tol(name: str, expected: float) -> float:
    """How far ngspice's answer may lie from brentq's: temperatures to reltol |T| + vntol,
    powers and voltages to reltol (the manual's convergence criterion, 11.1.2)."""
    return t_tol(expected) if name.endswith("tmax") else RELTOL * abs(expected) + VNTOL


def drift_ppm(ta: float, v: float, t: float, tc1: float = TC1) -> float:
    """|V_hot / V_cold - 1| of V(mid): the divider at *t* against the divider held at *ta*."""
    hot = v * R_LO / (r_up(t, tc1) + R_LO)
    cold = v * R_LO / (r_up(ta, tc1) + R_LO)
    return abs(hot / cold - 1) * 1e6


def checked_sweep(*args: str, code: int) -> tuple[Result, dict[str, Any]]:
    result = invoke(*args, "--check", "--json", "-")
    assert result.exit_code == code, result.output
    data: dict[str, Any] = json.loads(result.stdout)
    return result, data


@pytest.fixture(scope="module")
def limit_sweep(tmp_path_factory: pytest.TempPathFactory) -> tuple[Result, dict[str, Any], Path]:
    junit = tmp_path_factory.mktemp("junit") / "sweep.xml"
    args = (DIVIDER, "-a", LIMITS, "--ambient", CHECK_AMBIENTS, "--junit", str(junit), "-j", "2")
    result, data = checked_sweep(*args, code=EXIT_CHECK_FAILED)
    return result, data, junit


@pytest.mark.parametrize("ambient", parse_range(CHECK_AMBIENTS, "--ambient"))
def test_check_corners_against_brentq(
    limit_sweep: tuple[Result, dict[str, Any], Path], ambient: float
) -> None:
    _result, data, _junit = limit_sweep
    corner = next(c for c in data["corners"] if c["ambient"] == ambient)
    got = {f"{x['subject']} {x['limit']}": x for x in corner["limits"]}
    expected = expected_limits(ambient)
    assert list(got) == list(expected)  # check's order: part limits, then signal limits
    for name, (value, bound, passes) in expected.items():
        tol = limit_tol(name, value)
        # the verdict is decided by more than the simulator's tolerance
        assert abs(value - bound) > 10 * tol, (name, value, bound)
        assert got[name]["value"] == pytest.approx(value, abs=tol)
        assert got[name]["bound"] == pytest.approx(bound, abs=1e-12)
        assert got[name]["passed"] is passes, (name, ambient)
        assert got[name]["margin"] == pytest.approx(
            (bound - value) if got[name]["upper"] else (value - bound), abs=tol
        )


def test_check_grid_has_passing_and_failing_corners(
    limit_sweep: tuple[Result, dict[str, Any], Path],
) -> None:
    result, data, _junit = limit_sweep
    ambients = parse_range(CHECK_AMBIENTS, "--ambient")
    verdicts = [all(p for _v, _b, p in expected_limits(ta).values()) for ta in ambients]
    assert True in verdicts and False in verdicts  # the grid straddles the limits
    failing = [k for k, ok in enumerate(verdicts) if not ok]
    assert data["check"]["corners_checked"] == len(ambients)
    assert data["check"]["corners_failing"] == failing
    # one line per violated limit naming the corner, then the summary (table on stderr)
    lines = [x for x in result.stderr.splitlines() if x.startswith("FAIL")]
    wanted = [
        f"FAIL {name} at corner {k} (ambient {ta:g} degC): "
        for k, ta in enumerate(ambients)
        for name, (_v, _b, passes) in expected_limits(ta).items()
        if not passes
    ]
    assert [x[: len(w)] for x, w in zip(lines, wanted, strict=True)] == wanted
    n = len(ambients)
    assert f"{DIVIDER}: {n} corners checked, {len(failing)} failing" in result.stderr
    # the worst margin of each limit, at the corner brentq puts it
    for worst in data["check"]["worst"]:
        name = f"{worst['subject']} {worst['limit']}"
        margins = []
        for ta in ambients:
            value, bound, _p = expected_limits(ta)[name]
            margins.append(bound - value if worst["upper"] else value - bound)
        assert worst["corner"] == int(np.argmin(margins))
        assert worst["margin"] == pytest.approx(min(margins), abs=limit_tol(name, worst["value"]))
        assert f"worst {name}: " in result.stderr


def test_check_junit_has_a_case_per_corner_and_limit(
    limit_sweep: tuple[Result, dict[str, Any], Path],
) -> None:
    """JUnit XML as CI servers read it (testsuites > testsuite > testcase > failure; the
    Apache Ant JUnit layout, from memory)."""
    _result, _data, junit = limit_sweep
    root = ET.parse(junit).getroot()
    (suite,) = root.findall("testsuite")
    cases = suite.findall("testcase")
    ambients = parse_range(CHECK_AMBIENTS, "--ambient")
    assert len(cases) == len(ambients) * 3 == int(root.get("tests", "0"))
    expected_failures = 0
    for k, ta in enumerate(ambients):
        for name, (value, _bound, passes) in expected_limits(ta).items():
            case = next(
                c for c in cases if c.get("name") == f"corner {k} (ambient {ta:g} degC) {name}"
            )
            failure = case.find("failure")
            assert (failure is None) is passes
            if failure is not None:
                expected_failures += 1
                match = re.search(
                    r": ([-+0-9.e]+) (degC|W|V), at (most|least) ", failure.get("message", "")
                )
                assert match, failure.get("message")
                # printed to 5 significant digits: half a unit of the 5th digit on top
                shown = limit_tol(name, value) + 5e-5 * abs(value)
                assert float(match[1]) == pytest.approx(value, abs=shown)
    assert int(suite.get("failures", "-1")) == expected_failures > 0
    assert suite.get("errors") == "0"
    # when and where: ISO 8601 with its UTC offset, the host; each corner's cases share its
    # run's time, so they are positive and add up to less than the whole sweep took
    stamp = datetime.fromisoformat(suite.get("timestamp", ""))
    assert stamp.utcoffset() is not None
    assert suite.get("hostname") == socket.gethostname()
    times = [float(c.get("time", "nan")) for c in cases]
    assert all(t > 0 for t in times)
    assert sum(times) <= float(suite.get("time", "nan")) * 2  # -j 2: two corners at once


@pytest.fixture(scope="module")
def drift_sweep() -> dict[str, Any]:
    args = (DIVIDER, "-a", DRIFT, "--param", "vbridge=4:12:4", "--ambient", "25:85:60")
    return checked_sweep(*args, "-j", "2", code=EXIT_CHECK_FAILED)[1]


@pytest.mark.parametrize(
    ("vbridge", "ambient"),
    [(v, ta) for v in (4.0, 8.0, 12.0) for ta in (25.0, 85.0)],
)
def test_drift_limit_against_the_heated_and_unheated_divider(
    drift_sweep: dict[str, Any], vbridge: float, ambient: float
) -> None:
    corner = next(
        c for c in drift_sweep["corners"]
        if (c["params"]["vbridge"], c["ambient"]) == (vbridge, ambient)
    )  # fmt: skip
    (limit,) = corner["limits"]
    assert (limit["subject"], limit["limit"], limit["unit"]) == ("V(mid)", "max_drift_ppm", "ppm")
    t = divider_temperature(ambient, vbridge)
    expected = drift_ppm(ambient, vbridge, t)
    # a temperature off by the simulator's tolerance moves the drift by this much
    tol = abs(drift_ppm(ambient, vbridge, t + t_tol(t)) - expected)
    assert abs(expected - DRIFT_MAX_PPM) > 10 * tol
    assert limit["value"] == pytest.approx(expected, abs=tol)
    assert limit["passed"] is (expected <= DRIFT_MAX_PPM)


def test_drift_of_monte_carlo_draws_uses_each_draws_own_baseline(tmp_path: Path) -> None:
    """The unheated run of a corner is the same draw: its R(Ta) has the drawn tc1."""
    annotation = tmp_path / "divider.thermal.toml"
    text = Path(MC_ANNOTATION).read_text()
    annotation.write_text(text + f'\n[limit."V(mid)"]\nmax_drift_ppm = {DRIFT_MAX_PPM}\n')
    args = (DIVIDER, "-a", str(annotation), "--monte-carlo", "4", "--seed", "3")
    _result, data = checked_sweep(*args, "--ambient", "85", "-j", "2", code=EXIT_CHECK_FAILED)
    for corner in data["corners"]:
        drawn = corner["drawn"]["RUP"]
        tc1, rth = drawn["tc1_ppm"] * 1e-6, drawn["rth"]
        t = divider_temperature(85.0, 12.0, tc1=tc1, rth=rth)
        expected = drift_ppm(85.0, 12.0, t, tc1)
        tol = abs(drift_ppm(85.0, 12.0, t + t_tol(t), tc1) - expected)
        assert corner["limits"][0]["value"] == pytest.approx(expected, abs=tol)


def test_check_results_do_not_depend_on_jobs_or_executor(
    drift_sweep: dict[str, Any], dask_scheduler: str
) -> None:
    args = (DIVIDER, "-a", DRIFT, "--param", "vbridge=4:12:4", "--ambient", "25:85:60")
    serial = checked_sweep(*args, "-j", "1", code=EXIT_CHECK_FAILED)[1]
    on_dask = checked_sweep(
        *args, "--executor", "dask", "--scheduler", dask_scheduler, code=EXIT_CHECK_FAILED
    )[1]
    for other in (drift_sweep, on_dask):
        assert [c["limits"] for c in other["corners"]] == [c["limits"] for c in serial["corners"]]
        assert other["check"] == serial["check"]
        assert corner_numbers(other) == corner_numbers(serial)


@pytest.mark.parametrize(
    ("args", "code", "words"),
    [
        # every corner inside its limits (brentq: 72.9 degC at most, V(mid) >= 6.75 V)
        ((DIVIDER, "-a", LIMITS, "--ambient", "0:60:30", "--check"), EXIT_OK,
         ["3 corners checked, 0 failing"]),
        ((DIVIDER, "-a", LIMITS, "--ambient", CHECK_AMBIENTS, "--check"), EXIT_CHECK_FAILED,
         ["FAIL RUP tmax at corner 4 (ambient 120 degC): ", "5 corners checked, 2 failing"]),
        # without --check nothing is held to the limits: the same corners exit 0
        ((DIVIDER, "-a", LIMITS, "--ambient", CHECK_AMBIENTS), EXIT_OK, []),
        # -q: the violations stay (on stderr), the table and the summary go
        ((DIVIDER, "-a", LIMITS, "--ambient", "120", "--check", "-q"), EXIT_CHECK_FAILED,
         ["FAIL RUP tmax at corner 0 (ambient 120 degC): "]),
        # a corner with no answer keeps sweep's statuses: 1 when some ran, the
        # simulator's (7: runaway) when none did
        ((RUNAWAY, "--param", "idrive=0.1:0.3:0.2", "--check"), EXIT_CHECK_FAILED,
         ["1 corner checked, 0 failing, 1 gave no answer", "no limits: "]),
        ((RUNAWAY, "--param", "idrive=0.3:0.4:0.1", "--check"), EXIT_THERMAL_RUNAWAY,
         ["0 corners checked, 0 failing, 2 gave no answer"]),
        ((DIVIDER, "--junit", "x.xml"), EXIT_BAD_INPUT, ["--junit is for --check"]),
    ],
)  # fmt: skip
def test_check_exit_status(args: tuple[str, ...], code: int, words: list[str]) -> None:
    result = invoke(*args)
    assert result.exit_code == code, result.output
    for word in words:
        assert word in result.output
    if "--check" not in args:
        assert "FAIL" not in result.output and "checked" not in result.output
    if "-q" in args:
        assert "corners checked" not in result.output and "caution" not in result.output


def test_check_with_a_limit_on_no_node_is_exit_2_before_any_corner(tmp_path: Path) -> None:
    annotation = tmp_path / "divider.thermal.toml"
    text = (FIXTURES / "divider.thermal.toml").read_text()
    annotation.write_text(text + '\n[limit."V(mdi)"]\nmax = 7\n')
    junit = tmp_path / "report.xml"
    args = (DIVIDER, "-a", str(annotation), "--ambient", "0:50:25", "--check")
    result = invoke(*args, "--junit", str(junit))
    assert result.exit_code == EXIT_BAD_INPUT
    assert 'names node "mdi"' in result.stderr and 'did you mean "V(mid)"' in result.stderr
    assert "corner 0" not in result.output  # nothing ran
    # the report is still written, with one error case, so no older one stands in for it
    root = ET.parse(junit).getroot()
    (case,) = root.iter("testcase")
    assert case.get("name") == "run" and case.find("error") is not None


def test_check_junit_names_a_corner_without_answer(tmp_path: Path) -> None:
    junit = tmp_path / "report.xml"
    result = invoke(RUNAWAY, "--param", "idrive=0.1:0.3:0.2", "--check", "--junit", str(junit))
    assert result.exit_code == EXIT_CHECK_FAILED
    cases = list(ET.parse(junit).getroot().iter("testcase"))
    # the annotation sets no limit: the corner that ran has no case, the other an error
    assert [c.get("name") for c in cases] == ["corner 1 (ambient 25 degC, idrive=0.3) run"]
    error = cases[0].find("error")
    assert error is not None and "runs away" in (error.text or "")


# ------------------------------------------------------------------------ the terminal table

# Five 1 kohm legs on 1 V each: P = 1 mW, and with Rth = 1 K/W a 1 mK rise (T = Ta + Rth P;
# the TCR changes P by 1e-7 relative, far below the printed digits). Worked by hand.
FIVE_LEGS = "".join(f"V{k} n{k} 0 DC 1\nRLEG_NUMBER_{k} n{k} 0 1k\n" for k in range(5))
FIVE_ANNOTATION = "schema = 1\n[ambient]\ntemperature = 25.0\n" + "".join(
    f'[part.RLEG_NUMBER_{k}]\nmodel = "linear"\ntc1_ppm = 100\nrth = 1.0\ncth = 0.001\n'
    for k in range(5)
)


def test_table_fits_100_columns_and_prints_small_rises(tmp_path: Path) -> None:
    deck = tmp_path / "legs.cir"
    deck.write_text(f"five lightly loaded legs\n{FIVE_LEGS}.op\n.end\n")
    (tmp_path / "legs.thermal.toml").write_text(FIVE_ANNOTATION)
    result = invoke(str(deck), "--ambient", "-40:85:125", "--probe", "n1", "-j", "1")
    assert result.exit_code == EXIT_OK, result.output
    lines = result.stdout.splitlines()
    assert max(len(x) for x in lines[1:]) <= 100  # the table (line 0 names the deck's path)
    rows = [x.split() for x in lines if "RLEG_NUMBER_" in x]
    assert len(rows) == 10  # one row per corner and part
    rises = [float(r[r.index(next(c for c in r if c.startswith("RLEG"))) + 2]) for r in rows]
    # 0.001 K, not 0.00; to ngspice's tolerance on the node voltage T (reltol |T| + vntol)
    ambients = [-40.0] * 5 + [85.0] * 5
    assert rises == [pytest.approx(1e-3, abs=t_tol(ta)) for ta in ambients]
    rise_cells = [r[r.index(next(c for c in r if c.startswith("RLEG"))) + 2] for r in rows]
    assert all(len(cell.lstrip("-0.")) >= 2 for cell in rise_cells)  # digits shown
    # the probed node voltage on each corner's first row: 1 V across the leg
    first = next(x for x in lines if "RLEG_NUMBER_0" in x)
    assert first.split()[-1] == "1"


@pytest.mark.parametrize(
    ("ppm", "text"),
    [
        (123.44, "+123.4 ppm"),
        (-9999.0, "-9999.0 ppm"),
        (10000.0, "+1.00 %"),
        (9244279.0, "+924.43 %"),  # a thermistor's drift: percent, not seven-digit ppm
        (-926101.7, "-92.61 %"),
        (None, "-"),
    ],
)
def test_drift_text(ppm: float | None, text: str) -> None:
    from heatweave.sweep.report import drift_text

    assert drift_text(ppm) == text


@pytest.mark.parametrize(
    ("rise", "text"),
    [(12.594, "12.59"), (1.0, "1.00"), (0.001, "0.001"), (0.0123456, "0.0123"), (0.0, "0.00")],
)
def test_rise_text(rise: float, text: str) -> None:
    from heatweave.sweep.report import rise_text

    assert rise_text(rise) == text


def test_caution_follows_the_fail_lines(
    limit_sweep: tuple[Result, dict[str, Any], Path],
) -> None:
    """Table, then its FAIL lines and summary, then the caution: never in between."""
    result, _data, _junit = limit_sweep
    lines = result.stderr.splitlines()
    caution = next(k for k, x in enumerate(lines) if x.startswith("caution:"))
    fails = [k for k, x in enumerate(lines) if x.startswith("FAIL")]
    assert fails and max(fails) < caution
    table_end = max(k for k, x in enumerate(lines) if re.match(r"\s*\d+\s+-?\d+\.\d\d\s+RUP", x))
    assert table_end < min(fails)


def test_plot_shows_the_rise_and_the_allowed_rise() -> None:
    """Corner panels: rise above ambient (T - Ta of each corner, from the same corner data
    the JSON holds) and tmax - Ta as the dashed allowed rise; units in brackets."""
    from heatweave.emit.emitter import load_inputs
    from heatweave.run.prepare import RunOptions
    from heatweave.sweep.corners import SweepPlan, run_sweep
    from heatweave.sweep.executors import make_executor
    from heatweave.sweep.plot import build_figure

    ambients = (0.0, 50.0, 100.0)
    inputs = load_inputs(DIVIDER, LIMITS)
    pool = make_executor("local", 1)
    try:
        result = run_sweep(inputs, SweepPlan(ambients, (), 0, None), RunOptions(), pool)
    finally:
        pool.close()
    figure = build_figure(result)
    rise_axes, drift_axes = figure.axes[:2]
    assert rise_axes.get_ylabel() == "rise above ambient [K]"
    assert drift_axes.get_xlabel() == "ambient temperature [degC]"
    curves = {line.get_label(): line for line in rise_axes.get_lines()}
    rise = curves["RUP"]
    assert list(rise.get_xdata()) == list(ambients)
    for ta, y in zip(ambients, rise.get_ydata(), strict=True):
        expected = divider_temperature(ta, 12.0) - ta  # brentq, as the corner tests
        assert y == pytest.approx(expected, abs=t_tol(expected + ta))
    allowed = curves["RUP: tmax - ambient (allowed rise)"]
    assert list(allowed.get_ydata()) == [TMAX_UP - ta for ta in ambients]
    assert allowed.get_linestyle() == "--"
