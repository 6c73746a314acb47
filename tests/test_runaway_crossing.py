"""When a transient runaway passes 1000 degC and its tmax: times that hold, or none.

Reference: a `linear` part on a current source I is first order,
cth dT/dt = I^2 R0 (1 + tc1 (T - Tref)) - (T - Ta) / Rth, with Tref = Ta; its closed form
T(t) = Ta + P0 / (a cth) (e^(a t) - 1), a = (P0 tc1 - 1 / Rth) / cth, P0 = I^2 R0
(a linear ODE with constant coefficients), cross-checked here with scipy's solve_ivp.
"""

from __future__ import annotations

import math
import re
from pathlib import Path

import pytest
from scipy.integrate import solve_ivp

from heatweave.cosim import run_auto
from heatweave.errors import EXIT_THERMAL_RUNAWAY, ThermalRunawayError
from heatweave.run.prepare import RunOptions

R0, TC1, RTH, CTH, TA, TMAX = 10.0, 4000e-6, 100.0, 1.0, 25.0, 155.0
GAIN = 200.0  # loop gain I^2 R0 Rth tc1
P0 = GAIN / (RTH * TC1)
RATE = (P0 * TC1 - 1.0 / RTH) / CTH


def closed_form(temperature: float) -> float:
    """The time at which the part reaches *temperature* (degC), from the closed form."""
    return math.log(1.0 + (temperature - TA) * RATE * CTH / P0) / RATE


def by_solve_ivp(temperature: float) -> float:
    """The same time by scipy's solve_ivp with a terminal event."""

    def slope(_t: float, y: list[float]) -> list[float]:
        return [(P0 * (1.0 + TC1 * (y[0] - TA)) - (y[0] - TA) / RTH) / CTH]

    def reached(_t: float, y: list[float]) -> float:
        return y[0] - temperature

    reached.terminal = True  # type: ignore[attr-defined]
    found = solve_ivp(slope, (0.0, 5.0), [TA], events=reached, rtol=1e-10, atol=1e-10)
    return float(found.t_events[0][0])


def write(tmp_path: Path, tstep: str) -> tuple[str, str]:
    deck = tmp_path / "hot.cir"
    deck.write_text(
        f"current-fed heater\nI1 0 a DC {math.sqrt(P0 / R0)!r}\nRH a 0 {R0!r}\n"
        f".tran {tstep} 1.5\n.end\n"
    )
    note = tmp_path / "hot.thermal.toml"
    note.write_text(
        f'schema = 1\n[ambient]\ntemperature = {TA}\n[part.RH]\nmodel = "linear"\n'
        f"tc1 = {TC1!r}\nrth = {RTH!r}\ncth = {CTH!r}\ntmax = {TMAX!r}\n"
    )
    return str(deck), str(note)


def told(message: str, what: str) -> tuple[float, float]:
    """The time (or the bracketing interval) the message gives for *what*."""
    number = r"([-+0-9.eE]+)"
    found = re.search(rf"{what} (?:at t = {number} s|between t = {number} and {number} s)",
                      message)  # fmt: skip
    assert found is not None, message
    if found.group(1) is not None:
        return float(found.group(1)), float(found.group(1))
    return float(found.group(2)), float(found.group(3))


def test_references_agree() -> None:
    for temperature in (1000.0, TMAX):
        assert by_solve_ivp(temperature) == pytest.approx(closed_form(temperature), rel=1e-6)


# The co-simulation runs in the shared library only.
@pytest.mark.parametrize(("method", "backend"),
                         [("full", "batch"), ("full", "shared"), ("cosim", "shared")])
@pytest.mark.parametrize("tstep", ["0.1", "1m"])
def test_crossing_times_hold_against_the_closed_form(
    tmp_path: Path, method: str, backend: str, tstep: str
) -> None:
    deck, note = write(tmp_path, tstep)
    with pytest.raises(ThermalRunawayError) as caught:
        run_auto(deck, note, RunOptions(backend=backend), method=method)
    err = caught.value
    assert err.exit_code == EXIT_THERMAL_RUNAWAY
    # ngspice's own accuracy on the time (reltol 1e-3 of the default options)
    for what, temperature in (("passed 1000 degC", 1000.0), (f"tmax {TMAX:g} degC", TMAX)):
        low, high = told(err.message, what)
        exact = closed_form(temperature)
        assert low <= exact * (1 + 1e-3) and high >= exact * (1 - 1e-3), (what, err.message)


def ntc_on_a_sine(amplitude: float, beta: float, r25: float, rth: float, cth: float) -> float:
    """When the `ntc-beta` part (R = r25 exp(beta (1/T - 1/T25)), T in kelvin, its
    documented form) straight across amplitude sin(2 pi 50 t) passes 1000 degC, by solve_ivp
    on cth dT/dt = v^2 / R(T) - (T - Ta) / Rth (no closed form: scipy is the reference)."""

    def slope(t: float, y: list[float]) -> list[float]:
        kelvin = y[0] + 273.15
        r = r25 * math.exp(beta * (1.0 / kelvin - 1.0 / 298.15))
        v = amplitude * math.sin(2 * math.pi * 50.0 * t)
        return [(v * v / r - (y[0] - TA) / rth) / cth]

    def reached(_t: float, y: list[float]) -> float:
        return y[0] - 1000.0

    reached.terminal = True  # type: ignore[attr-defined]
    found = solve_ivp(slope, (0.0, 5.0), [TA], events=reached, rtol=1e-9, atol=1e-9,
                      max_step=2e-4)  # fmt: skip
    return float(found.t_events[0][0])


def write_line(tmp_path: Path, analysis: str) -> tuple[str, str]:
    """An `ntc-beta` part (1000 ohm, beta 3500, Rth 100 K/W, Cth 5 mJ/K) straight across a
    40 V 50 Hz sine, run by *analysis*."""
    deck = tmp_path / "line.cir"
    deck.write_text(f"thermistor on a line\nV1 rail 0 SIN(0 40 50)\nRT rail 0 1000\n{analysis}"
                    ".end\n")  # fmt: skip
    note = tmp_path / "line.thermal.toml"
    note.write_text(f'schema = 1\n[ambient]\ntemperature = {TA}\n[part.RT]\nmodel = "ntc-beta"\n'
                    "beta = 3500\nrth = 100.0\ncth = 0.005\n")  # fmt: skip
    return str(deck), str(note)


@pytest.mark.parametrize("method", ["full", "cosim"])
def test_crossing_after_a_failed_step_check_is_run_again(tmp_path: Path, method: str) -> None:
    # With the deck's 5 ms step ngspice's temperatures leave the network's own response to
    # its powers before 1000 degC: the times come from a run again with a smaller step.
    deck, note = write_line(tmp_path, ".tran 5m 5\n")
    with pytest.raises(ThermalRunawayError) as caught:
        run_auto(deck, note, RunOptions(), method=method)
    err = caught.value
    assert any("ran the transient again" in f.message for f in err.findings)
    low, high = told(err.message, "passed 1000 degC")
    exact = ntc_on_a_sine(40.0, 3500.0, 1000.0, 100.0, 0.005)
    assert low <= exact * (1 + 1e-3) and high >= exact * (1 - 1e-3), (exact, err.message)


def test_no_time_is_told_where_the_step_check_fails(tmp_path: Path) -> None:
    # A .control block drives its own analyses: heatweave cannot run it again with a
    # smaller step, so the unverified crossing gets no time, and a warning says why.
    deck, note = write_line(tmp_path, ".control\ntran 5m 5\n.endc\n")
    with pytest.raises(ThermalRunawayError) as caught:
        run_auto(deck, note, RunOptions(allow_control=True), method="full")
    err = caught.value
    assert err.exit_code == EXIT_THERMAL_RUNAWAY
    assert "RT passed 1000 degC at a time this run does not pin down" in err.message
    assert "between t =" not in err.message and "at t =" not in err.message
    assert any(f.severity == "warning" and "not verified" in f.message for f in err.findings)
