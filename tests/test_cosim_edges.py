"""The co-simulation keeps every edge of the deck's PULSE and PWL sources (issue 12).

ngspice 39 sets a PULSE source's next breakpoint only when a time point lands on the one
before (checked here against its own time points); after the co-simulation's first pause,
early in the first pulse, it stopped landing on edges and stepped across every 1 us ramp
from then on, so a PWM heater's mean power came out 5.000 W instead of 5.0067 W and its
temperature 0.05 K low.  The co-simulation now hands every corner of the next window to
ngspice's breakpoint table (``ngSpice_SetBkpt``, manual 19.6.2.2), checks that each window's
time points hold every corner inside it, and falls back to the full deck (``auto``) or
refuses (``cosim``), in words, when one is missed.

References: the trapezoid pulse's mean power in closed form, (V^2/R) (PW + 2 TR/3) / PER for
equal rise and fall (the mean of a linear ramp's square is a third of its top: integral of
x^2 over [0, 1]); its temperature as the exact response of the first-order thermal network
(C dT/dt = P - (T - Ta)/Rth) to that power, integrated with scipy.integrate.quad over one
period and summed over the periods as a geometric series; ngspice's own time points.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import scipy.integrate

from heatweave import cosim
from heatweave.cosim import engine
from heatweave.errors import EmitError, UsageError
from heatweave.run.edges import Corners, SourceCorners, deck_corners
from heatweave.run.prepare import RunOptions
from heatweave.simulators import SharedSimulator
from heatweave.simulators.shared import SharedSession
from heatweave.spice.hierarchy import DeckIndex
from heatweave.spice.project import load_project

AMBIENT, RTH, CTH = 25.0, 10.0, 0.005  # tau = 50 ms
VOLTS, OHMS, RISE, WIDTH, PERIOD = 10.0, 10.0, 1e-6, 0.5e-3, 1e-3
#: The co-simulation's acceptance target against the full deck (tests/test_cosim.py, README).
TARGET_K = 0.05

PWM = f"""PWM heater, 1 us edges
V1 a 0 PULSE(0 {VOLTS} 0 {RISE} {RISE} {WIDTH} {PERIOD})
RH a 0 {OHMS}
.tran 2u 0.2
.end
"""
ANNOTATION = f"""schema = 1
[ambient]
temperature = {AMBIENT}
[part.RH]
model = "linear"
tc1 = 0.0
rth = {RTH}
cth = {CTH}
"""


def pulse_power(t: float) -> float:
    """The trapezoid pulse's instantaneous power V(t)^2 / R over one period."""
    if t < RISE:
        volts = VOLTS * t / RISE
    elif t < RISE + WIDTH:
        volts = VOLTS
    elif t < 2 * RISE + WIDTH:
        volts = VOLTS * (1 - (t - RISE - WIDTH) / RISE)
    else:
        volts = 0.0
    return volts**2 / OHMS


MEAN_POWER = VOLTS**2 / OHMS * (WIDTH + 2 * RISE / 3) / PERIOD  # 5.00667 W


def exact_temperature(at: float) -> float:
    """The first-order network's temperature at *at* (a whole number of periods)."""
    tau = RTH * CTH
    corners = [RISE, RISE + WIDTH, 2 * RISE + WIDTH]
    one, _ = scipy.integrate.quad(
        lambda s: pulse_power(s) * np.exp(-(PERIOD - s) / tau), 0, PERIOD, points=corners,
        limit=200, epsabs=1e-14,
    )  # fmt: skip
    a, n = np.exp(-PERIOD / tau), round(at / PERIOD)
    return AMBIENT + one / CTH * (1 - a**n) / (1 - a)


def write(tmp_path: Path, deck: str, annotation: str = ANNOTATION) -> tuple[str, str]:
    path, toml = tmp_path / "deck.cir", tmp_path / "deck.thermal.toml"
    path.write_text(deck)
    toml.write_text(annotation)
    return str(path), str(toml)


def test_mean_power_closed_form() -> None:
    corners = [RISE, RISE + WIDTH, 2 * RISE + WIDTH]
    mean, _ = scipy.integrate.quad(pulse_power, 0, PERIOD, points=corners, epsabs=1e-15)
    assert mean / PERIOD == pytest.approx(MEAN_POWER, rel=1e-12)


# --- the corners read from the deck ----------------------------------------------------


def index_of(tmp_path: Path, deck: str) -> DeckIndex:
    path = tmp_path / "corners.cir"
    path.write_text(deck)
    return DeckIndex(load_project(str(path)))


CORNER_DECKS = [
    # (source cards, tstep, tstop, corners in (0, tstop] by hand)
    ("V1 a 0 PULSE(0 1 2u 1u 3u 10u 20u)", 1e-6, 45e-6,
     [2, 3, 13, 16, 22, 23, 33, 36, 42, 43]),
    ("V1 a 0 PULSE(0 1 0 0 0 5u 20u 2)", 1e-6, 100e-6, [1, 6, 7, 20, 21, 26, 27]),
    ("V1 a 0 PULSE(1 1 0 1u 1u 5u 10u)", 1e-6, 100e-6, []),
    ("I1 0 a PULSE(0 1m 5u 1u 1u 4u)", 1e-6, 20e-6, [5, 6, 10, 11]),
    ("V1 a 0 PWL(0 0 10u 5 20u 5 25u 0)", 1e-6, 100e-6, [10, 20, 25]),
    ("V1 a 0 PWL(0 0 10u 5 20u 5 25u 0) td=3u", 1e-6, 40e-6, [3, 13, 23, 28]),
    ("V1 a 0 PWL(0 0 10u 5 20u 0) r=10u", 1e-6, 45e-6, [10, 20, 30, 40]),
    (".param tr=2u\nV1 a 0 PULSE(0 1 0 {tr} {2*tr} 6u 20u)", 1e-6, 20e-6, [2, 8, 12, 20]),
]  # fmt: skip


@pytest.mark.parametrize(("cards", "tstep", "tstop", "expected"), CORNER_DECKS)
def test_deck_corners(
    tmp_path: Path, cards: str, tstep: float, tstop: float, expected: list[float]
) -> None:
    index = index_of(tmp_path, f"corners\n{cards}\nR1 a 0 1\n.end\n")
    found = deck_corners(index, tstep, tstop)
    assert not found.unreadable
    times, _ = found.between(0.0, tstop)
    assert times * 1e6 == pytest.approx(expected, abs=1e-9)


def test_first_corners_of_several_sources() -> None:
    found = SourceCorners((Corners("A", (0.0, 1.0), 0.0, 10.0), Corners("B", (2.0,), 5.0),
                           Corners("C", (0.0, 3.0), 4.0, 10.0, 2)))  # fmt: skip
    # A: 0 1 10 11 20 21 ...; B: 7; C: 4 7 14 17 (two pulses)
    assert found.first(0.5, 6).tolist() == [1, 4, 7, 7, 10, 11]
    assert found.first(17.0, 3).tolist() == [20, 21, 30]


def test_corners_in_a_subcircuit_and_a_stretch(tmp_path: Path) -> None:
    deck = """nested
.subckt gate out
V1 out 0 PULSE(0 1 0 1u 1u 3u 10u)
.ends
X1 a gate
R1 a 0 1
.end
"""
    found = deck_corners(index_of(tmp_path, deck), 1e-6, 1.0)
    times, owners = found.between(20e-6, 35.5e-6)  # (20 us, 35.5 us]
    assert times * 1e6 == pytest.approx([21, 24, 25, 30, 31, 34, 35])
    assert set(owners) == {"X1.V1's PULSE"}


# --- ngspice's own time points ----------------------------------------------------------


def time_points(deck: str, pauses: list[float], land: SourceCorners | None, tstop: float,
                tran: str, step: float) -> np.ndarray:  # fmt: skip
    """ngspice's time points of *deck* paused at *pauses*, given the corners of each part
    (up to one step past its pause) when *land* is given."""
    with SharedSimulator().session(deck, cwd=Path.cwd()) as session:
        now = 0.0
        for until in [*pauses, None]:
            high = tstop if until is None else until + step
            instants = land.between(now, high)[0].tolist() if land is not None else []
            session.advance(tran, until, instants)
            now = float(session.samples("time")[-1])
        return session.samples("time")


def missed(t: np.ndarray, corners: SourceCorners, tstop: float, step: float) -> list[float]:
    times, _ = corners.between(0.0, tstop)
    return [c for c in times.tolist() if np.min(np.abs(t - c)) > engine.LANDING * step]


PWM_CORNERS = SourceCorners((Corners("V1", (0, RISE, RISE + WIDTH, 2 * RISE + WIDTH), 0.0,
                                     PERIOD),))  # fmt: skip
PLAIN_PWM = f"pwm\nV1 a 0 PULSE(0 {VOLTS} 0 {RISE} {RISE} {WIDTH} {PERIOD})\nR1 a 0 {OHMS}\n.end\n"


@pytest.mark.ngspice
def test_ngspice_39_loses_pulse_edges_after_a_resume() -> None:
    """The cause, on ngspice's own time points: paused at 40 us and 2.5 ms, it steps across
    the edges from the first fall on; with the corners handed over it lands on all."""
    t = time_points(PLAIN_PWM, [40e-6, 2.5e-3], None, 5e-3, "tran 2u 5m", 2e-6)
    assert missed(t, PWM_CORNERS, 5e-3, 2e-6)
    t = time_points(PLAIN_PWM, [40e-6, 2.5e-3], PWM_CORNERS, 5e-3, "tran 2u 5m", 2e-6)
    assert missed(t, PWM_CORNERS, 5e-3, 2e-6) == []


EDGE_DECKS = [
    # (name, cards, corners by hand, tran, tstop, largest step)
    ("narrow pulses", "V1 a 0 PULSE(0 5 3u 0.2u 0.5u 7u 23u)\nR1 a 0 10",
     [Corners("V1", (0, 0.2e-6, 7.2e-6, 7.7e-6), 3e-6, 23e-6)], "tran 0.5u 1m", 1e-3, 0.5e-6),
    ("two sources, unrelated periods",
     "V1 a 0 PULSE(0 10 0 1u 2u 0.3m 1m)\nI2 0 b PULSE(0 0.5 17u 3u 1u 0.11m 0.37m)\n"
     "R1 a 0 10\nR2 b 0 20",
     [Corners("V1", (0, 1e-6, 301e-6, 303e-6), 0, 1e-3),
      Corners("I2", (0, 3e-6, 113e-6, 114e-6), 17e-6, 0.37e-3)], "tran 1u 6m", 6e-3, 1e-6),
    ("repeating PWL", "V1 a 0 PWL(0 0 10u 5 200u 5 203u 0 400u 0) r=0\nR1 a 0 10",
     [Corners("V1", (0, 10e-6, 200e-6, 203e-6, 400e-6), 0),
      Corners("V1", (10e-6, 200e-6, 203e-6, 400e-6), 400e-6, 400e-6)], "tran 2u 4m", 4e-3, 2e-6),
    ("PWM", PLAIN_PWM.split("\n", 1)[1].replace("\n.end\n", ""), list(PWM_CORNERS.corners),
     "tran 2u 5m", 5e-3, 2e-6),
]  # fmt: skip


@pytest.mark.ngspice
@pytest.mark.parametrize(("name", "cards", "corners", "tran", "tstop", "step"), EDGE_DECKS,
                         ids=[d[0] for d in EDGE_DECKS])  # fmt: skip
def test_every_corner_is_landed_on_after_each_resume(
    name: str, cards: str, corners: list[Corners], tran: str, tstop: float, step: float
) -> None:
    """Pauses early in the first pulse, inside edges, and at random: every corner of every
    source is one of ngspice's time points."""
    rng = np.random.default_rng(12)
    wanted = SourceCorners(tuple(corners))
    first = corners[0]
    inside = first.start + first.offsets[1] / 2  # half-way up the first rise
    plans = [[0.04 * tstop / 5], [inside, 0.5 * tstop], [first.start + first.offsets[2] + step]]
    plans += [sorted(rng.uniform(0, 0.9 * tstop, 4).tolist()) for _ in range(3)]
    for pauses in plans:
        t = time_points(f"{name}\n{cards}\n.end\n", pauses, wanted, tstop, tran, step)
        assert missed(t, wanted, tstop, step) == [], pauses


# --- the co-simulation end to end ---------------------------------------------------------


@pytest.fixture(scope="module")
def pwm_runs(tmp_path_factory: pytest.TempPathFactory) -> dict[str, cosim.FastOutcome]:
    deck, toml = write(tmp_path_factory.mktemp("pwm"), PWM)
    return {m: cosim.run_auto(deck, toml, RunOptions(), method=m) for m in ("full", "cosim")}


@pytest.mark.ngspice
@pytest.mark.slow
def test_pwm_mean_power_is_the_trapezoid_pulse(pwm_runs: dict[str, cosim.FastOutcome]) -> None:
    """Within 2e-4 relative: the trapezoid rule over ngspice's few points on each 1 us ramp
    overestimates the ramp's energy (the square of a line is convex), by 7e-5 here; the
    missed edges gave 5.000 W, 1.3e-3 low."""
    for method, outcome in pwm_runs.items():
        assert outcome.method == method
        (part,) = outcome.results.parts
        assert part.power == pytest.approx(MEAN_POWER, rel=2e-4), method


@pytest.mark.ngspice
@pytest.mark.slow
def test_pwm_temperature_cosim_against_full_and_exact(
    pwm_runs: dict[str, cosim.FastOutcome],
) -> None:
    exact = exact_temperature(0.2)
    cosim_t = pwm_runs["cosim"].results.parts[0].temperature
    full_t = pwm_runs["full"].results.parts[0].temperature
    assert cosim_t == pytest.approx(full_t, abs=TARGET_K)
    assert cosim_t == pytest.approx(exact, abs=TARGET_K / 2)


@pytest.mark.ngspice
def test_a_crowded_window_ends_at_its_last_handed_corner(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """With at most three corners a window (MAX_LANDING, 4096 in use), windows end at the
    third corner ahead: 20 ms of a 1 kHz PWM (80 corners) takes at least 27 windows, and
    no corner is missed."""
    monkeypatch.setattr(engine, "MAX_LANDING", 3)
    deck, toml = write(tmp_path, PWM.replace(".tran 2u 0.2", ".tran 2u 20m"))
    outcome = cosim.run_auto(deck, toml, RunOptions(), method="cosim")
    assert outcome.trace is not None and outcome.trace.windows >= 27
    assert outcome.results.parts[0].power == pytest.approx(MEAN_POWER, rel=2e-4)


@pytest.mark.ngspice
def test_a_missed_corner_falls_back_or_is_refused(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    """Without the corners handed over (ngspice 39 left to itself), the check finds the
    edge it stepped across: ``auto`` runs the full deck and says why, ``cosim`` refuses."""
    plain = SharedSession.advance

    def forgetful(self: SharedSession, tran: str, until: float | None, land=()) -> None:  # type: ignore[no-untyped-def]
        plain(self, tran, until, ())

    monkeypatch.setattr(SharedSession, "advance", forgetful)
    deck, toml = write(tmp_path, PWM.replace(".tran 2u 0.2", ".tran 2u 20m"))
    outcome = cosim.run_auto(deck, toml, RunOptions(), method="auto")
    assert outcome.method == "full"
    assert "stepped across V1's PULSE corner" in outcome.reason
    with pytest.raises(UsageError, match="stepped across V1's PULSE corner at"):
        cosim.run_auto(deck, toml, RunOptions(), method="cosim")


@pytest.mark.ngspice
def test_unreadable_corners_fall_back_or_are_refused(tmp_path: Path) -> None:
    """A rise time drawn at random (agauss) has no corner heatweave can hand over: the
    co-simulation refuses in words; ``auto`` goes to the full deck, which refuses the card
    itself (it cannot read the drive's period either)."""
    drawn = PWM.replace(f"0 {RISE} {RISE}", "0 {agauss(1u, 0.01u, 1)} 1u", 1)
    deck, toml = write(tmp_path, drawn.replace(".tran 2u 0.2", ".tran 2u 20m"))
    told = r"cannot read the corners of V1's PULSE \(.*deck\.cir:2\)"
    with pytest.raises(UsageError, match=told):
        cosim.run_auto(deck, toml, RunOptions(), method="cosim")
    with pytest.raises(EmitError, match="agauss"):
        cosim.run_auto(deck, toml, RunOptions(), method="auto")


PWL_DECK = """repeating PWL heater drive: 10 us up to 5 V, 190 us flat, 3 us down, off to 400 us
V1 a 0 PWL(0 0 10u 5 200u 5 203u 0 400u 0) r=0
RH a 0 10
.tran 2u 0.1
.end
"""


def pwl_power(t: float) -> float:
    volts = 5 * t / 10e-6 if t < 10e-6 else 5.0 if t < 200e-6 else (
        5 * (1 - (t - 200e-6) / 3e-6) if t < 203e-6 else 0.0)  # fmt: skip
    return volts**2 / OHMS


@pytest.mark.ngspice
@pytest.mark.slow
def test_repeating_pwl_against_its_closed_form(tmp_path: Path) -> None:
    """ngspice 39 sets no breakpoint on a repeating PWL's corners by itself (its own time
    points step across the 3 us fall, test_every_corner_is_landed_on_after_each_resume);
    the co-simulation hands them over, so its power is the trapezoid pulse's (ramps a third
    of their top, 1.21458 W) and its temperature the exact first-order response."""
    deck, toml = write(tmp_path, PWL_DECK)
    outcome = cosim.run_auto(deck, toml, RunOptions(), method="cosim")
    (part,) = outcome.results.parts
    per, tau, corners = 400e-6, RTH * CTH, [10e-6, 200e-6, 203e-6]
    mean = (25 / OHMS * 190e-6 + 25 / OHMS * 13e-6 / 3) / per
    assert part.power == pytest.approx(mean, rel=1e-3)
    one, _ = scipy.integrate.quad(lambda s: pwl_power(s) * np.exp(-(per - s) / tau), 0, per,
                                  points=corners, limit=200, epsabs=1e-15)  # fmt: skip
    a, n = np.exp(-per / tau), round(0.1 / per)
    exact = AMBIENT + one / CTH * (1 - a**n) / (1 - a)
    assert part.temperature == pytest.approx(exact, abs=TARGET_K / 2)
