"""``settle``'s period mean and ripple are verified against ngspice's time points, as ``run``'s.

Closed forms (each derived beside its check):

* a current PULSE train ``I`` with straight edges ``tr``, ``tf`` into a resistor ``R``:
  ``i^2`` over an edge integrates to a third of its width, so the exact mean power is
  ``I^2 R (pw + (tr + tf) / 3) / T``; the mean rise of a part with no TCR is ``Rth`` times
  it (the period mean of ``x' = A x + B u``, README "settle");
* with edges of a nanosecond the power is a rectangular wave, and a first-order ``Rth``,
  ``Cth`` driven by it peaks and bottoms at the textbook values of
  :func:`test_settle.rectangular_train`;
* a sine of amplitude ``V`` across ``R``: ``Vrms^2 / R = V^2 / 2R``.

The tolerance is ``run``'s (:mod:`heatweave.run.stepcheck`): a mean power within
``2 reltol`` of itself (``reltol`` = 1e-3, ngspice's default), a temperature within
``reltol |T| + vntol``.
"""

from __future__ import annotations

import json
import shutil
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner

from heatweave.cli import main
from heatweave.networks import Cauer, Foster, Single
from heatweave.run import stepcheck
from heatweave.run.sampling import step_excess
from heatweave.settle.periodic import Settled, SettleOptions, settle
from heatweave.settle.thermal import periodic, ripple_bound
from heatweave.thermal.balance import ABSTOL_P
from heatweave.thermal.sampled import SampledResponse
from heatweave.thermal.solver import Propagator, assemble
from test_settle import rectangular_train
from test_thermal_solver import AMBIENT as AMBIENT_T
from test_thermal_solver import MIXED, board, circuit, part

needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")

RELTOL = 1e-3  # ngspice's default
RTH, CTH, R, AMBIENT, PERIOD = 10.0, 1e-3, 10.0, 25.0, 1e-3
ANNOTATION = f"""schema = 1
[ambient]
temperature = {AMBIENT}
[part.R1]
model = "linear"
tc1 = 0
rth = {RTH}
cth = {CTH}
power_rating = 100
"""


def pulse_deck(tmp_path: Path, rise: float, width: float, control: bool = False) -> tuple[str, str]:
    """A 1 A current PULSE train of period 1 ms into R1 (edges *rise*, width *width*)."""
    deck = tmp_path / "train.cir"
    extra = ".control\n.endc\n" if control else ""
    deck.write_text(
        "current train into a resistor\n"
        f"I1 0 a PULSE(0 1 0 {rise} {rise} {width} {PERIOD})\n"
        f"R1 a 0 {R}\n.tran 1u 10m\n{extra}.end\n"
    )
    annotation = tmp_path / "train.thermal.toml"
    annotation.write_text(ANNOTATION)
    return str(deck), str(annotation)


def exact_mean_power(rise: float, width: float) -> float:
    """``I^2 R (pw + 2 tr / 3) / T`` with I = 1 A (module docstring)."""
    return R * (width + 2.0 * rise / 3.0) / PERIOD


def power_bound(power: float) -> float:
    """What ``run`` allows a mean power: ``2 reltol`` of it plus the balance's floor."""
    return 2 * RELTOL * power + ABSTOL_P


def notes(settled: Settled, words: str) -> list[str]:
    return [f.message for f in settled.findings if words in f.message]


@needs_ngspice
@pytest.mark.parametrize(
    ("rise", "width", "tstep"),
    [(1e-6, 499e-6, None), (1e-6, 499e-6, 2e-6), (100e-6, 400e-6, 5e-6), (20e-6, 300e-6, None)],
)
def test_pulse_train_mean_power_and_rise_are_the_closed_form(
    tmp_path: Path, rise: float, width: float, tstep: float | None
) -> None:
    deck, annotation = pulse_deck(tmp_path, rise, width)
    settled = settle(deck, annotation, SettleOptions(tstep=tstep))
    (part,) = settled.parts
    exact = exact_mean_power(rise, width)
    assert not settled.unverified and not notes(settled, "max step")
    assert part.power_error is not None
    # the estimate is the trapezoid against straight-line currents, which the PULSE's
    # edges are (ngspice steps on their corners): it is the error, to ngspice's accuracy
    assert abs(part.power - exact) <= part.power_error + 1e-9 * exact
    assert part.power_error <= power_bound(exact)
    # mean rise = Rth x mean power; the thermal solve adds nothing
    assert part.temperature - AMBIENT == pytest.approx(RTH * part.power, rel=1e-12)
    assert abs(part.temperature - (AMBIENT + RTH * exact)) <= RTH * power_bound(exact)


@needs_ngspice
def test_rectangular_train_peak_and_valley_are_the_first_order_closed_form(tmp_path: Path) -> None:
    # nanosecond edges: the power is a rectangle of 10 W for pw (+ 2/3 ns of edges, 7e-12 J
    # against Cth: 7e-9 K at most, far below the tolerance)
    width = 500e-6
    deck, annotation = pulse_deck(tmp_path, 1e-9, width)
    settled = settle(deck, annotation, SettleOptions())
    (part,) = settled.parts
    mean, peak, valley = rectangular_train(((RTH, RTH * CTH),), R * 1.0, width / PERIOD, PERIOD)
    assert part.peak_temperature is not None and part.valley_temperature is not None
    allowed = RELTOL * (AMBIENT + peak) + 1e-6
    assert part.temperature == pytest.approx(AMBIENT + mean, abs=allowed)
    assert part.peak_temperature == pytest.approx(AMBIENT + peak, abs=allowed)
    assert part.valley_temperature == pytest.approx(AMBIENT + valley, abs=allowed)


@needs_ngspice
@pytest.mark.parametrize(("tstep", "rerun"), [(None, False), (25e-6, True)])
def test_sine_drive_mean_power_is_vrms_squared_over_r(
    tmp_path: Path, tstep: float | None, rerun: bool
) -> None:
    deck = tmp_path / "sine.cir"
    deck.write_text("sine across a resistor\nV1 a 0 SIN(0 10 1k)\nR1 a 0 10\n.tran 1u 5m\n.end\n")
    annotation = tmp_path / "sine.thermal.toml"
    annotation.write_text(ANNOTATION)
    # 40 steps a period: run again finer, at a whole fraction of the period (else the
    # sine's points land at other phases in successive periods, which then differ)
    settled = settle(str(deck), str(annotation), SettleOptions(tstep=tstep))
    (part,) = settled.parts
    exact = 10.0**2 / 2 / R  # Vrms^2 / R
    assert not settled.unverified and len(notes(settled, "max step")) == rerun
    assert abs(part.power - exact) <= power_bound(exact)
    assert abs(part.temperature - (AMBIENT + RTH * exact)) <= RTH * power_bound(exact)


@needs_ngspice
@pytest.mark.parametrize(("tstep", "said"), [(50e-6, "50 us"), (900e-6, "900 us")])
def test_coarse_step_is_run_again_finer_and_then_meets_the_closed_form(
    tmp_path: Path, tstep: float, said: str
) -> None:
    # 100 us edges at 50 us steps: the trapezoid of i^2 on the edges is 0.6 % high; at
    # 900 us, three runs again (one of them at 1 ms / 13, see vetting.vet_cycle's snap)
    rise, width = 100e-6, 400e-6
    deck, annotation = pulse_deck(tmp_path, rise, width)
    settled = settle(deck, annotation, SettleOptions(tstep=tstep))
    (note,) = notes(settled, "max step")
    assert f"with a {said} maximum step R1's mean dissipation depends" in note
    assert not settled.unverified and not notes(settled, "not verified")
    (part,) = settled.parts
    exact = exact_mean_power(rise, width)
    assert abs(part.power - exact) <= power_bound(exact)
    assert abs(part.temperature - (AMBIENT + RTH * exact)) <= RTH * power_bound(exact)
    # and the peak against the same deck settled at a fine step given
    fine = settle(deck, annotation, SettleOptions(tstep=1e-6)).parts[0]
    assert fine.peak_temperature is not None and part.peak_temperature is not None
    assert part.peak_temperature == pytest.approx(fine.peak_temperature, abs=0.1)


@needs_ngspice
def test_an_unverified_period_warns_and_its_bounds_hold(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    rise, width = 100e-6, 400e-6
    deck, annotation = pulse_deck(tmp_path, rise, width)
    monkeypatch.setattr(stepcheck, "MAX_RERUNS", 0)
    settled = settle(deck, annotation, SettleOptions(tstep=50e-6))
    (warning,) = notes(settled, "not verified")
    assert warning.startswith("not verified with a 50 us maximum step: R1's mean dissipation")
    kinds = {(item.subject, item.kind) for item in settled.unverified}
    assert kinds == {("R1", "sampling"), ("R1", "ripple")}
    # the estimates are honest: the figures lie within them of the verified ones
    (part,) = settled.parts
    by_kind = {item.kind: item.value for item in settled.unverified}
    exact = exact_mean_power(rise, width)
    assert abs(part.power - exact) <= by_kind["sampling"] * (1 + 1e-6)
    monkeypatch.undo()
    fine = settle(deck, annotation, SettleOptions(tstep=1e-6)).parts[0]
    assert part.peak_temperature is not None and fine.peak_temperature is not None
    assert part.valley_temperature is not None and fine.valley_temperature is not None
    assert abs(part.peak_temperature - fine.peak_temperature) <= by_kind["ripple"]
    assert abs(part.valley_temperature - fine.valley_temperature) <= by_kind["ripple"]


@needs_ngspice
def test_settle_check_fails_a_period_it_cannot_verify(tmp_path: Path) -> None:
    # --allow-control: the deck's .control block may drive its own analyses, so no run
    # again with a smaller step is made (as run): the figures stay unverified
    deck, annotation = pulse_deck(tmp_path, 100e-6, 400e-6, control=True)
    out = tmp_path / "out.json"
    args = ["settle", deck, "-a", annotation, "--tstep", "50u", "--allow-control"]
    done = CliRunner().invoke(main, [*args, "--check", "--json", str(out)])
    assert done.exit_code == 1, done.output
    assert "not verified with a 50 us maximum step" in done.output
    assert "drives its own analyses" in done.output
    lines = [line for line in done.output.splitlines() if line.startswith("FAIL")]
    assert any("R1 sampling" in line for line in lines), done.output
    assert any("R1 ripple" in line for line in lines), done.output
    data = json.loads(out.read_text())
    assert any("not verified" in w for w in data["warnings"])
    # without --check the warning is printed and the exit status is 0 (as run)
    plain = CliRunner().invoke(main, args)
    assert plain.exit_code == 0 and "not verified" in plain.output


# -- the ripple bound against the periodic response to the exact power ---------------------


def coarse_and_fine(period: float, steps: int, parts: int) -> tuple[np.ndarray, ...]:
    """Triangle-ish currents (one per part) sampled at *steps* points a period, their
    power ``i^2`` there, and a grid 400 times finer with the power of the straight-line
    currents (the parabola the bound is about; straight lines between its points move a
    temperature by about 1/400^2 of the coarse error)."""
    time = np.linspace(0.0, period, steps + 1)
    phase = np.arange(parts)[None, :] * 0.37
    current = np.abs(((time[:, None] / period + phase) % 1.0) - 0.5) * 4.0 - 0.3
    fine = np.linspace(0.0, period, steps * 400 + 1)
    fine_current = np.column_stack([np.interp(fine, time, current[:, k]) for k in range(parts)])
    return time, current, current**2, fine, fine_current**2


@pytest.mark.parametrize("steps", [7, 12, 40])
def test_ripple_bound_holds_against_the_response_to_the_exact_power(steps: int) -> None:
    # reference: periodic() on a grid fine enough to carry the parabolas (its own
    # exactness for straight-line power is checked in test_settle against the closed form)
    system = assemble(MIXED)
    period = 0.05
    time, current, power, fine, fine_power = coarse_and_fine(period, steps, 3)
    excess = np.column_stack([step_excess(current[:, k], current[:, k], time) for k in range(3)])
    bound = ripple_bound(system, period, excess, time)
    assert bound is not None
    coarse = periodic(system, time, power, AMBIENT_T).outputs
    exact = periodic(system, fine, fine_power, AMBIENT_T).outputs
    moved = np.abs(coarse - exact[::400])
    assert np.all(moved <= bound[None, :])
    peaks = np.abs(coarse.max(axis=0) - exact.max(axis=0))
    valleys = np.abs(coarse.min(axis=0) - exact.min(axis=0))
    assert np.all(peaks <= bound) and np.all(valleys <= bound)


def test_ripple_bound_of_a_slow_first_order_part_is_the_mean_shift() -> None:
    # tau = 1 s over a 10 ms period: every temperature moves by about Rth x the mean
    # power's error, and the bound is about that (within 1 %)
    system = assemble(circuit([part("R3", Single(80.0, 1.0 / 80.0))], []))
    period = 0.01
    time, current, power, fine, fine_power = coarse_and_fine(period, 9, 1)
    excess = step_excess(current[:, 0], current[:, 0], time)[:, None]
    bound = ripple_bound(system, period, excess, time)
    assert bound is not None
    coarse = periodic(system, time, power, AMBIENT_T).outputs
    exact = periodic(system, fine, fine_power, AMBIENT_T).outputs
    moved = float(np.max(np.abs(coarse - exact[::400])))
    assert moved <= bound[0] <= 1.01 * moved


def test_periodic_state_is_the_exact_response_to_straight_line_power() -> None:
    # settle.thermal.periodic against thermal.sampled (the exact modal response run's
    # replay uses) run from rest over 400 periods of the same samples (every time constant
    # here is under 20 ms: the start has decayed by e^-1000): the last period must be it
    fast = circuit(
        [
            part("R1", Cauer(((5.0, 2e-4), (15.0, 4e-4))), "board"),
            part("R2", Foster(((12.0, 1e-4), (40.0, 2e-4)))),
        ],
        [board(rth=3.0, cth=1e-3)],
    )
    system = assemble(fast)
    assert float(np.max(system.time_constants)) < 0.02
    period, repeats = 0.05, 400
    time, _current, power, _fine, _fine_power = coarse_and_fine(period, 23, 2)
    state = periodic(system, time, power, AMBIENT_T)
    steps = len(time) - 1
    long_time = np.concatenate(
        [time[:-1] + k * period for k in range(repeats)] + [[repeats * period]]
    )
    long_power = np.vstack([power[:-1]] * repeats + [power[-1:]])
    inputs = np.vstack([long_power.T, np.full((1, len(long_time)), AMBIENT_T)])
    response = SampledResponse(Propagator(system))
    _, outputs = response.run(system.rest_state(AMBIENT_T), long_time, inputs)
    np.testing.assert_allclose(outputs[:, -steps - 1 :].T, state.outputs, rtol=0, atol=1e-9)
