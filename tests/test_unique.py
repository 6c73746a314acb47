"""The proof that an operating point is the only steady state (issue 12, section 1).

References, independent of heatweave and ngspice:

* the circuit: nodal analysis written here with numpy (resistors, voltage and current
  sources; :func:`powers`), the textbook modified nodal formulation;
* the steady states: scipy.optimize.fsolve on ``T - Ta - Z P(R(T)) = 0`` from many starting
  points in the box, every root with a residual below 1e-9 K kept (distinct when 1e-4 K
  apart); scipy.optimize.brentq between the sign changes of a 0.01 K grid for one part;
* the inequality the proof rests on (``-diag(P) <= dP/d ln R <= diag(P)``, derived in
  :mod:`heatweave.run.unique` from the compensation theorem and Tellegen's theorem) is
  checked on random networks against central differences of the numpy solution.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
from click.testing import CliRunner
from scipy.optimize import brentq, fsolve

from heatweave.cli import main
from heatweave.emit.emitter import load_inputs
from heatweave.run import runner
from heatweave.run.unique import Curve, certify, curve, power_bound, prove
from heatweave.tempmodels.base import TempModel
from heatweave.tempmodels.registry import get

TA = 25.0
FloatArray = np.ndarray


@dataclass(frozen=True)
class Net:
    """A resistive circuit: node 0 is ground; sources as (from, to, value)."""

    nodes: int
    resistors: tuple[tuple[int, int], ...]
    vsources: tuple[tuple[int, int, float], ...]
    isources: tuple[tuple[int, int, float], ...]  # current flows from -> to inside


def powers(net: Net, r: FloatArray) -> FloatArray:
    """Every resistor's dissipation by modified nodal analysis (numpy)."""
    n, m = net.nodes, len(net.vsources)
    a = np.zeros((n + m, n + m))
    rhs = np.zeros(n + m)

    def stamp(i: int, j: int, value: float) -> None:
        if i and j:
            a[i - 1, j - 1] += value

    for (p, q), ohms in zip(net.resistors, r, strict=True):
        g = 1.0 / ohms
        stamp(p, p, g), stamp(q, q, g), stamp(p, q, -g), stamp(q, p, -g)
    for k, (p, q, volts) in enumerate(net.vsources):
        if p:
            a[p - 1, n + k] += 1
            a[n + k, p - 1] += 1
        if q:
            a[q - 1, n + k] -= 1
            a[n + k, q - 1] -= 1
        rhs[n + k] = volts
    for p, q, amps in net.isources:
        if p:
            rhs[p - 1] -= amps
        if q:
            rhs[q - 1] += amps
    v = np.concatenate(([0.0], np.linalg.solve(a, rhs)[:n]))
    drop = np.array([v[p] - v[q] for p, q in net.resistors])
    return np.asarray(drop**2 / r, dtype=float)


def random_net(rng: np.random.Generator) -> Net:
    """A connected random network: a spanning tree plus chords, 1-2 voltage sources from
    ground (no loop of sources), 0-2 current sources."""
    n = int(rng.integers(2, 7))
    edges = [(int(rng.integers(0, k)), k) for k in range(1, n + 1)]
    edges += [tuple(int(x) for x in rng.choice(n + 1, 2, replace=False))
              for _ in range(int(rng.integers(0, n + 1)))]  # fmt: skip
    fed = rng.choice(np.arange(1, n + 1), int(rng.integers(1, 3)), replace=False)
    volts = tuple((int(p), 0, float(np.exp(rng.uniform(math.log(0.3), math.log(20)))))
                  for p in fed)  # fmt: skip
    amps = tuple((int(rng.integers(0, n + 1)), int(rng.integers(0, n + 1)),
                  float(rng.uniform(-0.05, 0.05)))
                 for _ in range(int(rng.integers(0, 3))))  # fmt: skip
    return Net(n, tuple(edges), volts, amps)  # type: ignore[arg-type]


# --- the inequality and the power bound -----------------------------------------------------


@pytest.mark.parametrize("seed", range(40))
def test_power_sensitivity_is_within_plus_minus_the_powers(seed: int) -> None:
    rng = np.random.default_rng(seed)
    net = random_net(rng)
    r = np.exp(rng.uniform(0, math.log(1e4), len(net.resistors)))
    p = powers(net, r)
    h = 1e-6
    m = np.column_stack([
        (powers(net, r * np.exp(h * e)) - powers(net, r * np.exp(-h * e))) / (2 * h)
        for e in np.eye(len(r))
    ])  # fmt: skip
    scale = max(float(p.max()), 1e-12)
    assert np.allclose(m, m.T, atol=1e-5 * scale)  # reciprocity
    for sign in (1, -1):
        assert np.linalg.eigvalsh(np.diag(p) + sign * (m + m.T) / 2).min() >= -1e-5 * scale


@pytest.mark.parametrize("seed", range(40))
def test_power_bound_holds_over_the_box(seed: int) -> None:
    rng = np.random.default_rng(100 + seed)
    net = random_net(rng)
    k = len(net.resistors)
    star = np.exp(rng.uniform(0, math.log(1e3), k))
    below, above = rng.uniform(0, 1.5, k), rng.uniform(0, 1.5, k)
    spread = float(max(below.max(), above.max()))
    p_star = powers(net, star)
    most = power_bound(p_star, float(p_star.sum()), spread)
    corners = np.array(np.meshgrid(*[(-b, a) for b, a in zip(below, above, strict=True)]))
    shifts = np.concatenate([corners.reshape(k, -1).T,
                             rng.uniform(-below, above, (300, k))])  # fmt: skip
    worst = max(float(np.max(powers(net, star * np.exp(d)) / most)) for d in shifts)
    assert worst <= 1 + 1e-9
    assert worst > 0.05  # the bound is not vacuous on these boxes


# --- the proof against every steady state scipy finds ---------------------------------------


def model(kind: str, ohms: float, rng: np.random.Generator) -> TempModel:
    if kind == "ptc":
        params = {"t_switch": float(rng.uniform(60, 150)), "decade": float(rng.uniform(3, 8))}
        return get("ptc").from_params(params, ohms, None)
    return get("linear").from_params({"tc1": float(rng.uniform(-3e-3, 6e-3))}, ohms, 25.0)


def states(
    surplus: Callable[[FloatArray], FloatArray], low: FloatArray, high: FloatArray,
    rng: np.random.Generator, starts: int = 60,
) -> list[FloatArray]:  # fmt: skip
    """Distinct roots of *surplus* in the box [low, high] by fsolve from random starts."""
    found: list[FloatArray] = []
    points = [low, high, *rng.uniform(low, high, (starts, len(low)))]
    for start in points:
        x, _, ier, _ = fsolve(surplus, start, full_output=True, xtol=1e-12)
        inside = np.all(x >= low - 1e-9) and np.all(x <= high + 1e-9)
        solved = ier == 1 and inside and np.max(np.abs(surplus(x))) < 1e-9
        if solved and not any(np.max(np.abs(x - y)) < 1e-4 for y in found):
            found.append(x)
    return found


def test_proof_never_claims_one_state_where_scipy_finds_two() -> None:
    rng = np.random.default_rng(7)
    proven = several = 0
    for _ in range(100):
        net = random_net(rng)
        count = len(net.resistors)
        kinds = ["ptc" if rng.random() < 0.15 else "linear" for _ in range(count)]
        nominal = np.exp(rng.uniform(math.log(10), math.log(1e3), count))
        models = [model(k, r, rng) for k, r in zip(kinds, nominal, strict=True)]
        # Each part to ambient, all also through a shared node: Z is full.
        g = np.zeros((count + 1, count + 1))
        rth = rng.uniform(20, 200, count)
        for i in range(count):
            g[i, i] += 1 / rth[i]
            g[i, count] -= 1 / 200.0
            g[count, i] -= 1 / 200.0
            g[i, i] += 1 / 200.0
            g[count, count] += 1 / 200.0
        g[count, count] += 1 / 30.0
        z = np.linalg.inv(g)[:count, :count]
        curves: list[Curve | None] = [curve(m, TA) for m in models]
        assert all(c is not None for c in curves)
        high = np.array([c.t[-1] for c in curves if c is not None])
        low = np.full(count, TA)

        def resistances(t: FloatArray, models: list[TempModel] = models) -> FloatArray:
            return np.array([m.resistance(float(x)) for m, x in zip(models, t, strict=True)])

        def surplus(t: FloatArray, net: Net = net, z: FloatArray = z) -> FloatArray:
            r = resistances(t)
            if np.any(r <= 0):
                return np.full(len(t), 1e6)
            return np.asarray(t - TA - z @ powers(net, r), dtype=float)

        found = states(surplus, low, high, rng, starts=30)
        if not found:
            continue
        cold = min(found, key=lambda x: float(x.sum()))
        bound = certify(lambda p, z=z: z @ p, curves, list(models), cold,
                        powers(net, resistances(cold)), TA)  # fmt: skip
        if len(found) > 1:
            several += "ptc" not in kinds  # two states without a switching part
            assert not bound.proven, (found, bound)
        if bound.proven:
            proven += 1
            assert bound.gain < 1
    # The family holds both kinds, so the check above can fail either way.
    assert proven >= 8 and several >= 5, (proven, several)


# --- decks, through ngspice -----------------------------------------------------------------

LADDER = 10
VOLTS, SERIES, SHUNT, RTH, TC1 = 12.0, 100.0, 2000.0, 150.0, 3.9e-3


def ladder_deck() -> str:
    cards = [f"ladder of {LADDER} copper-like resistors", f"V1 n0 0 DC {VOLTS:g}"]
    for i in range(1, LADDER + 1):
        cards += [f"R{i} n{i - 1} n{i} {SERIES:g}", f"RS{i} n{i} 0 {SHUNT:g}"]
    return "\n".join([*cards, ".op", ".end", ""])


def ladder_note(board: bool) -> str:
    text = f"schema = 1\n[ambient]\ntemperature = {TA}\n"
    if board:
        text += "[node.board]\nrth = 10.0\ncth = 1.0\n"
    for i in range(1, LADDER + 1):
        text += f'[part.R{i}]\nmodel = "linear"\ntc1 = {TC1}\nrth = {RTH}\ncth = 0.1\n'
        text += 'to = "board"\n' if board else ""
    return text


def ladder_surplus(board: bool) -> Callable[[FloatArray], FloatArray]:
    """The deck's power balance: numpy nodal analysis of the ladder (the source on an extra
    node n0, renumbered LADDER + 1), linear R(T) = R0 (1 + tc1 (T - 25))."""
    series = [(LADDER + 1 if i == 1 else i - 1, i) for i in range(1, LADDER + 1)]
    net = Net(LADDER + 1, tuple(series + [(i, 0) for i in range(1, LADDER + 1)]),
              ((LADDER + 1, 0, VOLTS),), ())  # fmt: skip
    z = np.diag(np.full(LADDER, RTH)) + (10.0 if board else 0.0)

    def surplus(t: FloatArray) -> FloatArray:
        r = np.concatenate([SERIES * (1 + TC1 * (t - 25.0)), np.full(LADDER, SHUNT)])
        if np.any(r <= 0):
            return np.full(LADDER, 1e6)
        return np.asarray(t - TA - z @ powers(net, r)[:LADDER], dtype=float)

    return surplus


def write(tmp_path: Path, deck: str, note: str) -> tuple[str, str]:
    (tmp_path / "d.cir").write_text(deck)
    (tmp_path / "d.thermal.toml").write_text(note)
    return str(tmp_path / "d.cir"), str(tmp_path / "d.thermal.toml")


@pytest.mark.parametrize("board", [False, True], ids=["own-paths", "shared-board"])
def test_ladder_is_proven_and_scipy_finds_one_state(tmp_path: Path, board: bool) -> None:
    deck, note = write(tmp_path, ladder_deck(), ladder_note(board))
    outcome = runner.run(deck, note, runner.RunOptions())
    assert not [f for f in outcome.prepared.findings if "steady state" in f.message]
    circuit = outcome.prepared.emitted.circuit
    assert circuit is not None
    bound = prove(circuit, load_inputs(deck, note).index, outcome.results)
    assert bound.proven and bound.gain < 1
    # scipy: one root from 100 starts between the ambient and 1000 degC (R > 0 throughout).
    found = states(ladder_surplus(board), np.full(LADDER, TA), np.full(LADDER, 1000.0),
                   np.random.default_rng(3), starts=100)  # fmt: skip
    assert len(found) == 1
    reported = [outcome.results.part(f"R{i}").temperature for i in range(1, LADDER + 1)]
    assert reported == pytest.approx(list(found[0]), abs=0.01)


@pytest.mark.parametrize("command", [["run", "--op"], ["check"]])
def test_ladder_commands_give_no_warning(tmp_path: Path, command: list[str]) -> None:
    deck, note = write(tmp_path, ladder_deck(), ladder_note(False))
    result = CliRunner().invoke(main, [*command, deck, "-a", note])
    assert result.exit_code == 0, result.output
    assert "warning" not in result.output and "steady states" not in result.output


PTC_DECK = "ptc with a load\nV1 rail 0 DC 30\nRP rail mid 10\nRL mid 0 100\n.op\n.end\n"
PTC_NOTE = (
    f'schema = 1\n[ambient]\ntemperature = {TA}\n[part.RP]\nmodel = "ptc"\n'
    "t_switch = 120.0\ndecade = 1.0\nrth = 100.0\ncth = 0.5\n"
)


def test_ptc_below_its_trip_drive_is_not_proven(tmp_path: Path) -> None:
    deck, note = write(tmp_path, PTC_DECK, PTC_NOTE)
    inputs = load_inputs(deck, note)
    outcome = runner.run(deck, note, runner.RunOptions())
    circuit = outcome.prepared.emitted.circuit
    assert circuit is not None
    part = circuit.parts[0]
    assert part.model is not None
    rp = part.model

    def surplus(t: float) -> float:  # P(T) - (T - Ta) / Rth, the part behind 100 ohm on 30 V
        r = rp.resistance(t)
        return 30.0**2 * r / (r + 100.0) ** 2 - (t - TA) / 100.0

    grid = np.arange(TA, 400.0, 0.01)
    values = np.array([surplus(t) for t in grid])
    flips = np.flatnonzero(np.sign(values[:-1]) != np.sign(values[1:]))
    roots = [brentq(surplus, grid[k], grid[k + 1]) for k in flips]
    stable = [x for x, k in zip(roots, flips, strict=True) if values[k] > 0]
    assert len(stable) == 2  # brentq: cold and tripped
    bound = prove(circuit, inputs.index, outcome.results)
    assert not bound.proven and bound.gain >= 1
    message = [f.message for f in outcome.prepared.findings if "stable steady states" in f.message]
    assert len(message) == 1 and "2 stable steady states" in message[0]


def many_note(names: list[str], body: str) -> str:
    return f"schema = 1\n[ambient]\ntemperature = {TA}\n" + "".join(
        f"[part.{n}]\n{body}" for n in names
    )


FILM = 'model = "linear"\ntc1_ppm = 100\nrth = 100.0\ncth = 0.1\n'


def test_many_parts_beside_a_diode_say_why_nothing_is_proven(tmp_path: Path) -> None:
    names = [f"R{i}" for i in range(1, 8)]
    cards = "".join(f"{n} n{i} n{i + 1} 100\n" for i, n in enumerate(names))
    deck_text = f"seven and a diode\nV1 n0 0 DC 5\n{cards}D1 n7 0 dmod\n.model dmod d\n.op\n.end\n"
    deck, note = write(tmp_path, deck_text, many_note(names, FILM))
    outcome = runner.run(deck, note, runner.RunOptions())
    found = [f.message for f in outcome.prepared.findings if "may not be the only" in f.message]
    assert len(found) == 1
    assert "resistors and independent sources only, and D1 is not" in found[0]


def test_many_parts_whose_bound_fails_say_so(tmp_path: Path) -> None:
    # Seven NTCs in series across 20 V: their resistance falls 1000-fold up to 1000 degC,
    # so the bound cannot close (whatever the states are).
    names = [f"R{i}" for i in range(1, 8)]
    cards = "".join(f"{n} n{i} n{i + 1} 1k\n" for i, n in enumerate(names))
    deck_text = f"seven ntcs\nV1 n0 0 DC 20\n{cards}RL n7 0 1k\n.op\n.end\n"
    body = 'model = "ntc-beta"\nbeta = 3500\nrth = 100.0\ncth = 0.1\n'
    deck, note = write(tmp_path, deck_text, many_note(names, body))
    outcome = runner.run(deck, note, runner.RunOptions())
    found = [f.message for f in outcome.prepared.findings if "may not be the only" in f.message]
    assert len(found) == 1 and "not below 1" in found[0]


# One part straight across a supply: brentq on T - Ta = Rth V^2 / R(T) over the box.
ONE_PART = {
    # 3900 ppm/K: its dissipation falls as it heats, one root; the proof holds.
    "copper-like": (12.0, 3.9e-3, 1),
    # -4000 ppm/K below Vcrit = sqrt(R0 / (4 |tc1| Rth)) = 7.9 V: a stable root and an
    # unstable one above it (R reaches 0 at 275 degC); the proof must not hold.
    "negative-tc1": (7.0, -4e-3, 2),
}


@pytest.mark.parametrize("case", sorted(ONE_PART))
def test_one_part_across_a_supply(tmp_path: Path, case: str) -> None:
    volts, tc1, count = ONE_PART[case]

    def surplus(t: float) -> float:
        return volts**2 / (100.0 * (1 + tc1 * (t - 25.0))) - (t - TA) / 100.0

    top = 1000.0 if tc1 > 0 else 25.0 + 1 / -tc1 - 1e-6
    grid = np.arange(TA, top, 0.01)
    values = np.array([surplus(t) for t in grid])
    flips = np.flatnonzero(np.sign(values[:-1]) != np.sign(values[1:]))
    roots = [brentq(surplus, grid[k], grid[k + 1], xtol=1e-12) for k in flips]
    assert len(roots) == count
    deck_text = f"one part\nV1 rail 0 DC {volts:g}\nRN rail 0 100\n.op\n.end\n"
    body = f'model = "linear"\ntc1 = {tc1}\nrth = 100.0\ncth = 0.1\n'
    deck, note = write(tmp_path, deck_text, many_note(["RN"], body))
    outcome = runner.run(deck, note, runner.RunOptions())
    assert outcome.results.part("RN").temperature == pytest.approx(roots[0], abs=0.01)
    circuit = outcome.prepared.emitted.circuit
    assert circuit is not None
    bound = prove(circuit, load_inputs(deck, note).index, outcome.results)
    assert bound.proven is (count == 1)


@pytest.mark.parametrize("spread", [1500.0, 1e6, math.inf])
def test_a_spread_too_wide_for_floats_bounds_nothing(spread: float) -> None:
    """A part whose ln R may stray by more than a float's range (tc1 = 1e10 /K: issue 14's
    'no traceback for any input') gives the whole power as the bound, not an overflow."""
    up = np.array([0.4, 0.1])
    bound = power_bound(up, 0.5, spread)
    assert np.all(bound == math.inf)


def test_a_steep_linear_part_gives_no_traceback(tmp_path: Path) -> None:
    """tc1 = 1e10 /K: the full method's proof overflowed (OverflowError, exit 1)."""
    deck = tmp_path / "u.cir"
    deck.write_text("divider\nV1 in 0 DC 5\nR1 in out 1k\nR2 out 0 1k\n.op\n.end\n")
    (tmp_path / "u.thermal.toml").write_text(
        'schema = 1\n[part.R1]\nmodel = "linear"\nrth = 60.0\ntc1 = 1e10\ncth = 0.02\n'
    )
    result = CliRunner().invoke(main, ["run", str(deck), "--method", "full"])
    assert result.exception is None or isinstance(result.exception, SystemExit), result.output
    assert "Traceback" not in result.output
    assert result.exit_code != 1, result.output  # 1 is "a check failed"
