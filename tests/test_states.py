"""Where more than one stable steady state exists, heatweave says so (issue 12, section 1).

References, independent of heatweave and ngspice:

* one part: scipy.optimize.brentq on the scalar power balance T - Ta = Rth P(T) between the
  sign changes of a 0.01 K grid; a root is stable where the heat surplus P - (T - Ta)/Rth
  falls through zero (positive below it);
* two parts on their own supplies sharing a thermal node: the balance reduces to one scalar
  equation in T1 (P2 and T2 follow from T1 explicitly), solved the same way with brentq;
* two parts in series on one supply: scipy.optimize.fsolve from a grid of starting points,
  every distinct root with a residual below 1e-9 W kept.

A state of two parts is stable (whatever the heat capacities) when the Jacobian J of the
surpluses has J11 < 0, J22 < 0 and det J > 0 (Routh-Hurwitz for 2 x 2); here by central
differences.  The PTC formula is the ptc model's published form (tempmodels/ptc.py).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path
from types import SimpleNamespace

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.optimize import brentq, fsolve

from heatweave.cli import main
from heatweave.emit.emitter import load_inputs
from heatweave.run import runner, verify
from heatweave.run.prepare import RunOptions, prepare
from heatweave.run.states import NGSPICE, SCAN_STEP, State, Statement, pair, scan

KELVIN = 273.15
TA = 25.0


def write(tmp_path: Path, deck: str, note: str) -> tuple[str, str]:
    (tmp_path / "d.cir").write_text(deck)
    (tmp_path / "d.thermal.toml").write_text(note)
    return str(tmp_path / "d.cir"), str(tmp_path / "d.thermal.toml")


def roots(
    balance: Callable[[float], float], low: float, high: float, step: float = 0.01
) -> list[tuple[float, bool]]:
    """(root, stable) of a heat surplus on [low, high]: brentq between grid sign changes."""
    grid = np.arange(low, high, step)
    values = np.array([balance(t) for t in grid])
    return [
        (float(brentq(balance, grid[k], grid[k + 1], xtol=1e-12)), bool(values[k] > 0))
        for k in np.flatnonzero(np.sign(values[:-1]) != np.sign(values[1:]))
    ]


def ptc(t: float, r_cold: float = 10.0, decade: float = 1.0) -> float:
    """ptc model, t_switch 120 degC, one decade per *decade* kelvin, r_max = 1e4 r_cold."""
    f = 10.0 ** min(max((t - 120.0) / decade, -86.0), 86.0)
    return r_cold * (1 + f) / (1 + f * 1e-4)


def listed(message: str) -> list[list[float]]:
    """The states a warning lists: "(a degC, b degC)" or "(P a degC with Q b degC; ...)"."""
    inside = message.split("(", 1)[1].split(")", 1)[0]
    groups = inside.split("; ") if ";" in inside or " with " in inside else inside.split(", ")
    return [[float(w) for w in g.replace(" with ", " ").split() if w[0].isdigit()] for g in groups]


def warning(findings: object, text: str) -> str:
    assert isinstance(findings, tuple)
    found = [f.message for f in findings if text in f.message]
    assert len(found) == 1, [f.message for f in findings]
    return found[0]


# --- one part ------------------------------------------------------------------------------

NTC_DECK = "ntc with a load\nV1 rail 0 DC 10\nRT rail mid 1000\nRL mid 0 10\n.op\n.end\n"
NTC_NOTE = (
    f'schema = 1\n[ambient]\ntemperature = {TA}\n[part.RT]\nmodel = "ntc-beta"\n'
    "beta = 3500\nrth = 100.0\ncth = 0.1\n"
)


Curve = Callable[[float], float]


def loaded(resistance: Curve, volts: float, load: float) -> Curve:
    """Heat surplus of a part R(T) in series with *load* on *volts*, Rth 100 K/W."""

    def surplus(t: float) -> float:
        r = resistance(t)
        return volts**2 * r / (r + load) ** 2 - (t - TA) / 100.0

    return surplus


def ntc_r(t: float) -> float:
    return 1000.0 * math.exp(3500.0 * (1 / (t + KELVIN) - 1 / (25.0 + KELVIN)))  # Beta equation


NEG_DECK = "negative tc1 behind 1 ohm\nV1 rail 0 DC 4\nRS rail mid 1\nRN mid 0 100\n.op\n.end\n"
NEG_NOTE = (
    f'schema = 1\n[ambient]\ntemperature = {TA}\n[part.RN]\nmodel = "linear"\n'
    "tc1 = -0.004\nrth = 100.0\ncth = 0.1\n"
)


def neg_r(t: float) -> float:
    return 100.0 * (1 - 0.004 * (t - 25.0))  # linear model; positive below 275 degC


TABLE_DECK = "table step and a load\nV1 rail 0 DC 30\nRT rail mid 10\nRL mid 0 100\n.op\n.end\n"
TABLE_NOTE = (
    f'schema = 1\n[ambient]\ntemperature = {TA}\n[part.RT]\nmodel = "table"\n'
    "points = [[25, 10], [110, 10], [115, 1000], [200, 1000]]\nrth = 100.0\ncth = 0.1\n"
)


def table_r(t: float) -> float:
    return float(np.interp(t, [25, 110, 115, 200], [10, 10, 1000, 1000]))


PTC_DECK = "ptc with a load\nV1 rail 0 DC 30\nRP rail mid 10\nRL mid 0 100\n.op\n.end\n"
PTC_NOTE = (
    f'schema = 1\n[ambient]\ntemperature = {TA}\n[part.RP]\nmodel = "ptc"\n'
    "t_switch = 120.0\ndecade = 1.0\nrth = 100.0\ncth = 0.5\n"
)


def ptc_r(t: float) -> float:
    return ptc(t, 10.0 * (1 + 10.0**-95 / 1e4) / (1 + 10.0**-95))  # R25 = deck value


# (deck, annotation, surplus, part, top of the reference's range)
SINGLE = {
    "ntc-with-load": (NTC_DECK, NTC_NOTE, loaded(ntc_r, 10.0, 10.0), "RT", 400.0),
    "negative-tc1-behind-series-r": (NEG_DECK, NEG_NOTE, loaded(neg_r, 4.0, 1.0), "RN", 274.99),
    "table-step": (TABLE_DECK, TABLE_NOTE, loaded(table_r, 30.0, 100.0), "RT", 400.0),
    "ptc": (PTC_DECK, PTC_NOTE, loaded(ptc_r, 30.0, 100.0), "RP", 400.0),
}


@pytest.mark.parametrize("backend", ["shared", "batch"])
@pytest.mark.parametrize("case", sorted(SINGLE))
def test_one_part_lists_every_stable_state(tmp_path: Path, case: str, backend: str) -> None:
    deck_text, note_text, surplus, name, top = SINGLE[case]
    stable = [t for t, ok in roots(surplus, TA, top) if ok]  # brentq
    assert len(stable) == 2  # the deck is built to have two
    deck, note = write(tmp_path, deck_text, note_text)
    outcome = runner.run(deck, note, runner.RunOptions(backend=backend))
    # The lowest is reported: the surplus is positive from the ambient up to it.
    assert outcome.results.part(name).temperature == pytest.approx(stable[0], abs=0.05)
    message = warning(outcome.prepared.findings, "stable steady states")
    assert [g[0] for g in listed(message)] == pytest.approx(stable, abs=SCAN_STEP)
    assert "is the lowest" in message


def fed(resistance: Curve, amps: float) -> Curve:
    """Heat surplus of a part R(T) on a current source, Rth 100 K/W."""
    return lambda t: amps**2 * resistance(t) - (t - TA) / 100.0


# (deck, annotation, surplus, part, top of the reference's range, stable flags of its roots)
ONE_STATE = {
    # Straight across 7 V (below Vcrit = sqrt(R0 / (4 |tc1| Rth)) = 7.9 V): two roots, the
    # upper unstable.
    "negative-tc1-across-a-supply": (
        "across\nV1 rail 0 DC 7\nRN rail 0 100\n.op\n.end\n", NEG_NOTE,
        loaded(neg_r, 7.0, 0.0), "RN", 274.99, [True, False],
    ),
    # Its dissipation falls as it heats: one root.
    "ntc-on-a-current-source": (
        "ntc fed\nI1 0 top DC 10m\nRT top 0 1000\n.op\n.end\n", NTC_NOTE,
        fed(ntc_r, 0.01), "RT", 400.0, [True],
    ),
}  # fmt: skip


@pytest.mark.parametrize("case", sorted(ONE_STATE))
def test_one_stable_state_is_not_called_several(tmp_path: Path, case: str) -> None:
    deck_text, note_text, surplus, name, top, flags = ONE_STATE[case]
    found = roots(surplus, TA, top)  # brentq
    assert [ok for _, ok in found] == flags
    deck, note = write(tmp_path, deck_text, note_text)
    outcome = runner.run(deck, note, runner.RunOptions())
    assert outcome.results.part(name).temperature == pytest.approx(found[0][0], abs=0.02)
    assert not [f for f in outcome.prepared.findings if "steady states" in f.message]


# --- two parts -----------------------------------------------------------------------------

SHARED_DECK = (
    "two ptcs on their own supplies, one board\nV1 a 0 DC 24\nRP a b 10\nRL1 b 0 100\n"
    "V2 c 0 DC 24\nRQ c d 10\nRL2 d 0 100\n.op\n.end\n"
)
SHARED_NOTE = (
    f"schema = 1\n[ambient]\ntemperature = {TA}\n[node.board]\nrth = 20.0\ncth = 1.0\n"
    + "".join(
        f'[part.{n}]\nmodel = "ptc"\nt_switch = 120.0\ndecade = 3.0\nrth = 60.0\ncth = 0.5\n'
        'to = "board"\n'
        for n in ("RP", "RQ")
    )
)


def shared_states() -> list[tuple[float, float, bool]]:
    """States of SHARED_DECK: Tn = Ta + 20 (P1 + P2), Ti = Tn + 60 Pi, reduced to T1."""

    def power(t: float) -> float:
        r = ptc(t, 10.0 * (1 + 10.0 ** (-95 / 3) / 1e4) / (1 + 10.0 ** (-95 / 3)), 3.0)
        return 24.0**2 * r / (r + 100.0) ** 2

    def other(t1: float) -> tuple[float, float]:
        p2 = (t1 - TA - 80.0 * power(t1)) / 20.0
        return t1 - 60.0 * power(t1) + 60.0 * p2, p2

    def reduced(t1: float) -> float:
        t2, p2 = other(t1)
        return power(t2) - p2

    def surplus(x: np.ndarray) -> np.ndarray:
        node = (TA / 20.0 + x[0] / 60.0 + x[1] / 60.0) / (1 / 20.0 + 2 / 60.0)
        return np.array([power(x[i]) - (x[i] - node) / 60.0 for i in (0, 1)])

    found = []
    for t1, _ in roots(reduced, TA, 200.0, 0.002):  # two states lie 0.03 K apart in T1
        t2 = other(t1)[0]
        found.append((t1, t2, stable_at(surplus, np.array([t1, t2]))))
    return found


def stable_at(surplus: Callable[[np.ndarray], np.ndarray], x: np.ndarray) -> bool:
    e = 1e-6
    jac = np.column_stack([(surplus(x + d) - surplus(x - d)) / (2 * e)
                           for d in (np.array([e, 0.0]), np.array([0.0, e]))])  # fmt: skip
    return bool(jac[0, 0] < 0 and jac[1, 1] < 0 and np.linalg.det(jac) > 0)


SERIES_DECK = (
    "two ptcs in series\nV1 rail 0 DC 30\nRP rail mid 10\nRQ mid low 10\nRL low 0 100\n.op\n.end\n"
)
SERIES_NOTE = (
    f'schema = 1\n[ambient]\ntemperature = {TA}\n[part.RP]\nmodel = "ptc"\nt_switch = 120.0\n'
    'decade = 1.0\nrth = 100.0\ncth = 0.5\n[part.RQ]\nmodel = "ptc"\nt_switch = 120.0\n'
    "decade = 1.0\nrth = 100.0\ncth = 0.5\n"
)


def series_states() -> list[tuple[float, float, bool]]:
    """States of SERIES_DECK by fsolve from a grid of starts (denser near the switch)."""

    def surplus(x: np.ndarray) -> np.ndarray:
        r1, r2 = ptc(float(x[0])), ptc(float(x[1]))
        current = 30.0 / (r1 + r2 + 100.0)
        return np.array([current**2 * r - (t - TA) / 100.0 for r, t in ((r1, x[0]), (r2, x[1]))])

    starts = np.concatenate([np.arange(25, 118, 4.0), np.arange(118, 124, 0.25)])
    found: list[np.ndarray] = []
    for a in starts:
        for b in starts:
            x, _, ier, _ = fsolve(surplus, [a, b], full_output=True, xtol=1e-12)
            solved = ier == 1 and np.max(np.abs(surplus(x))) < 1e-9
            if solved and not any(np.max(np.abs(x - y)) < 1e-4 for y in found):
                found.append(x)
    return [(float(x[0]), float(x[1]), stable_at(surplus, x)) for x in found]


@pytest.mark.parametrize(
    ("deck_text", "note_text", "reference", "count", "lowest"),
    [
        (SHARED_DECK, SHARED_NOTE, shared_states, 4, True),
        (SERIES_DECK, SERIES_NOTE, series_states, 3, False),
    ],
    ids=["sharing-a-node", "in-series"],
)
def test_two_parts_are_scanned_together(
    tmp_path: Path, deck_text: str, note_text: str,
    reference: Callable[[], list[tuple[float, float, bool]]], count: int, lowest: bool,
) -> None:  # fmt: skip
    stable = sorted((a, b) for a, b, ok in reference() if ok)
    assert len(stable) == count
    deck, note = write(tmp_path, deck_text, note_text)
    outcome = runner.run(deck, note, runner.RunOptions())
    message = warning(outcome.prepared.findings, "stable steady states together")
    found = sorted(tuple(g) for g in listed(message))
    assert len(found) == count
    for got, want in zip(found, stable, strict=True):
        assert got == pytest.approx(want, abs=0.05)
    reported = tuple(outcome.results.part(n).temperature for n in ("RP", "RQ"))
    if lowest:
        # Heating either part only warms the other (a shared node): the lowest in both is
        # where a start from cold settles, and it is the one reported.
        assert reported == pytest.approx(min(stable), abs=0.05)
        assert "is the lowest in both" in message
    else:
        assert "none is the lowest in both" in message
        assert any(reported == pytest.approx(s, abs=0.05) for s in stable)


def test_holding_one_part_alone_misses_a_state_of_the_pair(tmp_path: Path) -> None:
    # Why two parts are held together: with RQ free, the sweep holding RP follows RQ's cold
    # branch and never sees the state where RQ has tripped (and the other way round).
    stable = sorted((a, b) for a, b, ok in series_states() if ok)
    deck, note = write(tmp_path, SERIES_DECK, SERIES_NOTE)
    inputs = load_inputs(deck, note)
    prepared = prepare(inputs, RunOptions())
    assert prepared.emitted.circuit is not None
    for part in prepared.emitted.circuit.parts:
        assert 0 < len(scan(prepared, RunOptions(), part).stable) < len(stable)


# --- three or more -------------------------------------------------------------------------

THREE_PTC = (
    "three ptcs in series\nV1 rail 0 DC 34\nRP rail a 10\nRQ a b 10\nRR b c 10\nRL c 0 100\n"
    ".op\n.end\n"
)
THREE_FILM = (
    "three film resistors\nV1 rail 0 DC 10\nR1 rail a 100\nR2 a b 220\nR3 b 0 330\n.op\n.end\n"
)


def note_for(names: list[str], body: str) -> str:
    return f"schema = 1\n[ambient]\ntemperature = {TA}\n" + "".join(
        f"[part.{n}]\n{body}" for n in names
    )


def test_three_switching_parts_say_the_scan_cannot_decide(tmp_path: Path) -> None:
    body = 'model = "ptc"\nt_switch = 120.0\ndecade = 1.0\nrth = 100.0\ncth = 0.5\n'
    deck, note = write(tmp_path, THREE_PTC, note_for(["RP", "RQ", "RR"], body))
    outcome = runner.run(deck, note, runner.RunOptions())
    warning(outcome.prepared.findings, "cannot decide")


def test_three_film_resistors_have_nothing_to_say(tmp_path: Path) -> None:
    # 50 ppm/K and a few hundred milliwatts: every held part's surplus falls all the way.
    body = "model = \"linear\"\ntc1_ppm = 50\nrth = 100.0\ncth = 0.1\n"
    deck, note = write(tmp_path, THREE_FILM, note_for(["R1", "R2", "R3"], body))
    outcome = runner.run(deck, note, runner.RunOptions())
    assert not [f for f in outcome.prepared.findings if "steady state" in f.message]


# --- every command that reports an operating point -----------------------------------------


@pytest.mark.parametrize(
    "command",
    [["run"], ["run", "--op"], ["check"], ["sweep", "--op", "--ambient", "20:30:10"]],
)
def test_every_command_says_so(tmp_path: Path, command: list[str]) -> None:
    deck, note = write(tmp_path, PTC_DECK, PTC_NOTE)
    result = CliRunner().invoke(main, [*command, deck, "-a", note])
    assert result.exit_code == 0, result.output
    lines = [line for line in result.output.splitlines() if "stable steady states" in line]
    corners = 2 if command[0] == "sweep" else 1
    assert len(lines) == corners, result.output
    if command[0] == "sweep":
        # Each corner's states differ with its ambient: the line names its corner.
        assert sorted(line.split(":")[0] for line in lines) == ["corner 0", "corner 1"]


# --- which of two parts' states is reported ------------------------------------------------


def fake_results(temps: dict[str, float]) -> object:
    """The one thing pair() reads of a run: each part's temperature."""
    return SimpleNamespace(part=lambda name: SimpleNamespace(temperature=temps[name]))


def states_of(*pairs: tuple[float, float]) -> list[State]:
    return [State(p, np.array(p), True) for p in pairs]


def test_pair_replaces_a_state_above_the_lowest() -> None:
    parts = [SimpleNamespace(path=n, location=None) for n in ("RP", "RQ")]
    found = states_of((72.6, 72.6), (85.5, 124.3), (124.3, 85.5))
    said = pair(fake_results({"RP": 124.3, "RQ": 85.5}), parts, found, NGSPICE)
    assert said.instead is not None and list(said.instead) == [72.6, 72.6]
    assert "lowest in both" in said.how and "3 stable steady states together" in said.why
    kept = pair(fake_results({"RP": 72.6, "RQ": 72.6}), parts, found, NGSPICE)
    assert kept.instead is None and "is the lowest in both" in kept.findings[0].message


def test_pair_without_a_lowest_keeps_the_reported_state() -> None:
    parts = [SimpleNamespace(path=n, location=None) for n in ("RP", "RQ")]
    found = states_of((87.5, 87.5), (121.8, 26.4), (26.4, 121.8))
    said = pair(fake_results({"RP": 121.8, "RQ": 26.4}), parts, found, NGSPICE)
    assert said.instead is None
    assert "none is the lowest in both" in said.findings[0].message
    one = pair(fake_results({"RP": 87.5, "RQ": 87.5}), parts, found[:1], NGSPICE)
    assert one == Statement()


def test_a_chosen_state_is_solved_again_and_said(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # When the scan picks another stable state than ngspice's (here forced: the tripped one
    # of the PTC deck, brentq's upper stable root), ngspice solves from it and the reader is
    # told which states exist and why that one is reported.
    upper = [t for t, ok in roots(loaded(ptc_r, 30.0, 100.0), TA, 400.0) if ok][-1]
    said = Statement((), np.array([upper]), "RP has 2 stable steady states", "the upper one")
    monkeypatch.setattr(verify, "statement", lambda *args: said)
    deck, note = write(tmp_path, PTC_DECK, PTC_NOTE)
    outcome = runner.run(deck, note, runner.RunOptions())
    assert outcome.results.part("RP").temperature == pytest.approx(upper, abs=0.05)
    message = warning(outcome.prepared.findings, "RP has 2 stable steady states")
    assert message.endswith("heatweave reports instead the upper one, which balances")
