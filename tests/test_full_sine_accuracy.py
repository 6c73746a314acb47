"""How exact ``--method full`` is on a sine drive, as the README states (issue 12, section 3).

A resistor without TCR on Va sin(w t) into R dissipates P0 (1 - cos 2 w t) with
P0 = Va^2 / (2 R) (Joule heating and sin^2 = (1 - cos 2x)/2).  A single Rth/Cth stage from
the ambient answers C dT/dt = P - (T - Ta)/Rth (first-order thermal balance); its closed form
from T(0) = Ta, with tau = Rth C and W = 2 w:

    T - Ta = Rth P0 (1 - e^(-t/tau))
             - Rth P0 / (1 + (W tau)^2) (cos W t + W tau sin W t - e^(-t/tau))

so the mean over a whole period ending at t1 is Rth P0 (1 - E) + Rth P0 E / (1 + (W tau)^2),
E the mean of e^(-t/tau) there, and the ripple's amplitude is the first-order low-pass
one, Rth P0 / sqrt(1 + (W tau)^2).

ngspice 39 solves each time point by Newton's method from the previous time point's solution
and keeps the thermal capacitor's charge from the iterate before the last, so the heat
reaches it linearised about the previous time point, short by dV^2/R per step: the mean rise
is low by (w h)^2 of itself on a sine sampled every h (README, "How exact --method full
is").  These checks hold that statement to ngspice: the measured loss is (w h)^2 within a
tenth of itself at two steps (so it shrinks as h^2), and a heat source driven by ``time``
instead of the node voltage, in the same deck, has none.
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest

from heatweave import cosim
from heatweave.run.prepare import RunOptions
from heatweave.simulators import SharedSimulator

VA, OHMS, FREQ = 10.0, 100.0, 1e3
RTH, CTH, AMBIENT, TSTOP = 50.0, 0.6e-3, 25.0, 0.3
P0 = VA**2 / (2 * OHMS)
TAU, W2 = RTH * CTH, 2 * 2 * math.pi * FREQ

DECK = f"""sine into a resistor without TCR
V1 a 0 SIN(0 {VA} {FREQ:g})
R1 a 0 {OHMS}
.tran 5u {TSTOP}
.end
"""
ANNOTATION = f"""schema = 1
[ambient]
temperature = {AMBIENT}
[part.R1]
model = "linear"
tc1 = 0.0
rth = {RTH}
cth = {CTH}
"""


def exact_mean_rise(t0: float, t1: float) -> float:
    """The closed form's mean rise over [t0, t1] (a whole number of drive periods)."""
    decay = TAU * (math.exp(-t0 / TAU) - math.exp(-t1 / TAU)) / (t1 - t0)
    return RTH * P0 * (1 - decay) + RTH * P0 * decay / (1 + (W2 * TAU) ** 2)


def last_period(time: np.ndarray, temps: np.ndarray) -> tuple[float, float, float]:
    """Mean (trapezoid over the time points), half the peak-to-peak, and where it starts."""
    keep = time >= time[-1] - 1 / FREQ - 1e-12
    t, temp = time[keep], temps[keep]
    return float(np.trapezoid(temp, t) / (t[-1] - t[0])), float(np.ptp(temp) / 2), float(t[0])


@pytest.mark.ngspice
@pytest.mark.slow
@pytest.mark.parametrize("step", [5e-6, 2.5e-6])
def test_full_mean_rise_is_low_by_the_stated_square_of_the_step(
    tmp_path: Path, step: float
) -> None:
    deck, toml = tmp_path / "sine.cir", tmp_path / "sine.thermal.toml"
    deck.write_text(DECK)
    toml.write_text(ANNOTATION)
    options = RunOptions(analyses=(f"tran {step!r} {TSTOP!r}",))
    outcome = cosim.run_auto(str(deck), str(toml), options, method="full")
    (part,) = outcome.results.parts
    assert part.temperature_series is not None
    mean, ripple, start = last_period(np.asarray(outcome.results.time), part.temperature_series)
    exact = exact_mean_rise(start, TSTOP)
    loss = 1 - (mean - AMBIENT) / exact
    stated = (2 * math.pi * FREQ * step) ** 2
    assert loss == pytest.approx(stated, rel=0.1)
    assert ripple == pytest.approx(RTH * P0 / math.sqrt(1 + (W2 * TAU) ** 2), rel=1e-3)


@pytest.mark.ngspice
def test_a_heat_source_of_time_has_no_loss() -> None:
    """The same thermal stage heated by V(a)^2/R and by the same power written as a
    function of time, side by side in one deck: only the first loses heat."""
    deck = f"""two heats
V1 a 0 SIN(0 {VA} {FREQ:g})
R1 a 0 {OHMS}
B1 0 t1 I = V(a)*V(a)/{OHMS}
B2 0 t2 I = ({VA}*sin(2*{math.pi!r}*{FREQ:g}*time))^2/{OHMS}
C1 t1 0 {CTH}
R2 t1 amb {RTH}
C2 t2 0 {CTH}
R3 t2 amb {RTH}
Vamb amb 0 DC {AMBIENT}
.ic V(t1)={AMBIENT} V(t2)={AMBIENT}
.end
"""
    result = SharedSimulator().run(deck, analyses=[f"tran 5u {TSTOP!r}"], cwd=Path.cwd())
    plot = [p for p in result.plots if p.kind == "tran"][-1]
    time = np.asarray(plot.vectors[plot.scale])
    by_voltage, _, start = last_period(time, np.asarray(plot.vectors["v(t1)"]).real)
    by_time, _, _ = last_period(time, np.asarray(plot.vectors["v(t2)"]).real)
    exact = exact_mean_rise(start, TSTOP)
    assert by_time - AMBIENT == pytest.approx(exact, rel=2e-5)
    assert 1 - (by_voltage - AMBIENT) / exact == pytest.approx((2 * math.pi * FREQ * 5e-6) ** 2,
                                                                rel=0.1)  # fmt: skip
