"""A transient's figures are verified against its own numbers, and its step made smaller
until they are (README, "How a result is verified", transients).

References, each a closed form of the deck run:

* triangle mean of I^2 R: a current rising linearly from 0 to Ipk and back dissipates on
  average Ipk^2 R / 3 in a resistor (the mean of (t/T)^2 over [0, T] is 1/3; Joule heating);
* trapezoid mean of I^2 R: a train of pulses with linear edges of time tr and tf and a flat
  top of width w, period T, dissipates Ipk^2 R (w + (tr + tf) / 3) / T;
* first-order step response: a single Rth/Cth stage from the ambient under a constant mean
  power P rises by Rth P (1 - e^(-t/tau)), tau = Rth Cth (first-order thermal balance,
  C dT/dt = P - (T - Ta) / Rth; the ripple of a power repeating far faster than tau is
  filtered down to the low-pass amplitude and is below the tolerances here);
* first-order low-pass on a sine: Va sin(w t) into R gives P0 (1 - cos 2wt),
  P0 = Va^2 / 2R; the stage's response from T(0) = Ta is
  Rth P0 (1 - e^(-t/tau)) - Rth P0 / (1 + (2 w tau)^2) (cos 2wt + 2 w tau sin 2wt - e^(-t/tau)).

The bound on each reported temperature follows from what the verification holds: ngspice's
temperatures within reltol |T| of the network's own response to its powers, and the mean
power within 2 reltol of itself, so |T - exact| <= reltol |T| + 2 reltol (T - Ta)
(reltol = 1e-3, ngspice's default).  Before the check, the first deck gave 55.89 degC for
79.95 degC.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner, Result

from heatweave.checks.limits import LimitResult
from heatweave.cli.check_cmd import check
from heatweave.cli.run_cmd import run
from heatweave.errors import EXIT_BAD_INPUT, EXIT_CHECK_FAILED, EXIT_OK
from heatweave.run import stepcheck
from heatweave.run.maxstep import parse_tran, with_max_step
from heatweave.run.sampling import sampling_error, square_law_excess, step_excess

RELTOL, AMBIENT, RTH = 1e-3, 25.0, 50.0

ANNOTATION = """schema = 1
[ambient]
temperature = 25.0
[part.R1]
model = "linear"
tc1 = 0
rth = 50.0
cth = {cth}
tmax = 155
"""


def write(tmp_path: Path, deck: str, cth: float) -> tuple[str, str]:
    path, toml = tmp_path / "d.cir", tmp_path / "d.thermal.toml"
    path.write_text(deck)
    toml.write_text(ANNOTATION.format(cth=cth))
    return str(path), str(toml)


def run_json(deck: str, toml: str, *args: str) -> tuple[Result, dict]:  # type: ignore[type-arg]
    out = Path(deck).with_suffix(".json")
    result = CliRunner().invoke(
        run, [deck, "-a", toml, "--json", str(out), *args], catch_exceptions=False
    )
    assert result.exit_code == EXIT_OK, result.output
    return result, json.loads(out.read_text())


def bound(exact: float) -> float:
    """What the verification guarantees (module docstring)."""
    return RELTOL * abs(exact) + 2 * RELTOL * (exact - AMBIENT)


def first_order(power: float, t: float, tau: float) -> float:
    return AMBIENT + RTH * power * (1 - math.exp(-t / tau))


# The acceptance pass's decks, with the run and tau shortened by ten (same t / tau = 0.4).
TRIANGLE = """triangle current, 1 A peak, period just over 1 ms
I1 0 a PULSE(0 1 0 0.5m 0.5m 1n 1.000001m)
R1 a 0 10
.tran 250u 2
.end
"""
SLOW_EDGES = """current pulses with slow edges
I1 0 a PULSE(0 1 0 100u 100u 200u 1m)
R1 a 0 10
.tran 200u 2
.end
"""
CASES = {
    # triangle mean of I^2 R: 1^2 * 10 / 3
    "triangle": (TRIANGLE, 10.0 / 3.0),
    # trapezoid mean of I^2 R: 10 W * (200u + 200u / 3) / 1m
    "slow edges": (SLOW_EDGES, 10.0 * (200e-6 + 200e-6 / 3) / 1e-3),
}


@pytest.mark.ngspice
@pytest.mark.parametrize("method", ["full", "auto"])
@pytest.mark.parametrize("name", sorted(CASES))
def test_coarse_step_is_refined_to_the_closed_form(tmp_path: Path, name: str, method: str) -> None:
    text, power = CASES[name]
    deck, toml = write(tmp_path, text, cth=0.1)
    _, data = run_json(deck, toml, "--method", method)
    part = data["parts"]["R1"]
    exact = first_order(power, 2.0, RTH * 0.1)
    assert abs(part["temperature"] - exact) <= bound(exact), (part, exact)
    assert part["power"] == pytest.approx(power, rel=2 * RELTOL)
    # the deck's 250 us / 200 us step is not what ran (the full deck or, on the slow
    # edges, the co-simulation), and the report says so
    (command,) = data["analysis_commands"]
    ran = parse_tran(command)
    assert ran is not None and ran.tmax is not None and ran.tmax < 50e-6
    assert any("max step" in w and "R1" in w for w in data["warnings"])


@pytest.mark.ngspice
def test_sine_at_four_points_a_period_is_refined_to_the_low_pass(tmp_path: Path) -> None:
    va, ohms, freq, cth, stop = 10.0, 100.0, 1e3, 2e-3, 1.0
    text = f"sine\nV1 a 0 SIN(0 {va} {freq:g})\nR1 a 0 {ohms}\n.tran 250u {stop}\n.end\n"
    deck, toml = write(tmp_path, text, cth)
    _, data = run_json(deck, toml, "--method", "full")
    p0, tau, w2 = va**2 / (2 * ohms), RTH * cth, 2 * 2 * math.pi * freq
    decay = math.exp(-stop / tau)
    ripple = (math.cos(w2 * stop) + w2 * tau * math.sin(w2 * stop) - decay) / (1 + (w2 * tau) ** 2)
    exact = AMBIENT + RTH * p0 * (1 - decay - ripple)
    part = data["parts"]["R1"]
    assert abs(part["temperature"] - exact) <= bound(exact), (part, exact)
    assert part["power"] == pytest.approx(p0, rel=2 * RELTOL)


@pytest.mark.ngspice
def test_a_fine_step_is_not_run_again(tmp_path: Path) -> None:
    """Rectangular pulses with 1 us edges at a 10 us step: nothing to refine, nothing said."""
    text = "rect\nI1 0 a PULSE(0 1 0 1u 1u 299u 1m)\nR1 a 0 10\n.tran 10u 0.5\n.end\n"
    deck, toml = write(tmp_path, text, cth=0.1)
    _, data = run_json(deck, toml, "--method", "full")
    assert data["analysis_commands"] == [".tran 10u 0.5"]
    assert not any("max step" in w or "not verified" in w for w in data["warnings"])
    power = 10.0 * (299e-6 + 2e-6 / 3) / 1e-3  # trapezoid mean of I^2 R
    exact = first_order(power, 0.5, RTH * 0.1)
    assert abs(data["parts"]["R1"]["temperature"] - exact) <= bound(exact)


@pytest.mark.ngspice
def test_max_step_option_sets_the_step_and_then_nothing_is_rerun(tmp_path: Path) -> None:
    deck, toml = write(tmp_path, TRIANGLE, cth=0.1)
    _, data = run_json(deck, toml, "--method", "full", "--max-step", "5u")
    assert data["analysis_commands"] == ["tran 0.00025 2 0 5e-06"]
    assert not any("max step" in w for w in data["warnings"])
    exact = first_order(10.0 / 3.0, 2.0, RTH * 0.1)
    assert abs(data["parts"]["R1"]["temperature"] - exact) <= bound(exact)


@pytest.mark.ngspice
@pytest.mark.parametrize(
    ("args", "words"),
    [
        (["--max-step", "5u", "--op"], "runs no transient"),
        (["--max-step", "fast"], "not a number"),
        (["--max-step", "0"], "greater than zero"),
    ],
)
def test_max_step_refusals(tmp_path: Path, args: list[str], words: str) -> None:
    deck, toml = write(tmp_path, TRIANGLE, cth=0.1)
    result = CliRunner().invoke(run, [deck, "-a", toml, *args])
    assert result.exit_code == EXIT_BAD_INPUT
    assert words in result.output


@pytest.mark.ngspice
def test_unverified_part_is_a_warning_in_run_and_fails_check(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """With no run again allowed, the deck's own step stands: run warns naming the part and
    the size of the disagreement, and check fails the part (exit 1)."""
    monkeypatch.setattr(stepcheck, "MAX_RERUNS", 0)
    deck, toml = write(tmp_path, TRIANGLE, cth=0.1)
    _, data = run_json(deck, toml, "--method", "full")
    (warning,) = [w for w in data["warnings"] if "not verified" in w]
    assert "R1's temperature is" in warning and "R1's mean dissipation" in warning
    assert "250 us" in warning
    checked = CliRunner().invoke(check, [deck, "-a", toml, "--method", "full"])
    assert checked.exit_code == EXIT_CHECK_FAILED, checked.output
    lines = [line for line in checked.output.splitlines() if line.startswith("FAIL R1")]
    assert any(" integration: " in line for line in lines), checked.output
    assert any(" sampling: " in line for line in lines), checked.output


@pytest.mark.parametrize(
    ("text", "step", "expected"),
    [
        (".tran 250u 20", 5e-6, "tran 0.00025 20 0 5e-06"),
        (".tran 1m 10 2 1m uic", 1e-5, "tran 0.001 10 2 1e-05 uic"),
        ("tran 1e-3 1", 2e-4, "tran 0.001 1 0 0.0002"),
        (".op", 1e-6, "op"),
    ],
)
def test_with_max_step(text: str, step: float, expected: str) -> None:
    assert with_max_step((text,), step) == (expected,)


def test_with_max_step_refuses_an_expression() -> None:
    assert with_max_step((".tran {ts} 20",), 1e-6) is None


@pytest.mark.parametrize(
    ("text", "max_step"),
    [
        (".tran 250u 20", 250e-6),  # ngspice: TSTEP or (TSTOP - TSTART) / 50, the smaller
        (".tran 1 20", 0.4),
        (".tran 1m 10 0 20u", 20e-6),
    ],
)
def test_default_max_step(text: str, max_step: float) -> None:
    found = parse_tran(text)
    assert found is not None and found.max_step == pytest.approx(max_step)


def test_sampling_error_of_a_ramp_is_the_exact_integral_difference() -> None:
    """V rising linearly from 0 to 1 V across 1 ohm over 1 s: the exact mean of V^2 is 1/3
    (the mean of t^2), the trapezoid over the two end points gives 1/2."""
    time = np.array([0.0, 1.0])
    volts = np.array([0.0, 1.0])
    excess = step_excess(volts, volts, time)
    assert sampling_error(time, excess, None) == pytest.approx(0.5 - 1 / 3)
    # ten steps: the trapezoid's error of t^2 is h^2 / 6 over [0, 1]
    time = np.linspace(0.0, 1.0, 11)
    excess = step_excess(time, time, time)
    trapezoid = float(np.trapezoid(time**2, time))
    assert sampling_error(time, excess, None) == pytest.approx(trapezoid - 1 / 3)


@pytest.mark.parametrize("volts", [(0.0, 1.0), (2.0, -0.5 + 2.0), (-3.0, -1.0)])
def test_square_law_excess_is_the_step_excess_of_a_held_resistance(
    volts: tuple[float, float],
) -> None:
    """V^2 / R of a straight-line voltage that keeps its sign: the power alone gives the
    same excess as the voltage and the current."""
    time, v = np.array([0.0, 2e-6]), np.array(volts)
    ohms = 4.0
    assert square_law_excess(time, v * v / ohms) == pytest.approx(step_excess(v, v / ohms, time))


def test_limit_of_an_unverified_figure_fails() -> None:
    item = LimitResult("R1", "integration", 19.8, 0.057, "K")
    assert not item.passed
