"""Thermal runaway: the fold of the power balance against scipy's solvers.

An NTC (Beta equation) straight across an ideal voltage source V with thermal resistance
Rth to ambient Ta dissipates P(T) = V^2 / R(T).  Its steady states solve T - Ta = Rth P(T);
they fold over (saddle-node) where also 1 = Rth dP/dT.  That pair is solved here with
scipy.optimize.fsolve, independently of heatweave and ngspice; the critical voltage is the
largest V with a steady state.  Beyond it heatweave must report a runaway naming the part;
below it the run must converge to the low root of the power balance (scipy brentq).
"""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq, fsolve

from heatweave.annotation import load
from heatweave.errors import EXIT_THERMAL_RUNAWAY, ThermalRunawayError
from heatweave.run import runner
from heatweave.run.diagnosis import RunawayError
from heatweave.run.runaway import (
    TIGHT,
    driven_deck,
    driving_point,
    first_jump,
    last_on_branch,
)
from heatweave.simulators import get_simulator
from heatweave.spice.reader import read
from heatweave.thermal.circuit import build_circuit

KELVIN = 273.15


def beta_r(t_c: float, r25: float, beta: float) -> float:
    """Beta equation R = R25 exp(B (1/T - 1/T25)), kelvin (thermistor Beta model)."""
    return r25 * math.exp(beta * (1.0 / (t_c + KELVIN) - 1.0 / (25.0 + KELVIN)))


def ntc_fold(r25: float, beta: float, rth: float, ta: float) -> tuple[float, float]:
    """(critical voltage, fold temperature) by fsolve on balance and unit loop gain."""

    def equations(x: list[float]) -> list[float]:
        t, v = x
        r = beta_r(t, r25, beta)
        p = v * v / r
        dp_dt = p * beta / (t + KELVIN) ** 2  # d/dT of V^2/R for the Beta equation
        return [t - ta - rth * p, 1.0 - rth * dp_dt]

    t0 = ta + 20.0
    t, v = fsolve(equations, [t0, math.sqrt(20.0 / rth * beta_r(t0, r25, beta))], xtol=1e-12)
    return float(v), float(t)


def write_ntc(tmp_path: Path, volts: float, r25: float, beta: float, rth: float, ta: float,
              analysis: str = ".op") -> tuple[str, str]:  # fmt: skip
    deck = tmp_path / "ntc.cir"
    deck.write_text(
        f"thermistor across a supply\nV1 rail 0 DC {volts!r}\nRT rail 0 {r25!r}\n{analysis}\n.end\n"
    )
    note = tmp_path / "ntc.thermal.toml"
    note.write_text(
        f'schema = 1\n[ambient]\ntemperature = {ta!r}\n[part.RT]\nmodel = "ntc-beta"\n'
        f"beta = {beta!r}\nrth = {rth!r}\ncth = 0.05\n"
    )
    return str(deck), str(note)


# (R25 ohm, Beta K, Rth K/W, ambient degC): thermistor values of common practice.  At the
# last one ngspice's sweep stalls past the fold for a few steps (accepting points on the
# flat residual there); the continuation must cut those off.
NTC_CASES = [
    (1000.0, 3500.0, 100.0, 25.0),
    (10e3, 3950.0, 150.0, 40.0),
    (220.0, 3000.0, 60.0, -10.0),
    (220.0, 3000.0, 60.0, 0.0),
]
FOLD_CASES = NTC_CASES


@pytest.mark.parametrize(("r25", "beta", "rth", "ta"), FOLD_CASES)
def test_ntc_across_supply_runs_away_at_the_fold(
    tmp_path: Path, r25: float, beta: float, rth: float, ta: float
) -> None:
    v_crit, t_fold = ntc_fold(r25, beta, rth, ta)
    deck, note = write_ntc(tmp_path, 1.2 * v_crit, r25, beta, rth, ta)
    with pytest.raises(ThermalRunawayError) as caught:
        runner.run(deck, note, runner.RunOptions())
    err = caught.value
    assert err.exit_code == EXIT_THERMAL_RUNAWAY
    assert isinstance(err, RunawayError) and err.diagnosis is not None
    found = err.diagnosis
    assert found.part == "RT"
    assert found.source is not None and found.source[0] == "V1"
    # The fold is placed from held temperatures (run/fold.py): the drive to ngspice's
    # reltol (1e-6, run/diagnosis_decks.py TIGHT), where the loop gain is 1 (fsolve's
    # second equation above).
    assert found.source[1] == pytest.approx(v_crit, rel=1e-5)
    assert found.drive == pytest.approx((v_crit / (1.2 * v_crit)) ** 2, rel=2e-5)
    assert found.temperature == pytest.approx(t_fold, abs=0.05)
    assert found.loop_gain == pytest.approx(1.0, abs=1e-4)
    assert "RT runs away thermally" in err.message
    assert "loop gain" in err.message and "%" in err.message


@pytest.mark.parametrize(("r25", "beta", "rth", "ta"), NTC_CASES)
def test_stable_ntc_converges_to_the_low_root(
    tmp_path: Path, r25: float, beta: float, rth: float, ta: float
) -> None:
    v_crit, t_fold = ntc_fold(r25, beta, rth, ta)
    volts = 0.8 * v_crit
    deck, note = write_ntc(tmp_path, volts, r25, beta, rth, ta)
    outcome = runner.run(deck, note, runner.RunOptions())
    expected = brentq(lambda t: t - ta - rth * volts**2 / beta_r(t, r25, beta), ta, t_fold)
    assert outcome.results.part("RT").temperature == pytest.approx(expected, abs=1e-3)


def ptc_r(t_c: float, r_cold: float, t_switch: float, decade: float, r_max: float) -> float:
    """The ptc model's published form (src/heatweave/tempmodels/ptc.py docstring):
    R = r_cold (1 + F) / (1 + F r_cold / r_max), F = 10^((T - t_switch) / decade)."""
    f = 10.0 ** ((t_c - t_switch) / decade)
    return float(r_cold * (1.0 + f) / (1.0 + f * r_cold / r_max))


def test_ptc_fed_by_current_source_runs_away(tmp_path: Path) -> None:
    r_cold, t_switch, decade, r_max, rth, ta = 47.0, 100.0, 10.0, 47e4, 80.0, 25.0

    def equations(x: list[float]) -> list[float]:
        t, amps = x
        h = 1e-4
        dr = (ptc_r(t + h, r_cold, t_switch, decade, r_max)
              - ptc_r(t - h, r_cold, t_switch, decade, r_max)) / (2 * h)  # fmt: skip
        return [t - ta - rth * amps**2 * ptc_r(t, r_cold, t_switch, decade, r_max),
                1.0 - rth * amps**2 * dr]  # fmt: skip

    t_fold, i_crit = (float(x) for x in fsolve(equations, [85.0, 0.12], xtol=1e-12))
    deck = tmp_path / "ptc.cir"
    deck.write_text(f"fuse fed by a current\nI1 0 a DC {1.2 * i_crit!r}\nRP a 0 47\n.op\n.end\n")
    note = tmp_path / "ptc.thermal.toml"
    note.write_text(
        'schema = 1\n[part.RP]\nmodel = "ptc"\nr25 = 47.0\nt_switch = 100.0\ndecade = 10.0\n'
        "r_max = 47e4\nrth = 80.0\n"
    )
    with pytest.raises(RunawayError) as caught:
        runner.run(str(deck), str(note), runner.RunOptions())
    found = caught.value.diagnosis
    assert found is not None and found.part == "RP" and found.source is not None
    assert found.source[1] == pytest.approx(i_crit, rel=2e-4)
    assert found.temperature == pytest.approx(t_fold, abs=1.5)


def test_transient_runaway_names_part_and_time(tmp_path: Path) -> None:
    v_crit, _ = ntc_fold(1000.0, 3500.0, 100.0, 25.0)
    deck, note = write_ntc(tmp_path, 1.5 * v_crit, 1000.0, 3500.0, 100.0, 25.0, ".tran 10m 60")
    with pytest.raises(RunawayError) as caught:
        runner.run(deck, note, runner.RunOptions())
    message = caught.value.message
    assert "transient" in message and "RT passed 1000 degC between t = " in message
    assert "no steady state exists" in message


@pytest.mark.parametrize(
    ("columns", "expected"),
    [
        # a smooth fold T = 60 - 30 sqrt(1 - lambda): steps grow by at most ~2.4 (no jump)
        ([60 - 30 * math.sqrt(1 - x) for x in np.linspace(0, 1, 101)], None),
        # the same branch, then a leap to a far branch at the 72nd point
        ([25 + 30 * x for x in np.linspace(0, 0.7, 71)] + [1e6, 1.1e6], 71),
        # a linear heating ramp of 0.1 K per step: never a jump
        ([25 + 0.1 * k for k in range(50)], None),
        ([25.0, 26.0, float("nan")], 2),
    ],
)
def test_first_jump(columns: list[float], expected: int | None) -> None:
    assert first_jump(np.array([columns])) == expected


# The drive's own cards, before .end (names from emit/names.py).
DRIVE_CARDS = f"Vhw_drive hw_drive 0 DC 0\n.global hw_drive\n{TIGHT}\n"


@pytest.mark.parametrize(
    ("text", "want"),
    [
        # a top-level part: its heat source scaled, its electrical source left alone, and a
        # deck's own source named alike (not in the list) untouched
        (
            "title\nBhw_r1 a b I = V(a,b)/(R)\nBhw_p_r1 0 hw_t_r1 I = V(a,b)*V(a,b)/(R)\n"
            "Bhw_p_mine 0 out I = 1m\n.end\n",
            "title\nBhw_r1 a b I = V(a,b)/(R)\n"
            "Bhw_p_r1 0 hw_t_r1 I = V(hw_drive)*(V(a,b)*V(a,b)/(R))\n"
            f"Bhw_p_mine 0 out I = 1m\n{DRIVE_CARDS}.end\n",
        ),
        # a part inside a subcircuit copy; comments above it and above .end kept in place,
        # CRLF kept, an unknown dot card untouched
        (
            "title\r\n.subckt cell__hw_x1 p q\r\n* heat\r\n"
            "Bhw_p_x1_r2 0 hw_t_x1_r2 I = (V(c)-V(d))*I(Vhw_s_x1_r2_1)\r\n.ends\r\n"
            ".frob 1 {2}\r\n* bye\r\n.end\r\n",
            "title\r\n.subckt cell__hw_x1 p q\r\n* heat\r\n"
            "Bhw_p_x1_r2 0 hw_t_x1_r2 I = V(hw_drive)*((V(c)-V(d))*I(Vhw_s_x1_r2_1))\r\n"
            f".ends\r\n.frob 1 {{2}}\r\n{DRIVE_CARDS}* bye\r\n.end\r\n",
        ),
        # the name in any case, as ngspice compares names
        (
            "t\nBHW_P_R1 0 hw_t_r1 i=1m\n.end\n",
            f"t\nBHW_P_R1 0 hw_t_r1 i=V(hw_drive)*(1m)\n{DRIVE_CARDS}.end\n",
        ),
    ],
)
def test_driven_deck_scales_every_injected_power(text: str, want: str) -> None:
    deck = read(text)
    out = driven_deck(deck, ["Bhw_p_r1", "Bhw_p_x1_r2"])
    assert out.write() == want
    assert deck.write() == text  # the prepared deck is not changed


@pytest.mark.ngspice
def test_driven_deck_scales_the_heat_by_the_drive() -> None:
    """ngspice on a driven deck: R1 = 100 ohm across 2 V dissipates 2^2/100 = 40 mW (Joule),
    into a 50 K/W path: the hot node rises drive * 2 K.  The part inside a subcircuit (10 V
    across 100 ohm: 1 W into 5 K/W) reads the global drive node: drive * 5 K."""
    text = (
        "driven\nV1 a 0 2\nR1 a 0 100\nBhw_p_r1 0 t1 I = V(a)*V(a)/100\nRth1 t1 0 50\n"
        ".subckt cell p\nRx p 0 100\nBhw_p_x1_rx 0 t2 I = V(p)*V(p)/100\nRth2 t2 0 5\n.ends\n"
        "V2 b 0 10\nX1 b cell\n.op\n.end\n"
    )
    deck = driven_deck(read(text), ["Bhw_p_r1", "Bhw_p_x1_rx"])
    sim = get_simulator("batch").run(
        deck.write(), analyses=("dc vhw_drive 0 1 0.25",), deck_analyses=False
    )
    plot = sim.plots[-1]
    drive = np.real(np.asarray(plot.scale_values))
    assert drive == pytest.approx([0, 0.25, 0.5, 0.75, 1])
    assert np.real(np.asarray(plot["v(t1)"])) == pytest.approx(2 * drive, abs=1e-9)
    assert np.real(np.asarray(plot["v(x1.t2)"])) == pytest.approx(5 * drive, abs=1e-9)


def test_driving_point_resistances(tmp_path: Path) -> None:
    """Two parts on one board node, the board to ambient, plus a direct coupling path:
    Z solved by hand with series/parallel rules (Kirchhoff)."""
    from heatweave.emit.emitter import load_inputs

    deck = tmp_path / "two.cir"
    deck.write_text("two\nV1 a 0 1\nR1 a b 10\nR2 b 0 10\n.op\n.end\n")
    note = tmp_path / "two.thermal.toml"
    note.write_text(
        "schema = 1\n[node.board]\nrth = 20.0\n"
        '[part.R1]\nmodel = "linear"\ntc1 = 0.001\nrth = 50.0\nto = "board"\n'
        '[part.R2]\nmodel = "linear"\ntc1 = 0.001\nrth = 30.0\nto = "board"\n'
    )
    inputs = load_inputs(str(deck), str(note))
    circuit, _ = build_circuit(load(str(note)), inputs.bound, inputs.index)
    names, z = driving_point(circuit)
    r1, r2, board = names.index("hw_t_r1"), names.index("hw_t_r2"), names.index("hw_n_board")
    assert z[r1, r1] == pytest.approx(70.0)
    assert z[r2, r2] == pytest.approx(50.0)
    assert z[r1, r2] == pytest.approx(20.0)  # heat of R2 raises R1 through the board only
    assert z[board, board] == pytest.approx(20.0)


def test_coupled_thermistors_in_subcircuits(tmp_path: Path) -> None:
    """Two Beta NTCs (in two instances of one subcircuit) across one 12 V rail, on one board
    node.  Steady state: T_i = Ta + sum_j Z_ij P_j with Z = [[120, 20], [20, 80]] K/W (own
    path plus board, by hand); the fold is where also det(I - Z diag(dP_i/dT_i)) = 0.
    Solved for (T1, T2, V) with fsolve; heatweave's drive must be (V*/12)^2."""
    r25, beta, ta, volts = 1000.0, 3500.0, 25.0, 12.0
    z = np.array([[120.0, 20.0], [20.0, 80.0]])

    def equations(x: list[float]) -> list[float]:
        t1, t2, v = x
        p = np.array([v * v / beta_r(t, r25, beta) for t in (t1, t2)])
        dp = np.diag([p[k] * beta / (t + KELVIN) ** 2 for k, t in enumerate((t1, t2))])
        rise = np.array([t1, t2]) - ta - z @ p
        return [float(rise[0]), float(rise[1]), float(np.linalg.det(np.eye(2) - z @ dp))]

    t1, _t2, v_crit = fsolve(equations, [50.0, 40.0, 8.0], xtol=1e-12)
    deck = tmp_path / "sub.cir"
    deck.write_text(
        "modules\nV1 rail 0 DC 12\nX1 rail 0 mod\nX2 rail 0 mod\n"
        ".subckt mod a b\nRT a b 1k\n.ends\n.op\n.end\n"
    )
    note = tmp_path / "sub.thermal.toml"
    note.write_text(
        'schema = 1\n[node.board]\nrth = 20.0\n[part."X1.RT"]\nmodel = "ntc-beta"\n'
        'beta = 3500\nrth = 100.0\nto = "board"\n[part."X2.RT"]\nmodel = "ntc-beta"\n'
        'beta = 3500\nrth = 60.0\nto = "board"\n'
    )
    with pytest.raises(RunawayError) as caught:
        runner.run(str(deck), str(note), runner.RunOptions())
    found = caught.value.diagnosis
    assert found is not None and found.part == "X1.RT"
    assert found.drive == pytest.approx((float(v_crit) / volts) ** 2, rel=4e-4)
    assert found.temperature == pytest.approx(float(t1), abs=1.5)
    assert 0.9 < found.circuit_gain <= 1.0 + 1e-3
    assert found.source is None  # subcircuit instances: no single-source equivalent claimed


@pytest.mark.parametrize(("stalled", "expected_end"), [(0, 29), (3, 29), (1, 29)])
def test_points_past_the_fold_are_cut(stalled: int, expected_end: int) -> None:
    # A saddle-node fold: T - T_fold = -sqrt(d_fold - d), the branch of its normal form
    # (S. H. Strogatz, Nonlinear Dynamics and Chaos, section 3.1; from memory), sampled up
    # to the fold, then points where a stalled solver sat near the fold temperature.
    d = np.linspace(0.0, 0.29, 30)
    temps = 50.0 - np.sqrt(0.29 - d + 1e-12)
    stall = temps[-1] + np.array([0.002, 0.001, 0.003])[:stalled]
    row = np.concatenate([temps, stall])[None, :]
    assert last_on_branch(row, row.shape[1] - 1) == expected_end


def test_runaway_on_an_ac_drive_does_not_call_the_unheated_op_its_steady_state(
    tmp_path: Path,
) -> None:
    # A sine's mean power into R is A^2 / 2R (closed form), so the fold of the power balance
    # (scipy fsolve above) is crossed when A / sqrt(2) passes the DC critical voltage.  The
    # operating point has the sine at its DC value, 0 V: nothing dissipates there, and the
    # error once said "its steady state at full dissipation lies at 25 degC" (the ambient).
    v_crit, _t_fold = ntc_fold(1000.0, 3500.0, 100.0, 25.0)
    amplitude = 1.2 * math.sqrt(2.0) * v_crit
    deck = tmp_path / "line.cir"
    deck.write_text(
        f"thermistor on an ac line\nV1 rail 0 SIN(0 {amplitude!r} 50)\nRT rail 0 1000\n"
        ".tran 1m 5\n.end\n"
    )
    note = tmp_path / "line.thermal.toml"
    note.write_text(
        'schema = 1\n[ambient]\ntemperature = 25.0\n[part.RT]\nmodel = "ntc-beta"\n'
        "beta = 3500\nrth = 100.0\ncth = 0.005\n"
    )
    with pytest.raises(ThermalRunawayError) as caught:
        runner.run(str(deck), str(note), runner.RunOptions())
    err = caught.value
    assert err.exit_code == EXIT_THERMAL_RUNAWAY
    assert "RT passed 1000 degC" in err.message
    assert "its steady state at full dissipation" not in err.message
    assert "every source at its DC value" in err.message
