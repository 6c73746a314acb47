"""One meaning for every result key, whatever the method (issue 12 section 3).

Every method and command (``run --method full``, ``--method cosim``, ``settle``, ``sweep``,
``check``) runs on the same decks, and every key is compared with the closed form named
beside it and across methods:

* ``power`` is the mean over the last period of the deck's periodic sources: a sine of
  amplitude Va into R dissipates Vrms^2 / R = Va^2 / (2 R) on average (Joule heating,
  P = V^2 / R, and the mean of sin^2 over a period, 1/2); a rectangular current train of
  I for a share D of the period dissipates I^2 R D;
* ``peak_power`` is the instantaneous peak: Va^2 / R, I^2 R;
* with no temperature coefficient the mean rise is Rth times the mean power (integrate the
  first-order thermal balance C dT/dt = P - (T - Ta) / Rth over one period of the periodic
  steady state);
* ``nominal_resistance`` is the model's value at its own reference temperature: an ``rtd``
  part's deck value is R at 0 degC (IEC 60751, the model's default), in every method.

Tolerances: 1e-3 relative for sampled means and peaks of waveforms (ngspice's default
reltol); 1e-6 relative where the integral is exact for the waveform ngspice computed
(a rectangular train's edges are breakpoints); 0.05 K between the co-simulation and the
full deck (the co-simulation's acceptance target, tests/test_cosim.py).
"""

from __future__ import annotations

import json
import re
from pathlib import Path

import pytest
from click.testing import CliRunner

from heatweave import cosim
from heatweave.cli import main
from heatweave.run.prepare import RunOptions
from heatweave.settle.periodic import SettleOptions, settle
from heatweave.tempmodels import REGISTRY

AMBIENT = 25.0
VA, R_SINE = 10.0, 100.0  # 1 kHz sine of 10 V amplitude across 100 ohm
I_ON, R_TRAIN, DUTY = 1.0, 10.0, 0.5  # 1 A for half of each 1 ms period into 10 ohm
RTH = 50.0

SINE = f"""sine into a resistor without TCR, and an RTD on the same drive
V1 a 0 SIN(0 {VA} 1k)
R1 a 0 {R_SINE}
R2 a 0 100
.tran 5u 0.3
.end
"""
TRAIN = f"""rectangular current train into a resistor without TCR
I1 0 n PULSE(0 {I_ON} 0 1n 1n 0.5m 1m)
R1 n 0 {R_TRAIN}
.tran 5u 0.3
.end
"""
ANNOTATION = f"""schema = 1
[ambient]
temperature = {AMBIENT}
[part.R1]
model = "linear"
tc1 = 0.0
rth = {RTH}
cth = 0.0006
power_rating = 10.0
tmax = 200.0
"""
RTD = """[part.R2]
model = "rtd"
rth = 100.0
cth = 0.0003
"""


def write(tmp_path: Path, deck: str, annotation: str) -> tuple[str, str]:
    path = tmp_path / "deck.cir"
    path.write_text(deck)
    toml = tmp_path / "deck.thermal.toml"
    toml.write_text(annotation)
    return str(path), str(toml)


@pytest.fixture(scope="module")
def sine_runs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, object]:
    folder = tmp_path_factory.mktemp("sine")
    deck, toml = write(folder, SINE, ANNOTATION + RTD)
    out: dict[str, object] = {"deck": deck, "toml": toml}
    for method in ("full", "cosim"):
        outcome = cosim.run_auto(deck, toml, RunOptions(), method=method)
        assert outcome.method == method
        out[method] = outcome.results
    out["settle"] = settle(deck, toml, SettleOptions(period=1e-3))
    return out


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("method", ["full", "cosim", "settle"])
def test_sine_power_is_the_period_mean_in_every_method(
    sine_runs: dict[str, object], method: str
) -> None:
    result = sine_runs[method]
    part = result.parts[0]  # type: ignore[attr-defined]
    assert part.path == "R1"
    mean = VA**2 / (2 * R_SINE)  # Vrms^2 / R
    assert part.power == pytest.approx(mean, rel=1e-3)
    assert part.peak_power == pytest.approx(VA**2 / R_SINE, rel=1e-3)
    if method == "full":  # the run ends on a zero crossing, where sin^2 is near 0
        assert abs(part.power_series[-1]) < 1e-2 * mean


@pytest.mark.ngspice
@pytest.mark.slow
def test_sine_keys_agree_across_methods(sine_runs: dict[str, object]) -> None:
    full, fast, settled = sine_runs["full"], sine_runs["cosim"], sine_runs["settle"]
    for k, name in enumerate(("R1", "R2")):
        a, b, c = full.parts[k], fast.parts[k], settled.parts[k]  # type: ignore[attr-defined]
        assert a.path == b.path == c.path == name
        assert b.power == pytest.approx(a.power, rel=2e-3)
        assert c.power == pytest.approx(a.power, rel=2e-3)
        assert b.peak_power == pytest.approx(a.peak_power, rel=2e-3)
        # settle's run is the settled period, the transient's the whole warm-up (R2 warms
        # and dissipates less than at its cold start): the same peak over the same span.
        last = full.time >= full.time[-1] - 1e-3  # type: ignore[attr-defined]
        assert c.peak_power == pytest.approx(a.power_series[last].max(), rel=2e-3)
        assert b.temperature == pytest.approx(a.temperature, abs=0.05)
        assert a.nominal_resistance == b.nominal_resistance == c.nominal_resistance
        # 0.05 K at platinum's 0.39 %/K (IEC 60751 alpha) is 2e-4 of R.
        assert b.resistance == pytest.approx(a.resistance, rel=2e-4)
    # R2 is an rtd part: its deck value, 100 ohm, holds at 0 degC (the model's reference).
    assert full.parts[1].nominal_resistance == pytest.approx(100.0, rel=1e-12)  # type: ignore[attr-defined]
    # No TCR on R1: the period-mean rise is Rth times the mean power (settle: exact).
    r1 = settled.parts[0]  # type: ignore[attr-defined]
    assert r1.temperature - AMBIENT == pytest.approx(RTH * r1.power, rel=1e-9)
    assert r1.temperature - AMBIENT == pytest.approx(RTH * VA**2 / (2 * R_SINE), rel=1e-3)


@pytest.mark.ngspice
@pytest.mark.slow
def test_sweep_and_check_report_what_run_and_settle_report(
    sine_runs: dict[str, object],
) -> None:
    deck, full = str(sine_runs["deck"]), sine_runs["full"]
    part = full.parts[0]  # type: ignore[attr-defined]
    out = Path(deck).with_name("sweep.json")
    swept = CliRunner().invoke(
        main, ["sweep", deck, "--ambient", str(AMBIENT), "--json", str(out), "--jobs", "1"]
    )
    assert swept.exit_code == 0, swept.output
    corner = json.loads(out.read_text())["corners"][0]["parts"]["R1"]
    assert corner["power"] == pytest.approx(part.power, rel=1e-9)
    assert corner["peak_power"] == pytest.approx(part.peak_power, rel=1e-9)
    # check judges a periodically driven deck in its periodic steady state, as settle
    # finds it: the rating against settle's period mean, tmax against its peak.
    settled = sine_runs["settle"].parts[0]  # type: ignore[attr-defined]
    checked = CliRunner().invoke(main, ["check", deck])
    assert checked.exit_code == 0, checked.output
    rating = re.search(r"R1 power_rating: (\S+) W", checked.output)
    assert rating and float(rating[1]) == pytest.approx(settled.power, rel=1e-4)
    assert float(rating[1]) == pytest.approx(VA**2 / (2 * R_SINE), rel=1e-3)
    assert "mean over the settled period" in checked.output
    hottest = re.search(r"R1 tmax: (\S+) degC", checked.output)
    assert hottest and float(hottest[1]) == pytest.approx(settled.peak_temperature, rel=1e-4)


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("method", ["full", "cosim"])
def test_rectangular_train_power(tmp_path: Path, method: str) -> None:
    deck, toml = write(tmp_path, TRAIN, ANNOTATION)
    outcome = cosim.run_auto(deck, toml, RunOptions(), method=method)
    part = outcome.results.parts[0]
    assert part.power == pytest.approx(I_ON**2 * R_TRAIN * DUTY, rel=1e-5)
    assert part.peak_power == pytest.approx(I_ON**2 * R_TRAIN, rel=1e-9)


@pytest.mark.ngspice
@pytest.mark.parametrize("tstep", [None, 3e-6, 7.3e-6, 1.7e-5])
def test_settle_mean_rise_is_rth_times_mean_power(tmp_path: Path, tstep: float | None) -> None:
    """The issue's case: exact to the simulator's accuracy whatever the time step (the
    1 ns edges add I^2 R (2 tr / 3) / T = 6.7e-6 W of ramp; 1e-6 relative covers it)."""
    deck, toml = write(tmp_path, TRAIN, ANNOTATION)
    part = settle(deck, toml, SettleOptions(period=1e-3, tstep=tstep)).parts[0]
    mean = I_ON**2 * R_TRAIN * DUTY
    assert part.power == pytest.approx(mean, rel=2e-6)
    assert part.temperature - AMBIENT == pytest.approx(RTH * mean, rel=2e-6)
    assert part.peak_power == pytest.approx(I_ON**2 * R_TRAIN, rel=1e-9)


@pytest.mark.ngspice
def test_pwm_heater_check_holds_the_rating_against_the_mean() -> None:
    """``check`` judges this deck in its periodic steady state (as ``settle`` finds it): its
    power_rating line holds the rating against the period mean ``settle`` reports, never
    against the 12 W on-state peak."""
    deck = str(Path(__file__).parent.parent / "decks" / "pwm-heater" / "heater.cir")
    runner = CliRunner()
    report = runner.invoke(main, ["settle", deck, "--json", "-"])
    assert report.exit_code == 0, report.output
    part = json.loads(report.stdout)["parts"]["RHEAT"]
    checked = runner.invoke(main, ["check", deck])
    assert checked.exit_code == 0, checked.output
    pattern = r"RHEAT power_rating: (\S+) W, at most (\S+) W, margin (\S+) W"
    value = re.search(pattern, checked.output)
    assert value is not None
    assert float(value[1]) == pytest.approx(part["power"], rel=1e-4)
    # 12 V across R + 20 mOhm (the switch) for 40 % of the period, R at its settled
    # temperature (hand calculation; 2e-3 for the 100 ns gate edges and switch thresholds).
    ohms = part["resistance"]
    assert part["power"] == pytest.approx(12.0**2 * ohms / (ohms + 0.02) ** 2 * 0.4, rel=2e-3)
    assert part["peak_power"] == pytest.approx(12.0**2 * ohms / (ohms + 0.02) ** 2, rel=2e-3)


@pytest.mark.parametrize("name", sorted(REGISTRY))
def test_every_model_answers_its_nominal_at_its_reference(name: str) -> None:
    """The uniform accessor: R(reference_temperature) is the deck's value wherever the
    deck's value is used (tref given, or each model's default)."""
    cls = REGISTRY[name]
    params = {
        "linear": {"tc1": 0.004},
        "quadratic": {"tc1": 0.004, "tc2": 1e-6},
        "exponential": {"tce": 0.5},
        "rtd": {},
        "ntc-beta": {"beta": 3435.0},
        "ntc-sh": {"a": 1.129148e-3, "b": 2.34125e-4, "c": 8.76741e-8},
        "ptc": {"t_switch": 120.0, "decade": 5.0},
        "table": {"ratio": ((0.0, 0.9), (100.0, 1.3))},
    }[name]
    for tref in (None, 40.0):
        model = cls.from_params(params, 1000.0, tref)
        expected_at = cls.reference(tref)
        assert model.reference_temperature == expected_at
        if name != "ntc-sh":  # Steinhart-Hart ignores the deck's value (its a, b, c fix R)
            assert model.nominal_resistance == pytest.approx(1000.0, rel=1e-12)
        assert model.nominal_resistance == pytest.approx(model.resistance(expected_at), rel=0)


@pytest.mark.parametrize(
    ("name", "params", "at"),
    [
        ("rtd", {"r0": 100.0}, 0.0),  # r0 is R at 0 degC whatever the deck says
        ("ptc", {"t_switch": 120.0, "decade": 5.0, "r25": 47.0}, 25.0),
        ("ntc-beta", {"beta": 3435.0, "r25": 10e3}, 25.0),
    ],
)
def test_model_keys_name_their_own_reference(name: str, params: dict, at: float) -> None:
    model = REGISTRY[name].from_params(params, 1.0, 40.0)
    assert model.reference_temperature == at
