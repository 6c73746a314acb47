"""The emitter against the outside: emitted decks simulated by ngspice 39, compared with
closed forms and with scipy's solvers on the same equations; and the emitter's contract
(untouched cards, comments, determinism, names, hierarchy)."""

from __future__ import annotations

import math
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from heatweave.emit.emitter import emit_files, emit_inputs, load_inputs
from heatweave.emit.sections import stale_reason
from heatweave.errors import EmitError, SimulatorError
from heatweave.run import results
from heatweave.run.prepare import RunOptions
from heatweave.run.runner import run
from heatweave.simulators import get_simulator
from heatweave.spice.reader import read

FIXTURES = Path(__file__).parent / "fixtures" / "emit"
pytestmark = pytest.mark.ngspice


def write_case(tmp_path: Path, deck: str, annotation: str, name: str = "case") -> Path:
    (tmp_path / f"{name}.cir").write_text(deck)
    (tmp_path / f"{name}.thermal.toml").write_text(annotation)
    return tmp_path / f"{name}.cir"


def simulate(text: str, *analyses: str) -> dict[str, np.ndarray]:
    sim = get_simulator("batch").run(text, analyses=analyses, deck_analyses=not analyses)
    plot = sim.plots[-1]
    return {name: np.real(np.asarray(v)) for name, v in plot.vectors.items()}


# --- the self-heated divider: steady state and transient ---------------------------------

V_SUPPLY, R1, R2, TC1, RTH, CTH, TA = 10.0, 100.0, 100.0, 0.004, 50.0, 0.01, 25.0


def r1_at(t: float) -> float:
    return R1 * (1 + TC1 * (t - 25.0))


def power_at(t: float) -> float:
    r = r1_at(t)
    return V_SUPPLY**2 * r / (r + R2) ** 2


def divider_with(tmp_path: Path, eol: str) -> Path:
    """The divider fixture with line ending *eol*, beside its annotation."""
    deck = tmp_path / "divider.cir"
    text = (FIXTURES / "divider.cir").read_text()
    deck.write_bytes(text.replace("\n", eol).encode())
    shutil.copy(FIXTURES / "divider.thermal.toml", tmp_path / "divider.thermal.toml")
    return deck


@pytest.mark.parametrize("eol", ["\n", "\r\n"])
def test_divider_steady_state_matches_root_of_power_balance(tmp_path: Path, eol: str) -> None:
    # The fixed point T = Ta + Rth * P(T), found independently by scipy's brentq.
    expected = brentq(lambda t: t - TA - RTH * power_at(t), TA, TA + 500)
    deck = divider_with(tmp_path, eol)
    out = run(str(deck), str(tmp_path / "divider.thermal.toml"))
    part = out.results.part("R1")
    assert part.temperature == pytest.approx(expected, abs=1e-4)
    r = r1_at(expected)
    assert out.results.voltages["out"] == pytest.approx(V_SUPPLY * R2 / (r + R2), rel=1e-6)
    assert part.power == pytest.approx(power_at(expected), rel=1e-5)
    assert part.resistance == pytest.approx(r, rel=1e-6)


@pytest.mark.parametrize("form", ["reference", "switch", "divider"])
def test_crlf_deck_emitted_in_crlf_simulates(tmp_path: Path, form: str) -> None:
    # Every line of the emitted deck ends as the deck's own lines do (CRLF), and ngspice 39
    # reads it: V(out) at the fixed point found by scipy's brentq, as for the LF deck.
    expected = brentq(lambda t: t - TA - RTH * power_at(t), TA, TA + 500)
    deck = divider_with(tmp_path, "\r\n")
    text = emit_files(str(deck), str(tmp_path / "divider.thermal.toml"), form=form).text
    assert text.count("\n") == text.count("\r\n") > deck.read_bytes().count(b"\n")
    v_out = simulate(text, "op")["v(out)"][0]
    assert v_out == pytest.approx(V_SUPPLY * R2 / (r1_at(expected) + R2), rel=1e-6)


def test_divider_transient_matches_solve_ivp() -> None:
    # C dT/dt = P(T) - (T - Ta)/Rth from a cold start, integrated by scipy to 1e-10.
    reference = solve_ivp(
        lambda _t, y: [(power_at(y[0]) - (y[0] - TA) / RTH) / CTH],
        (0.0, 2.0),
        [TA],
        rtol=1e-10,
        atol=1e-10,
        dense_output=True,
    )
    out = run(
        str(FIXTURES / "divider.cir"),
        str(FIXTURES / "divider.thermal.toml"),
        RunOptions(analyses=("tran 1m 2 0 1m",)),
    )
    part = out.results.part("R1")
    time = out.results.time
    assert time is not None and part.temperature_series is not None
    assert part.temperature_series[0] == pytest.approx(TA, abs=1e-9)  # starts cold
    for t_check in (0.1, 0.5, 1.0, 2.0):
        got = np.interp(t_check, time, part.temperature_series)
        # ngspice's trapezoidal integration with 1 ms steps on a 0.5 s time constant:
        # the local error is far below 1 mK.
        assert got == pytest.approx(reference.sol(t_check)[0], abs=2e-3)


@pytest.mark.parametrize(
    ("n_tau", "fraction"),
    [
        # Standard first-order step response 1 - exp(-n): 63.2 %, 95.0 %, 99.3 %
        # (the rule quoted in any circuits or heat-transfer textbook).
        (1, 0.632),
        (3, 0.950),
        (5, 0.993),
    ],
)
def test_time_constant_rule(tmp_path: Path, n_tau: int, fraction: float) -> None:
    # A current-fed resistor with no TCR dissipates a constant I^2 R = 1 W.
    deck = write_case(
        tmp_path,
        "constant power\nI1 0 a DC 1\nR1 a 0 1\n.tran 1m 1\n.end\n",
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 10.0\ncth = 0.01\n',
    )
    out = run(str(deck), str(deck.with_suffix(".thermal.toml")), RunOptions(
        analyses=("tran 0.1m 0.6 0 0.1m",)))
    part = out.results.part("R1")
    assert out.results.time is not None and part.temperature_series is not None
    tau = 10.0 * 0.01
    rise = np.interp(n_tau * tau, out.results.time, part.temperature_series) - 25.0
    assert rise / 10.0 == pytest.approx(fraction, abs=0.0006)


def test_foster_step_response(tmp_path: Path) -> None:
    # Zth(t) = sum Ri (1 - exp(-t/tau_i)) for a Foster network under a 1 W step
    # (definition of the Foster form; e.g. JEDEC JESD51-14 uses the same expression).
    stages = [(2.0, 0.01), (5.0, 0.1), (10.0, 1.0)]
    deck = write_case(
        tmp_path,
        "foster step\nI1 0 a DC 1\nR1 a 0 1\n.end\n",
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\n'
        f"foster = {[list(s) for s in stages]}\n",
    )
    out = run(str(deck), str(deck.with_suffix(".thermal.toml")),
              RunOptions(analyses=("tran 1m 4 0 1m",)))
    part = out.results.part("R1")
    assert out.results.time is not None and part.temperature_series is not None
    for t in (0.005, 0.02, 0.3, 1.0, 3.0):
        expected = sum(r * (1 - math.exp(-t / tau)) for r, tau in stages)
        got = np.interp(t, out.results.time, part.temperature_series) - 25.0
        assert got == pytest.approx(expected, abs=5e-3)


def test_copper_winding(tmp_path: Path) -> None:
    # Annealed copper: 0.00393 /K at 20 degC (IEC 60028). A 1 ohm winding at 20 degC
    # carrying 1 A through Rth = 50 K/W: the fixed point of T = Ta + Rth I^2 R(T).
    deck = write_case(
        tmp_path,
        "copper winding\nI1 0 a DC 1\nRW a 0 1\n.op\n.end\n",
        'schema = 1\n[ambient]\ntemperature = 20.0\n[part.RW]\nmodel = "linear"\n'
        "tc1 = 0.00393\ntref = 20.0\nrth = 50.0\n",
    )
    out = run(str(deck), str(deck.with_suffix(".thermal.toml")))
    expected = brentq(lambda t: t - 20 - 50 * (1 + 0.00393 * (t - 20)), 20, 500)
    assert out.results.part("RW").temperature == pytest.approx(expected, abs=1e-4)


def test_shared_nodes_and_heat_only_part() -> None:
    out = run(str(FIXTURES / "shared.cir"), str(FIXTURES / "shared.thermal.toml"))
    res = out.results
    # The transistor's own dissipation, V * I from the plain deck (collector and base at
    # 0.7 V, emitter at 0): the supply current of VC, the circuit at the ambient (40 degC).
    text = (FIXTURES / "shared.cir").read_text()
    plain = simulate(text.replace("\n.end", "\n.temp 40\n.end"))
    p_q = -0.7 * plain["i(vc)"][-1]
    assert res.part("QX").power == pytest.approx(p_q, rel=1e-6)
    # Steady-state heat balance, solved by hand as a linear system G T = P.
    p_a, p_b = 1.0**2 * 2.0, 0.5**2 * 4.0
    g = np.zeros((5, 5))
    rhs = np.zeros(5)
    ta, i_a, i_b, i_q, i_board, i_sink = 40.0, 0, 1, 2, 3, 4

    def link(i: int, j: int | None, r: float) -> None:
        g[i, i] += 1 / r
        if j is None:
            rhs[i] += ta / r
        else:
            g[j, j] += 1 / r
            g[i, j] -= 1 / r
            g[j, i] -= 1 / r

    link(i_a, i_board, 20.0)
    link(i_b, i_board, 30.0)
    link(i_q, i_board, 50.0)
    link(i_board, None, 10.0)
    link(i_sink, None, 5.0)
    link(i_board, i_sink, 4.0)
    rhs[[i_a, i_b, i_q]] += [p_a, p_b, p_q]
    temps = np.linalg.solve(g, rhs)
    assert res.part("RA").temperature == pytest.approx(temps[i_a], abs=1e-6)
    assert res.part("RB").temperature == pytest.approx(temps[i_b], abs=1e-6)
    assert res.part("QX").temperature == pytest.approx(temps[i_q], abs=1e-6)
    assert res.nodes["board"] == pytest.approx(temps[i_board], abs=1e-6)
    assert res.nodes["sink"] == pytest.approx(temps[i_sink], abs=1e-6)


def test_instances_get_their_own_hot_spots() -> None:
    out = run(str(FIXTURES / "hier.cir"), str(FIXTURES / "hier.thermal.toml"))
    hot = {p.path: p for p in out.results.parts}
    assert set(hot) == {"X1.Rload", "X2.Rload"}
    for path, supply in (("X1.Rload", 5.0), ("X2.Rload", 10.0)):

        def balance(t: float, v: float = supply) -> float:
            r = 50 * (1 + 100e-6 * (t - 25))
            return t - 25 - 100 * (v / (r + 1)) ** 2 * r

        assert hot[path].temperature == pytest.approx(brentq(balance, 25, 1000), abs=1e-3)


# --- the contract of the emitted deck ------------------------------------------------------


def test_unannotated_cards_untouched_and_replaced_cards_commented() -> None:
    source = (FIXTURES / "divider.cir").read_text()
    text = emit_files(str(FIXTURES / "divider.cir"), str(FIXTURES / "divider.thermal.toml")).text
    assert text.startswith(source.splitlines(keepends=True)[0])
    for line in ("V1 in 0 DC 10\n", "R2 out 0 100\n", ".op\n", ".end\n"):
        assert line in text
    assert "*hw* R1 in out 100 ; the part that heats\n" in text
    assert "\nR1 in out" not in text
    assert "sha256" in text and "1 V = 1 degC" in text


def test_deterministic_and_small_diffs(tmp_path: Path) -> None:
    for name in ("shared.cir", "shared.thermal.toml"):
        shutil.copy(FIXTURES / name, tmp_path / name)
    deck, notes = tmp_path / "shared.cir", tmp_path / "shared.thermal.toml"
    first = emit_files(str(deck), str(notes)).text
    assert emit_files(str(deck), str(notes)).text == first
    notes.write_text(notes.read_text().replace("rth = 30.0", "rth = 35.0"))
    second = emit_files(str(deck), str(notes)).text
    changed = [
        (a, b) for a, b in zip(first.splitlines(), second.splitlines(), strict=True) if a != b
    ]
    # The annotation's hash in the header, RB's comment line and RB's network resistor.
    assert len(changed) == 3
    assert all("RB" in b or "rb" in b or "annotations:" in b for _a, b in changed)
    assert "annotation file changed" in stale_reason(first, second)


def test_name_collision_is_an_error(tmp_path: Path) -> None:
    deck = write_case(
        tmp_path,
        "collides\nV1 in 0 1\nR1 in hw_t_r1 1k\nR2 hw_t_r1 0 1k\n.op\n.end\n",
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 10.0\n',
    )
    with pytest.raises(EmitError, match="already uses the name 'hw_t_r1'") as info:
        emit_files(str(deck), str(deck.with_suffix(".thermal.toml")))
    assert info.value.location is not None and info.value.location.line == 3


def test_op_is_steady_state_and_tran_starts_cold_unless_steady(tmp_path: Path) -> None:
    deck = write_case(
        tmp_path,
        "start\nI1 0 a DC 1\nR1 a 0 1\n.end\n",
        'schema = 1\nstart = "steady"\n[part.R1]\nmodel = "linear"\ntc1 = 0\n'
        "rth = 10.0\ncth = 1.0\n",
    )
    out = run(str(deck), str(deck.with_suffix(".thermal.toml")),
              RunOptions(analyses=("tran 1m 10m",)))
    series = out.results.part("R1").temperature_series
    assert series is not None
    assert series[0] == pytest.approx(35.0, abs=1e-6)  # hot from the start
    assert ".ic" not in out.prepared.text


UIC_STARTS = [
    # (annotation start, the deck's .tran card, whether emit refuses it, T(0) of R1 in degC)
    ("steady", ".tran 1m 10m uic", True, None),
    ("steady", ".TRAN 1m 10m 0 1m UIC", True, None),
    ("cold", ".tran 1m 10m uic", False, 25.0),  # .ic holds under uic (manual 15.2.2)
    ("steady", ".tran 1m 10m", False, 35.0),  # the operating point: 25 + 1 W * 10 K/W
]


@pytest.mark.parametrize(("start", "tran", "refused", "t0"), UIC_STARTS)
def test_steady_start_needs_the_operating_point_uic_skips(
    tmp_path: Path, start: str, tran: str, refused: bool, t0: float | None
) -> None:
    # With uic ngspice skips the operating point (manual 15.3.10): without .ic every thermal
    # node would start at 0 V, 0 degC, which is neither a cold nor a steady start.
    deck = write_case(
        tmp_path,
        f"start\nI1 0 a DC 1\nR1 a 0 1\n{tran}\n.end\n",
        f'schema = 1\nstart = "{start}"\n[part.R1]\nmodel = "linear"\ntc1 = 0\n'
        "rth = 10.0\ncth = 1.0\n",
    )
    notes = str(deck.with_suffix(".thermal.toml"))
    if refused:
        with pytest.raises(EmitError, match="uic") as caught:
            emit_files(str(deck), notes)
        location = caught.value.location
        assert location is not None and location.line == 4 and caught.value.hint
        return
    series = run(str(deck), notes, RunOptions()).results.part("R1").temperature_series
    assert series is not None and series[0] == pytest.approx(t0, abs=1e-6)


def test_ambient_profile(tmp_path: Path) -> None:
    deck = write_case(
        tmp_path,
        "profile\nI1 0 a DC 0\nR1 a 0 1\n.end\n",
        'schema = 1\n[ambient]\nprofile = [[0, 25], [1, 45]]\n[part.R1]\nmodel = "linear"\n'
        "tc1 = 0\nrth = 10.0\ncth = 0.001\n",
    )
    out = run(str(deck), str(deck.with_suffix(".thermal.toml")),
              RunOptions(analyses=("tran 1m 1",)))
    assert out.results.ambient == pytest.approx(45.0)
    # tau = 10 ms, a 20 K/s ramp: the part lags the ambient by rate * tau = 0.2 K.
    assert out.results.part("R1").temperature == pytest.approx(45.0 - 0.2, abs=0.01)


def test_part_in_included_file_is_refused(tmp_path: Path) -> None:
    (tmp_path / "parts.inc").write_text("R1 in 0 1k\n")
    deck = write_case(
        tmp_path,
        "include\nV1 in 0 1\n.include parts.inc\n.op\n.end\n",
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0\nrth = 10.0\n',
    )
    with pytest.raises(EmitError, match="included file"):
        emit_files(str(deck), str(deck.with_suffix(".thermal.toml")))


def test_emitted_deck_round_trips_and_heating_off_baseline() -> None:
    inputs = load_inputs(str(FIXTURES / "divider.cir"), str(FIXTURES / "divider.thermal.toml"))
    text = emit_inputs(inputs, heating=False).text
    assert read(text).write() == text
    values = simulate(text)
    assert values["v(out)"][-1] == pytest.approx(5.0, rel=1e-9)
    assert values["v(hw_t_r1)"][-1] == pytest.approx(25.0, abs=1e-9)


@pytest.mark.parametrize(
    "deck",
    [
        "no end card\nV1 in 0 DC 10\nR1 in out 100\nR2 out 0 100\n.op",  # no final newline
        "no end card\nV1 in 0 DC 10\n.op\nR2 out 0 100\nR1 in out 100",  # part is last
        "end card\nV1 in 0 DC 10\nR1 in out 100\nR2 out 0 100\n.op\n.end",
    ],
)
def test_decks_without_final_newline_or_end(tmp_path: Path, deck: str) -> None:
    # Same divider as above: the steady state must not depend on how the file ends.
    path = write_case(tmp_path, deck, (FIXTURES / "divider.thermal.toml").read_text())
    expected = brentq(lambda t: t - TA - RTH * power_at(t), TA, TA + 500)
    out = run(str(path), str(path.with_suffix(".thermal.toml")))
    assert out.results.part("R1").temperature == pytest.approx(expected, abs=1e-4)


# --- resistor values from subcircuit parameters ----------------------------------------

PARAM_DECK = """\
parameterised cells (invented for this test)
.param rbase=20
V1 a 0 DC 1
V2 b 0 DC 1
V3 c 0 DC 1
V4 d 0 DC 1
X1 a 0 cell r=100
X2 b 0 cell
XP c 0 pair rr=30
X4 d 0 cell r={3*rbase}
.subckt cell p q params: r=50
.param half={r/2}
RA p m {half}
RB m q {r-half}
.ends cell
.subckt pair p q rr=10
X3 p q cell r={2*rr}
.ends pair
.op
.end
"""


def test_values_from_subcircuit_parameters_match_ngspice(tmp_path: Path) -> None:
    # The reference is ngspice itself: the current each plain cell draws from its 1 V
    # source is 1 / (RA + RB) as ngspice evaluates the parameters.
    every = 'schema = 1\n[part."*.R?"]\nmodel = "linear"\ntc1_ppm = 100\nrth = 10.0\n'
    deck = write_case(tmp_path, PARAM_DECK, every)
    circuit = emit_inputs(load_inputs(str(deck), str(tmp_path / "case.thermal.toml"))).circuit
    assert circuit is not None
    nominal = {p.path: p.nominal_resistance for p in circuit.parts}
    plain = simulate(PARAM_DECK)
    for source, instance in (("v1", "X1"), ("v2", "X2"), ("v3", "XP.X3"), ("v4", "X4")):
        total = nominal[f"{instance}.RA"] + nominal[f"{instance}.RB"]
        assert total == pytest.approx(1.0 / -plain[f"i({source})"][0], rel=1e-9)
    assert (nominal["X1.RA"], nominal["X2.RB"], nominal["XP.X3.RA"], nominal["X4.RB"]) == (
        50.0, 25.0, 30.0, 30.0,
    )  # fmt: skip


@pytest.mark.parametrize(
    ("path", "source", "value"),
    [
        ("RA", "v1", 100.0),  # .param rtop={2*50} in an .include
        ("RB", "v2", 94.0),  # .param rlow=47 in the LOW section of a .lib, used as {rlow*2}
        ("X1.RC", "v3", 330.0),  # a nested .include, passed on as a subcircuit parameter
    ],
)
def test_values_from_parameters_of_included_files_match_ngspice(
    path: str, source: str, value: float
) -> None:
    # The reference is ngspice itself: each resistor draws 1 / R from its 1 V source.
    deck = FIXTURES / "params_included.cir"
    inputs = load_inputs(str(deck), str(FIXTURES / "params_included.thermal.toml"))
    circuit = emit_inputs(inputs).circuit
    assert circuit is not None
    nominal = {p.path: p.nominal_resistance for p in circuit.parts}
    plain = get_simulator("batch").run(deck.read_text(), cwd=str(FIXTURES))
    current = -np.real(np.asarray(plain.plots[-1].vectors[f"i({source})"]))[0]
    assert nominal[path] == pytest.approx(1.0 / current, rel=1e-9)
    assert nominal[path] == value


# --- cells defined in included files -----------------------------------------------------


@pytest.mark.parametrize(
    ("deck", "path"),
    [
        ("included_top.cir", "X1.RC"),  # instantiated at the top level
        ("included_nested.cir", "X1.XI.RC"),  # inside another included definition
        ("included_local.cir", "X1.XW.RC"),  # inside a definition of the deck itself
    ],
)
def test_cells_from_included_files_are_specialised_before_end(deck: str, path: str) -> None:
    # Each deck is the same circuit: 10 V across the cell's 50 ohm RC and a fixed 50 ohm.
    # The included file stays untouched, so the cell's copies must be written in the deck,
    # before its .end (the shared library reads no further); the steady state is the root
    # of T = Ta + Rth * P(T), found independently by scipy's brentq.
    deck_path = str(FIXTURES / deck)
    notes = str(FIXTURES / "included_cells.thermal.toml")
    text = emit_files(deck_path, notes).text
    assert text.lower().rfind(".subckt") < text.lower().rfind("\n.end\n")

    def balance(t: float) -> float:
        r = 50 * (1 + 0.004 * (t - 25))
        return t - 25 - 100 * (10 / (r + 50)) ** 2 * r

    out = run(deck_path, notes)
    assert [p.path for p in out.results.parts] == [path]
    assert out.results.part(path).temperature == pytest.approx(brentq(balance, 25, 500), abs=1e-4)


# --- instance multipliers ------------------------------------------------------------------

CELL = ".subckt cell p n\nRC p n 100\nD1 n 0 dx\n.ends\n.model dx D\n"
MULTIPLIED = [
    # (deck after the title, annotated path, line and column of the m= of the error)
    ("V1 in 0 10\nX1 in 0 cell m=2\n" + CELL, "X1.RC", (3, 14)),
    ("V1 in 0 10\nX1 in 0 cell m=2\n" + CELL, "X1.D1", (3, 14)),  # heat only
    (
        "V1 in 0 10\nXO in 0 outer\n+ M = {2}\n.subckt outer p n\nXI p n cell\n.ends\n" + CELL,
        "XO.XI.RC",
        (4, 3),
    ),
]


@pytest.mark.parametrize(("body", "path", "where"), MULTIPLIED)
def test_multiplied_instance_is_refused_where_it_stands(
    tmp_path: Path, body: str, path: str, where: tuple[int, int]
) -> None:
    # ngspice pushes an X card's m= into the R, C, D, ... of the definition (manual 3.2.1)
    # but not into behavioural or code-model sources, so the replaced resistor would lose
    # it and the thermal network's own R and C would gain it: silently wrong numbers.
    note = f'schema = 1\n[part."{path}"]\nrth = 10.0\n'
    if path.endswith("RC"):
        note += 'model = "linear"\ntc1 = 0.004\n'
    deck = write_case(tmp_path, "multiplied instances\n" + body, note)
    with pytest.raises(EmitError, match="m=") as caught:
        emit_files(str(deck), str(deck.with_suffix(".thermal.toml")))
    location = caught.value.location
    assert location is not None and (location.line, location.column) == where
    assert caught.value.hint


def test_multiplier_on_the_resistor_card_is_its_nominal_value(tmp_path: Path) -> None:
    # R1 m=2 is two 100 ohm resistors in parallel, 50 ohm (manual 3.3.1, eq. 11): one part
    # of 50 ohm, as the divider of the tests above with R1 = 50 ohm and R2 = 50 ohm.
    deck = write_case(
        tmp_path,
        "multiplied resistor\nV1 in 0 10\nR1 in out 100 m=2\nR2 out 0 50\n.op\n.end\n",
        'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0.004\nrth = 50.0\n',
    )

    def balance(t: float) -> float:
        r = 50 * (1 + 0.004 * (t - 25))
        return t - 25 - 50 * (10 / (r + 50)) ** 2 * r

    out = run(str(deck), str(deck.with_suffix(".thermal.toml")))
    assert out.results.part("R1").temperature == pytest.approx(brentq(balance, 25, 500), abs=1e-4)


def test_heat_only_part_in_a_locally_defined_cell(tmp_path: Path) -> None:
    # A 0.1 A current sink on a 10 V supply absorbs P = V * I = 1 W exactly, so
    # T = 25 + 10 K/W * 1 W.  Its cell is defined inside another definition, where ngspice 39
    # names devices i.x1.i.xl.ih (checked with 'show'); its power is read from its sense
    # sources, named the same way.
    deck = write_case(
        tmp_path,
        "heat only, local cell\nV1 in 0 DC 10\nX1 in 0 outer\n.subckt outer p n\n"
        ".subckt leg a b\nIH a b DC 0.1\n.ends leg\nXL p n leg\n.ends outer\n.op\n.end\n",
        'schema = 1\n[part."X1.XL.IH"]\nrth = 10.0\n',
    )
    out = run(str(deck), str(deck.with_suffix(".thermal.toml")))
    part = out.results.part("X1.XL.IH")
    assert part.power == pytest.approx(1.0, rel=1e-9)
    assert part.temperature == pytest.approx(35.0, abs=1e-6)


def test_a_vector_ngspice_did_not_write_is_a_simulator_error(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # Were a device named unlike ngspice names it (as cells defined inside other cells once
    # were), reading its sense currents must end in a reported error, not a KeyError.
    deck = write_case(
        tmp_path,
        "heat only\nV1 in 0 DC 10\nIH in 0 DC 0.1\n.op\n.end\n",
        'schema = 1\n[part.IH]\nrth = 10.0\n',
    )
    monkeypatch.setattr(results, "device_name", lambda resolved, name: f"nosuch.{name}")
    with pytest.raises(SimulatorError, match=re.escape("has no vector 'i(nosuch.vhw_s_ih_1)'")):
        run(str(deck), str(deck.with_suffix(".thermal.toml")))


# --- analyses code models do not implement (ngspice manual 1.2) ------------------------

DIVIDER_AC = "divider\nV1 in 0 DC 10 AC 1\nR1 in out 1k\nR2 out 0 1k\nC1 out 0 1u\n"
LINEAR_R1 = 'schema = 1\n[part.R1]\nmodel = "linear"\ntc1 = 0.004\nrth = 50.0\n'


@pytest.mark.parametrize(
    ("analysis", "line"),
    [(".pz in 0 out 0 vol pz\n", 6), (".sens v(out)\n", 6), (".disto dec 5 1k 10k\n", 6),
     (".op\n.control\nrun\n  pz in 0 out 0 vol pz\n.endc\n", 9)],
)  # fmt: skip
def test_analyses_code_models_lack_fall_back_to_the_reference_form(
    tmp_path: Path, analysis: str, line: int
) -> None:
    deck = write_case(tmp_path, DIVIDER_AC + analysis + ".end\n", LINEAR_R1)
    emitted = emit_files(str(deck), str(deck.with_suffix(".thermal.toml")), form="switch")
    assert "Bhw_r1 in out I = " in emitted.text and "\nAhw_" not in emitted.text
    (warning,) = [f for f in emitted.findings if "code models do not implement" in f.message]
    assert warning.location is not None and warning.location.line == line


@pytest.mark.ngspice
@pytest.mark.parametrize("form", ["switch", "divider"])
def test_ac_small_signal_of_an_annotated_divider(tmp_path: Path, form: str) -> None:
    # Found by the conformance suite: with code models the small-signal response came out
    # 4.06 V for this 1 V divider (the plain deck: 0.5).  Closed form of a self-heated
    # resistor with an instantaneous thermal path (no cth): V = I R(T), T = 25 + Rth I^2 R,
    # so dV/dI = R + I R'(T) dT/dI with dT/dI = 2 Rth I R / (1 - Rth I^2 R'), R' = R0 tc1.
    deck = write_case(tmp_path, DIVIDER_AC + ".ac lin 1 1 1\n.end\n", LINEAR_R1)
    emitted = emit_files(str(deck), str(deck.with_suffix(".thermal.toml")), form=form)

    def r1(t: float) -> float:
        return 1000.0 * (1 + 0.004 * (t - 25.0))

    hot = brentq(lambda t: t - 25.0 - 50.0 * (10.0 / (r1(t) + 1000.0)) ** 2 * r1(t), 25, 200)
    current = 10.0 / (r1(hot) + 1000.0)
    slope = 1000.0 * 0.004
    dt_di = 2 * 50.0 * current * r1(hot) / (1 - 50.0 * current**2 * slope)
    r_ac = r1(hot) + current * slope * dt_di
    sim = get_simulator("batch").run(emitted.text, analyses=(), deck_analyses=True)
    out = abs(complex(sim.plots[-1]["v(out)"][0]))
    # C1 = 1 uF at 1 Hz against 500 ohm: |1 + j w R C| - 1 = 5e-6, below the tolerance.
    assert out == pytest.approx(1000.0 / (1000.0 + r_ac), rel=1e-4)
    assert any(".ac" in f.message for f in emitted.findings)


@pytest.mark.parametrize("form", ["reference", "switch"])
def test_noise_of_annotated_resistors_is_missing_and_said(tmp_path: Path, form: str) -> None:
    # Johnson-Nyquist: a resistor's noise voltage density is sqrt(4 k T R) (k = 1.380649e-23
    # J/K, SI 2019; T = ngspice's 27 degC).  At 1 Hz the divider's output sees R1 || R2 =
    # 500 ohm of noise in the plain deck; with R1 annotated only R2's own noise is left,
    # through the divider at R1's operating temperature (brentq on T = 25 + Rth P(T)):
    # sqrt(4 k T R2) R1 / (R1 + R2), about 30 % less.  That is what the warning says; the
    # rest is noise that should not be there (the switch form's fixed share of R1, and the
    # thermal resistor's noise reaching R1's resistance through its temperature).
    deck = write_case(tmp_path, DIVIDER_AC + ".noise v(out) V1 lin 1 1 1\n.end\n", LINEAR_R1)
    emitted = emit_files(str(deck), str(deck.with_suffix(".thermal.toml")), form=form)
    (warning,) = [f for f in emitted.findings if "no thermal noise" in f.message]
    assert warning.location is not None and warning.location.line == 6
    kt4 = 4 * 1.380649e-23 * (27 + 273.15)
    plain = simulate(deck.read_text(), "noise v(out) V1 lin 1 1 1")
    heated = simulate(emitted.text, "noise v(out) V1 lin 1 1 1")
    assert plain["onoise_spectrum"][0] == pytest.approx(math.sqrt(kt4 * 500.0), rel=1e-3)

    def r1(t: float) -> float:
        return 1000.0 * (1 + 0.004 * (t - 25.0))

    hot = brentq(lambda t: t - 25.0 - 50.0 * (10.0 / (r1(t) + 1000.0)) ** 2 * r1(t), 25, 200)
    share = r1(hot) / (r1(hot) + 1000.0)
    missing = math.sqrt(kt4 * 1000.0) * share
    assert missing < heated["onoise_spectrum"][0] < 0.8 * plain["onoise_spectrum"][0]
