"""``settle`` against a brute-force transient, closed forms and scipy's ODE solver.

* Accuracy: the periodic state settle finds (cycle mean, peak, valley) against the full
  emitted electrothermal deck run by ngspice for 10 thermal time constants, last period.
* Ripple: settle's periodic thermal solution against the closed form for a rectangular
  power train through a Foster network (derived in :func:`rectangular_train`), which is
  itself checked against scipy.integrate.solve_ivp over many periods.
* Loop gain: a resistor with linear TCR driven by a PWM current has an exact fixed point
  (derived in :func:`current_drive_rise`); a loop gain of 1 or more is thermal runaway.
"""

from __future__ import annotations

import itertools
import json
import math
import re
import shutil
from pathlib import Path
from string import Template

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.integrate import solve_ivp

from heatweave.cli import main
from heatweave.errors import (
    EXIT_BAD_INPUT,
    EXIT_SIMULATION_FAILED,
    EXIT_THERMAL_RUNAWAY,
    ThermalRunawayError,
    UsageError,
)
from heatweave.networks import Cauer, Foster, NetworkForm, to_cauer
from heatweave.run.prepare import RunOptions
from heatweave.run.runner import run
from heatweave.settle.periodic import SettleOptions, settle
from heatweave.settle.thermal import periodic
from heatweave.thermal.circuit import AMBIENT_NODE, PartPlan, ThermalCircuit
from heatweave.thermal.solver import assemble

FIXTURES = Path(__file__).parent / "fixtures" / "settle"
needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")


def fixture(name: str) -> tuple[str, str]:
    """A fixture deck and its annotation file."""
    deck = FIXTURES / f"{name}.cir"
    return str(deck), str(FIXTURES / f"{name}.thermal.toml")


# -- closed form of the rectangular power train --------------------------------------------


def rectangular_train(
    stages: tuple[tuple[float, float], ...], power: float, duty: float, period: float
) -> tuple[float, float, float]:
    """Mean, peak and valley rise (K) of a Foster network under a rectangular power train:
    *power* for ``D T``, nothing for ``(1 - D) T``, repeated for ever.

    Each stage ``(R, tau)`` carries the same power and obeys ``v' = (R P(t) - v) / tau``
    alone (Foster stages are in series).  In the on-time it relaxes from its valley
    ``v0`` towards ``R P``: ``v1 = R P + (v0 - R P) a``, ``a = exp(-D T / tau)``; in the
    off-time towards 0: ``v0 = v1 b``, ``b = exp(-(1 - D) T / tau)``.  Periodicity then
    gives ``v1 (1 - a b) = R P (1 - a)`` and ``a b = exp(-T / tau)``, so per stage

        peak   = R P (1 - exp(-D T / tau)) / (1 - exp(-T / tau)),
        valley = peak exp(-(1 - D) T / tau),
        mean   = R P D      (integrate v' over a period: mean(v) = R mean(P)).

    Every stage peaks at the end of the on-time and bottoms at its start, so the
    network's peak, valley and mean are the sums over the stages.
    """
    peak = valley = mean = 0.0
    for r, tau in stages:
        stage = r * power * -math.expm1(-duty * period / tau) / -math.expm1(-period / tau)
        peak += stage
        valley += stage * math.exp(-(1.0 - duty) * period / tau)
        mean += r * power * duty
    return mean, peak, valley


# Foster networks (rth K/W, tau s) and trains (P W, D, T s); invented test data, spanning
# ripple-dominated (tau < T) to mean-dominated (tau = 50 T) stages.
TRAINS = [
    pytest.param(((2.0, 1e-3),), 5.0, 0.5, 1e-3, id="one-stage-tau=T"),
    pytest.param(((1.0, 2e-4), (3.0, 5e-3)), 2.0, 0.25, 1e-3, id="two-stage-fast-slow"),
    pytest.param(((0.5, 1e-5), (1.5, 1e-4), (4.0, 5e-3)), 10.0, 0.1, 1e-4, id="three-stage"),
    pytest.param(((8.0, 0.02),), 1.0, 0.9, 1e-3, id="one-stage-high-duty"),
]


def _solve_ivp_train(
    stages: tuple[tuple[float, float], ...], power: float, duty: float, period: float
) -> tuple[float, float, float]:
    """Mean, peak and valley of the last period from rest, by scipy's solve_ivp, each
    phase integrated on its own so the power steps fall on interval ends."""
    r = np.array([s[0] for s in stages])
    tau = np.array([s[1] for s in stages])
    periods = math.ceil(25.0 * tau.max() / period)
    v = np.zeros(len(stages))
    mean = peak = valley = 0.0
    for k in range(periods):
        last = k == periods - 1
        valley = float(v.sum())
        integral = 0.0
        for on, span in ((1.0, duty * period), (0.0, (1.0 - duty) * period)):
            sol = solve_ivp(
                lambda _t, x, p=on * power: (r * p - x) / tau,
                (0.0, span), v, method="LSODA", rtol=1e-11, atol=1e-13,
                dense_output=last,
            )  # fmt: skip
            if last:
                t = np.linspace(0.0, span, 2001)
                integral += float(np.trapezoid(sol.sol(t).sum(axis=0), t))
            v = sol.y[:, -1]
            if on:
                peak = float(v.sum())
        mean = integral / period
    return mean, peak, valley


@pytest.mark.parametrize(("stages", "power", "duty", "period"), TRAINS)
def test_closed_form_agrees_with_solve_ivp(
    stages: tuple[tuple[float, float], ...], power: float, duty: float, period: float
) -> None:
    """The derivation above, checked by a general-purpose ODE solver (scipy)."""
    expected = rectangular_train(stages, power, duty, period)
    got = _solve_ivp_train(stages, power, duty, period)
    np.testing.assert_allclose(got, expected, rtol=1e-6, atol=1e-9)


def _system(network: NetworkForm) -> ThermalCircuit:
    plan = PartPlan("R1", None, None, network, AMBIENT_NODE, "ambient", None, None, 70.0, None)
    return ThermalCircuit(25.0, (), (plan,), (), "cold")


@pytest.mark.parametrize("form", ["foster", "cauer"])
@pytest.mark.parametrize(("stages", "power", "duty", "period"), TRAINS)
def test_periodic_ripple_matches_closed_form(
    form: str, stages: tuple[tuple[float, float], ...], power: float, duty: float, period: float
) -> None:
    """settle's ripple solver on the rectangular train, with the network as given and as
    its exactly equivalent Cauer ladder (same terminal impedance, coupled states)."""
    foster = Foster(stages)
    network: NetworkForm = foster if form == "foster" else to_cauer(foster)
    assert isinstance(network, Foster | Cauer)
    system = assemble(_system(network))
    on = duty * period
    # A step is two samples at one time: power linear between samples makes it exact.
    time = np.array([0.0, on, on, period])
    watts = np.array([power, power, 0.0, 0.0])[:, None]
    state = periodic(system, time, watts, 25.0)
    mean, peak, valley = rectangular_train(stages, power, duty, period)
    np.testing.assert_allclose(
        [state.mean[0] - 25.0, state.peak[0] - 25.0, state.valley[0] - 25.0],
        [mean, peak, valley],
        rtol=1e-9,
    )


# -- against the brute-force transient of the emitted deck --------------------------------


def brute_force(deck: str, annotation: str, period: float, stop: float) -> dict[str, tuple]:
    """Cycle mean, peak and valley of every part and shared node over the last period of
    a full electrothermal transient from cold (the emitted deck, ngspice)."""
    step = period / 400
    start = stop - 2 * period
    analysis = f"tran {step!r} {stop!r} {start!r} {step!r}"
    results = run(deck, annotation, RunOptions(analyses=(analysis,))).results
    assert results.time is not None
    series = {p.path: p.temperature_series for p in results.parts} | results.node_series
    last = results.time >= stop - period - 1e-12
    t = results.time[last]
    stats = {}
    for name, values in series.items():
        assert values is not None
        v = values[last]
        stats[name] = (float(np.trapezoid(v, t) / (t[-1] - t[0])), float(v.max()), float(v.min()))
    return stats


# Fixture, period, brute-force length (s): 10 of the slowest closed-loop time constants.
ACCURACY = [
    pytest.param("pwm_heater", 1e-3, 0.2, id="single-stage-tau-20ms"),
    pytest.param("pwm_foster", 1e-3, 0.2, id="foster-2ms-20ms"),
    pytest.param("pwm_board", 1e-3, 0.4, id="subcircuit-diode-board-node"),
    pytest.param("pwm_filtered", 1e-3, 0.2, id="rc-smoothed-load"),
]


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize(("name", "period", "stop"), ACCURACY)
def test_settle_matches_brute_force_transient(name: str, period: float, stop: float) -> None:
    """Within 0.5 K of the full deck's last period (residual warm-up below 1e-4 of it)."""
    deck, annotation = fixture(name)
    settled = settle(deck, annotation, SettleOptions(period=period))
    reference = brute_force(deck, annotation, period, stop)
    got = {p.path: (p.temperature, p.peak_temperature, p.valley_temperature) for p in settled.parts}
    for label, mean in settled.nodes.items():
        got[label] = (mean, settled.node_peaks[label], settled.node_valleys[label])
    assert set(got) == set(reference)
    for name_, (mean, peak, valley) in got.items():
        expected = reference[name_]
        assert abs(mean - expected[0]) < 0.5, name_
        assert abs(peak - expected[1]) < 0.5, name_
        assert abs(valley - expected[2]) < 0.5, name_
    hottest = settled.parts[0]
    assert hottest.peak_temperature - hottest.valley_temperature > 0.5  # a real ripple
    assert settled.final_change < 0.01


@needs_ngspice
@pytest.mark.ngspice
def test_waveform_repeat_check_simulates_more_periods() -> None:
    """An RC-smoothed load (electrical tau 0.8 periods) starts from its operating point
    and needs roughly ln(1e4) * 0.8 = 7 periods before successive periods agree to 1e-4;
    the default 4 periods must be doubled until they do."""
    deck, annotation = fixture("pwm_filtered")
    settled = settle(deck, annotation, SettleOptions(period=1e-3, periods=4))
    assert settled.periods >= 8
    assert not settled.findings


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.slow
def test_envelope_follows_brute_force_warm_up() -> None:
    """The warm-up curve from averaged powers against the full transient's cycle means."""
    deck, annotation = fixture("pwm_heater")
    period, stop = 1e-3, 0.1
    settled = settle(deck, annotation, SettleOptions(period=period, envelope=stop))
    assert settled.envelope is not None
    step = period / 400
    results = run(deck, annotation, RunOptions(analyses=(f"tran {step!r} {stop!r}",))).results
    assert results.time is not None and results.parts[0].temperature_series is not None
    time, temp = results.time, results.parts[0].temperature_series
    env_t, env_v = settled.envelope.time, settled.envelope.parts["R1"]
    for t_check in (0.01, 0.02, 0.05, 0.09):
        window = (time >= t_check - period / 2) & (time <= t_check + period / 2)
        cycle_mean = float(np.trapezoid(temp[window], time[window]) / period)
        assert abs(float(np.interp(t_check, env_t, env_v)) - cycle_mean) < 0.5
    assert env_v[0] == pytest.approx(25.0)


# -- loop gain: exact fixed point and runaway ---------------------------------------------

TC1, RTH, R0, DUTY, AMBIENT = 0.04, 25.0, 10.0, 0.5, 25.0


def current_drive_rise(current: float) -> tuple[float, float]:
    """Loop gain and exact settled rise of a linear-TCR resistor under a PWM current.

    ``R(T) = R0 (1 + tc1 (T - 25))`` (the linear TCR model, IEC 60115-1 style) carries
    ``I`` for a fraction ``D`` of each period, so its mean dissipation is
    ``P = D I^2 R(T)`` and ``T - T_amb = Rth P``.  With ``T_amb = 25`` degC that is
    ``dT = c (1 + tc1 dT)``, ``c = Rth D I^2 R0``: the loop gain is ``g = c tc1`` and the
    fixed point ``dT = c / (1 - g)``, which exists (and is stable) only for ``g < 1``.
    """
    c = RTH * DUTY * current**2 * R0
    gain = c * TC1
    return gain, c / (1.0 - gain) if gain < 1.0 else math.inf


def current_deck(tmp_path: Path, current: float) -> tuple[str, str]:
    template = Template((FIXTURES / "pwm_current.cir.template").read_text())
    deck = tmp_path / "pwm_current.cir"
    deck.write_text(template.substitute(ion=repr(current)))
    annotation = tmp_path / "pwm_current.thermal.toml"
    annotation.write_text((FIXTURES / "pwm_current.thermal.toml").read_text())
    return str(deck), str(annotation)


def _current_for(gain: float) -> float:
    return math.sqrt(gain / (RTH * DUTY * R0 * TC1))


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("gain", [0.5, 0.9, 0.95])
def test_positive_loop_gain_settles_to_the_exact_fixed_point(tmp_path: Path, gain: float) -> None:
    """Plain relaxation would need log(tol/rise)/log(g) iterations (about 200 at g = 0.95);
    the accelerated iteration must land on the exact fixed point in a handful."""
    deck, annotation = current_deck(tmp_path, _current_for(gain))
    expected_gain, rise = current_drive_rise(_current_for(gain))
    settled = settle(deck, annotation, SettleOptions(period=1e-3, tol=0.01))
    part = settled.parts[0]
    assert part.temperature - AMBIENT == pytest.approx(rise, rel=1e-3)
    assert settled.gain == pytest.approx(expected_gain, rel=1e-2)
    assert settled.iterations <= 8


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("gain", [1.0, 1.2])
def test_loop_gain_at_or_above_one_is_runaway(tmp_path: Path, gain: float) -> None:
    deck, annotation = current_deck(tmp_path, _current_for(gain))
    expected_gain, _ = current_drive_rise(_current_for(gain))
    with pytest.raises(ThermalRunawayError) as caught:
        settle(deck, annotation, SettleOptions(period=1e-3))
    message = caught.value.message
    assert "R1" in message
    found = re.search(r"loop gain ([0-9.]+)", message)
    assert found is not None and float(found.group(1)) == pytest.approx(expected_gain, rel=2e-2)


@needs_ngspice
@pytest.mark.ngspice
def test_cli_runaway_exits_7(tmp_path: Path) -> None:
    deck, annotation = current_deck(tmp_path, _current_for(1.2))
    result = CliRunner().invoke(main, ["settle", deck, "-a", annotation, "--period", "1m"])
    assert result.exit_code == EXIT_THERMAL_RUNAWAY
    assert "thermal runaway" in result.output and "Traceback" not in result.output


# -- command line ------------------------------------------------------------------------


@needs_ngspice
@pytest.mark.ngspice
def test_cli_json_csv_and_table(tmp_path: Path) -> None:
    deck, annotation = fixture("pwm_heater")
    out, csv = tmp_path / "settle.json", tmp_path / "warm.csv"
    args = ["settle", deck, "-a", annotation, "--period", "1m", "--json", str(out),
            "--warmup", "60m", "--csv", str(csv)]  # fmt: skip
    result = CliRunner().invoke(main, args)
    assert result.exit_code == 0, result.output
    data = json.loads(out.read_text())
    part = data["parts"]["R1"]
    assert part["valley_temperature"] < part["temperature"] < part["peak_temperature"]
    # Mean dissipation V^2/R(T) at duty ~0.5 (edges of 1 us add 1e-3), and R(T) linear.
    assert part["power"] == pytest.approx(0.5 * 100 / part["resistance"], rel=2e-3)
    assert part["resistance"] == pytest.approx(50 * (1 + 0.004 * (part["temperature"] - 25)))
    assert data["iterations"] == len(data["history"]) and data["final_change"] < 0.01
    rows = csv.read_text().splitlines()
    # run's CSV names (reports/csv_report.py) and its full-precision numbers.
    assert rows[0] == "time [s],T(R1) [degC]" and len(rows) == len(data["envelope"]["time"]) + 1
    last = [float(cell) for cell in rows[-1].split(",")]
    assert last == [data["envelope"]["time"][-1], data["envelope"]["parts"]["R1"][-1]]
    assert "R1" in result.output and "caution:" in result.output


@pytest.mark.parametrize("period", ["700u", "1.5m", "0.5m"])
def test_period_the_source_does_not_repeat_with_is_refused_at_its_card(period: str) -> None:
    """A 1 kHz PULSE examined in 0.7, 1.5 or 0.5 ms windows: refused before simulating,
    naming the source card (FILE:LINE), as the waveforms never repeat with that period."""
    deck, annotation = fixture("pwm_heater")
    result = CliRunner().invoke(main, ["settle", deck, "-a", annotation, "--period", period])
    assert result.exit_code == EXIT_BAD_INPUT, result.output
    assert f"{deck}:2:" in result.output and "not a period of V1's PULSE" in result.output
    assert "Traceback" not in result.output


@needs_ngspice
@pytest.mark.ngspice
def test_waveform_that_does_not_repeat_is_refused() -> None:
    """A drive heatweave cannot read (a B source of time, 1 kHz) with a 0.7 ms period: the
    waveforms of consecutive periods differ point by point, so no state is reported."""
    deck, annotation = fixture("sine_expr")
    result = CliRunner().invoke(main, ["settle", deck, "-a", annotation, "--period", "0.7m"])
    assert result.exit_code == EXIT_SIMULATION_FAILED, result.output
    assert "does not repeat with period 700 us" in result.output
    assert "the power of R1" in result.output or "V(drive)" in result.output


@needs_ngspice
@pytest.mark.ngspice
def test_waveform_that_repeats_settles_to_the_closed_form() -> None:
    """The same deck with its true period: v = 5 + 5 sin(wt) into 50 ohm without TCR has
    mean power (25 + 25/2) / 50 = 0.75 W (mean of sin^2 is 1/2), so the cycle mean is
    25 + 20 K/W x 0.75 W = 40 degC (closed form); without --period the B source is refused."""
    deck, annotation = fixture("sine_expr")
    settled = settle(deck, annotation, SettleOptions(period=1e-3))
    part = settled.parts[0]
    assert part.power == pytest.approx(0.75, rel=1e-3)
    assert part.temperature == pytest.approx(40.0, abs=0.02)
    with pytest.raises(UsageError, match="B1"):
        settle(deck, annotation, SettleOptions())


@needs_ngspice
@pytest.mark.ngspice
def test_period_taken_from_the_source_and_said() -> None:
    deck, annotation = fixture("pwm_heater")
    result = CliRunner().invoke(main, ["settle", deck, "-a", annotation])
    assert result.exit_code == 0, result.output
    assert "period 1 ms" in result.output
    # the table wraps this line at 88 columns, so a long checkout path breaks it in two
    assert f"period: taken from V1's PULSE ({deck}:2)" in " ".join(result.output.split())


@pytest.mark.parametrize(
    ("args", "needle"),
    [
        (["--period", "0"], "--period"),
        (["--period", "1m", "--csv", "x.csv"], "--warmup"),
        (["--period", "1m", "--warmup", "1", "--envelope", "1"], "--envelope"),
        (["--period", "1m", "--periods", "1"], "--periods"),
        (["--period", "1m", "--tstep", "2m"], "--tstep"),
        # 1e400 overflows a double (IEEE 754 binary64 tops out near 1.8e308): infinity
        (["--period", "1e400"], "is not a finite number"),
        (["--period", "1m", "--warmup", "1e400"], "is not a finite number"),
        (["--period", "1m", "--tol", "1e400"], "is not a finite number"),
    ],
)
def test_cli_bad_options_exit_2(args: list[str], needle: str) -> None:
    deck, annotation = fixture("pwm_heater")
    result = CliRunner().invoke(main, ["settle", deck, "-a", annotation, *args])
    assert result.exit_code == EXIT_BAD_INPUT
    assert needle in result.output and "Traceback" not in result.output


@needs_ngspice
@pytest.mark.ngspice
def test_control_blocks_dropped_with_warning() -> None:
    deck, annotation = fixture("with_control")
    result = CliRunner().invoke(main, ["settle", deck, "-a", annotation, "--period", "1m"])
    assert result.exit_code == 0, result.output
    assert "dropped a .control block" in result.output
    assert "this line must not run" not in result.output


# Piecewise-linear power samples (s, W) over one period: a triangle and a sawtooth.
RAMPS = [
    pytest.param(((0.0, 0.0), (4e-4, 3.0), (1e-3, 0.0)), ((1.0, 3e-4), (2.0, 4e-3)), id="triangle"),
    pytest.param(((0.0, 0.5), (9.9e-4, 4.0), (1e-3, 0.5)), ((3.0, 1e-3),), id="sawtooth"),
]


@pytest.mark.parametrize(("samples", "stages"), RAMPS)
def test_periodic_ripple_of_ramps_matches_solve_ivp(
    samples: tuple[tuple[float, float], ...], stages: tuple[tuple[float, float], ...]
) -> None:
    """Power linear between samples (how ngspice's waveforms are read): settle's exact
    first-order-hold solution against scipy's solve_ivp run to the periodic state."""
    time = np.array([s[0] for s in samples])
    watts = np.array([s[1] for s in samples])
    period = float(time[-1])
    system = assemble(_system(Foster(stages)))
    state = periodic(system, time, watts[:, None], 25.0)
    r = np.array([s[0] for s in stages])
    tau = np.array([s[1] for s in stages])
    periods = math.ceil(25.0 * tau.max() / period)
    v = np.zeros(len(stages))
    for _ in range(periods):
        for a, b in itertools.pairwise(time):
            sol = solve_ivp(
                lambda t, x: (r * np.interp(t, time, watts) - x) / tau,
                (a, b), v, method="LSODA", rtol=1e-11, atol=1e-13,
            )  # fmt: skip
            v = sol.y[:, -1]
    # After many periods the state at the period's start is the periodic one.
    assert state.outputs[0, 0] - 25.0 == pytest.approx(float(v.sum()), rel=1e-7)
    # The mean is the steady state at the mean power (trapezoid of the samples).
    mean_power = float(np.trapezoid(watts, time) / period)
    assert state.mean[0] - 25.0 == pytest.approx(float(r.sum()) * mean_power, rel=1e-12)
