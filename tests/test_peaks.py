"""Peaks are instantaneous in every method (issue 12: every printed figure is the state).

Closed forms, each named beside its check:

* a sine of amplitude Va across R dissipates ``P0 + P0 sin(2 w t - pi/2)`` with
  ``P0 = Va^2 / (2 R)`` (Joule heating and sin^2 = (1 - cos 2wt) / 2); through a single
  Rth/Cth stage its periodic steady state swings by ``P0 Rth / sqrt(1 + (2 w tau)^2)``
  about ``Ta + P0 Rth`` (amplitude response of a first-order low-pass, ``tau = Rth Cth``;
  common practice in circuit theory);
* a capacitor C charged from V through R from 0 V: ``P(t) = V^2/R e^{-2t/(RC)}``, largest at
  t = 0 (``I0 = V/R``, ``P0 = V^2/R``); through Rth/Cth the rise is
  ``(P0 / Cth) (e^{-a t} - e^{-b t}) / (a - b)`` with ``a = 2/(RC)``, ``b = 1/(Rth Cth)``,
  largest at ``t* = ln(a/b) / (a - b)`` (convolution of two exponentials; common practice).

Tolerances: the sampled crest of a sine misses ``(w dt / 2)^2 / 2`` of its amplitude and
straight lines between samples ``(w dt)^2 / 12`` of it (second order in the step); the full
deck's own thermal integration at 2 us is itself second order in its step (measured here:
0.025 K low at 5 us, 0.001 K at 1 us, on the deck below); ngspice's default reltol (1e-3)
bounds the electrical waveforms.
"""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from heatweave import cosim
from heatweave.cli import main
from heatweave.run.prepare import RunOptions
from test_result_keys import write

AMBIENT = 25.0
VA, R_SINE, RTH, CTH = 10.0, 100.0, 50.0, 6e-4
V_DC, R_CHARGE, C_BANK, RTH_C, CTH_C = 12.0, 1.0, 1e-3, 50.0, 0.01


def annotation(rth: float, cth: float) -> str:
    return f"""schema = 1
[ambient]
temperature = {AMBIENT}
[part.R1]
model = "linear"
tc1 = 0.0
rth = {rth}
cth = {cth}
"""


SINE = f"""sine across a resistor without TCR
V1 a 0 SIN(0 {VA} 1k)
R1 a 0 {R_SINE}
.tran 2u 0.5
.end
"""


@pytest.mark.ngspice
@pytest.mark.slow
def test_cosim_peak_temperature_is_the_instantaneous_peak(tmp_path: Path) -> None:
    deck, toml = write(tmp_path, SINE, annotation(RTH, CTH))
    fast = cosim.run_auto(deck, toml, RunOptions(), method="cosim")
    full = cosim.run_auto(deck, toml, RunOptions(), method="full")
    assert fast.method == "cosim" and full.method == "full"
    p0 = VA**2 / (2 * R_SINE)
    w = 2 * (2 * math.pi * 1e3)  # the power's angular frequency
    amplitude = p0 * RTH / math.sqrt(1 + (w * RTH * CTH) ** 2)  # first-order low-pass
    crest = AMBIENT + p0 * RTH + amplitude  # 0.5 s is 16.7 tau: the start is gone
    dt = 2e-6
    sampling = amplitude * (w * dt) ** 2 / 4
    part = fast.results.parts[0]
    assert part.peak_temperature == pytest.approx(crest, abs=sampling + 1e-5)
    # Not a window's value: every window end lies below the crest by more than the
    # tolerance above (the ripple is 0.066 K; the windows are 7.5 ms).
    assert part.temperature_series.max() < crest - 10 * (sampling + 1e-5)
    ref = full.results.parts[0]
    assert ref.peak_temperature == pytest.approx(part.peak_temperature, abs=0.01)


INRUSH = f"""capacitor charged through a resistor from 0 V
V1 in 0 DC {V_DC}
R1 in out {R_CHARGE}
C1 out 0 {C_BANK} IC=0
.tran 10u 20m uic
.end
"""


@pytest.mark.ngspice
@pytest.mark.parametrize("method", ["full", "cosim"])
def test_uic_leaves_t0_out_and_says_so(tmp_path: Path, method: str) -> None:
    deck, toml = write(tmp_path, INRUSH, annotation(RTH_C, CTH_C))
    outcome = cosim.run_auto(deck, toml, RunOptions(), method=method)
    assert outcome.method == method
    part = outcome.results.parts[0]
    p0 = V_DC**2 / R_CHARGE  # the inrush instant, t = 0
    warned = [f.message for f in outcome.findings if "not 0" in f.message]
    assert len(warned) == 1 and "uic" in warned[0] and "peak_power" in warned[0]
    first = float(warned[0].split("first time point is ")[1].split(" s")[0])
    assert 0 < first < 1e-5
    # The peak reported is the first point's, and it says so: below P0 by e^{-2 t1/RC}.
    assert part.peak_power < p0
    want = p0 * math.exp(-2 * first / (R_CHARGE * C_BANK))
    assert part.peak_power == pytest.approx(want, rel=1e-3)
    # The temperature: the convolution of two exponentials (module docstring).
    a, b = 2 / (R_CHARGE * C_BANK), 1 / (RTH_C * CTH_C)
    top = math.log(a / b) / (a - b)
    rise = p0 / CTH_C * (math.exp(-b * top) - math.exp(-a * top)) / (a - b)
    assert part.peak_temperature == pytest.approx(AMBIENT + rise, abs=1e-3 * rise)


@pytest.mark.ngspice
def test_no_warning_when_the_transient_starts_at_0(tmp_path: Path) -> None:
    deck, toml = write(tmp_path, INRUSH.replace(" uic", ""), annotation(RTH_C, CTH_C))
    outcome = cosim.run_auto(deck, toml, RunOptions(), method="full")
    assert outcome.results.time is not None and outcome.results.time[0] == 0.0
    assert not [f for f in outcome.findings if "not 0" in f.message]


@pytest.mark.ngspice
def test_a_tstart_says_the_peaks_are_from_there(tmp_path: Path) -> None:
    # The same charge, switched on at t = 0 by a 1 ns edge, saved from 5 ms on.
    charged = INRUSH.replace(f"DC {V_DC}", f"PULSE(0 {V_DC} 0 1n 1n 1 2)")
    charged = charged.replace(" IC=0", "").replace("20m uic", "20m 5m")
    deck, toml = write(tmp_path, charged, annotation(RTH_C, CTH_C))
    outcome = cosim.run_auto(deck, toml, RunOptions(), method="full")
    time = outcome.results.time
    assert time is not None and 5e-3 <= time[0] < 5e-3 + 1e-5
    warned = [f.message for f in outcome.findings if "not 0" in f.message]
    assert len(warned) == 1 and "not over the whole run" in warned[0]
    # The hottest instant (3.5 ms, module docstring) is before 5 ms: what is reported is
    # the peak of what was saved, and the warning says so.
    part = outcome.results.parts[0]
    assert part.temperature_series[0] > AMBIENT + 1.0  # really heated
    assert part.peak_temperature == pytest.approx(part.temperature_series[0], abs=1e-9)


WAVE = """a sine across a resistor
V1 a 0 SIN(0 10 1.37k)
R1 a 0 100
.tran 5u 0.2
.end
"""


@pytest.mark.ngspice
@pytest.mark.parametrize("method", ["full", "cosim"])
def test_probe_min_max_are_over_every_time_point(tmp_path: Path, method: str) -> None:
    # A 10 V sine sampled every 5 us or less: its samples reach within (w dt)^2 / 8 of the
    # crest (cos of half a step), window ends a few ms apart do not.
    deck, toml = write(tmp_path, WAVE, annotation(RTH, 10 * CTH))
    out = tmp_path / "run.json"
    result = CliRunner().invoke(
        main, ["run", deck, "--method", method, "--probe", "V(a)", "--probe", "I(v1)",
               "--json", str(out)],
    )  # fmt: skip
    assert result.exit_code == 0, result.output
    probes = json.loads(out.read_text())["probes"]
    near = 10.0 * (1 - (2 * math.pi * 1.37e3 * 5e-6) ** 2 / 8)
    assert near <= probes["V(a)"]["max"] <= 10.0
    assert -10.0 <= probes["V(a)"]["min"] <= -near
    assert near / 100 <= probes["I(v1)"]["max"] <= 10.0 / 100  # 100 ohm
    outcome = cosim.run_auto(deck, toml, RunOptions(), method=method)
    series = outcome.results.voltage_series["a"]
    if method == "cosim":  # the series are window ends: the premise of this test
        assert float(np.max(series)) < near and float(np.min(series)) > -near


# A deck with no capacitor and no inductor under uic: nothing is charged at t = 0, so the
# warning speaks of the instant left out without an inrush it cannot have (Ohm's law at
# every instant: P = V^2 / R, the same at t = 0 as at the first point for a DC source).
# INRUSH less its capacitor, the resistor straight across the source.
R_LOAD = 100.0
RESISTIVE = INRUSH.replace(f"C1 out 0 {C_BANK} IC=0\n", "").replace(
    f"R1 in out {R_CHARGE}", f"R1 in 0 {R_LOAD}"
)


@pytest.mark.ngspice
@pytest.mark.parametrize("method", ["full", "cosim"])
def test_uic_warning_speaks_of_the_deck_at_hand(tmp_path: Path, method: str) -> None:
    deck, toml = write(tmp_path, RESISTIVE, annotation(RTH_C, CTH_C))
    outcome = cosim.run_auto(deck, toml, RunOptions(), method=method)
    warned = [f for f in outcome.findings if "not 0" in f.message]
    assert len(warned) == 1 and "uic" in warned[0].message
    said = warned[0].message + " " + (warned[0].hint or "")
    assert "capacitor" not in said and "inrush" not in said
    # The peak power is V^2/R (Ohm's law): nothing is missed at t = 0 with a DC source.
    part = outcome.results.parts[0]
    assert part.peak_power == pytest.approx(V_DC**2 / R_LOAD, rel=1e-3)


# A tstart under the co-simulation (issue: `run --method cosim` exited 2 on it): the
# results are what the full deck saves, [tstart, tstop], and every peak is over them.
# The same charge as above, switched on at t = 0, saved from 5 ms; the hottest instant
# (3.5 ms, module docstring) is before 5 ms, so both methods report the temperature at 5 ms
# as the peak, the closed form of the convolution there.
@pytest.mark.ngspice
def test_cosim_takes_a_tstart_as_the_full_deck_does(tmp_path: Path) -> None:
    charged = INRUSH.replace(f"DC {V_DC}", f"PWL(0 0 1n {V_DC})")  # no period to separate
    charged = charged.replace(" IC=0", "").replace("20m uic", "20m 5m")
    deck, toml = write(tmp_path, charged, annotation(RTH_C, CTH_C))
    fast = cosim.run_auto(deck, toml, RunOptions(), method="cosim")
    full = cosim.run_auto(deck, toml, RunOptions(), method="full")
    assert fast.method == "cosim"
    time = fast.results.time
    assert time is not None and 5e-3 * (1 - 1e-9) <= time[0] < 5e-3 + 1e-5
    warned = [f.message for f in fast.findings if "not 0" in f.message]
    assert len(warned) == 1 and "not over the whole run" in warned[0]
    a, b = 2 / (R_CHARGE * C_BANK), 1 / (RTH_C * CTH_C)
    t0 = 5e-3
    rise = V_DC**2 / R_CHARGE / CTH_C * (math.exp(-b * t0) - math.exp(-a * t0)) / (a - b)
    part, ref = fast.results.parts[0], full.results.parts[0]
    assert part.peak_temperature == pytest.approx(AMBIENT + rise, abs=1e-3 * rise)
    assert part.peak_temperature == pytest.approx(ref.peak_temperature, abs=0.01)
    # P(t) = V^2/R e^{-2t/RC}: the largest from 5 ms on is at 5 ms.
    p5 = V_DC**2 / R_CHARGE * math.exp(-a * t0)
    assert part.peak_power == pytest.approx(p5, rel=1e-2)
    assert part.peak_power == pytest.approx(ref.peak_power, rel=1e-2)
    assert part.temperature == pytest.approx(ref.temperature, abs=0.01)
