"""Card forms against the outside: every form simulated by ngspice 39 beside the reference
form (the same equations evaluated by behavioural sources), and against scipy's brentq on
the power balance; plus the forms' naming contract."""

from __future__ import annotations

import re
import tomllib
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from scipy.optimize import brentq

from heatweave.emit.emitter import emit_files
from heatweave.emit.forms import (
    FORMS,
    STEP_LIMIT_OPTION,
    TRTOL_NOTE,
    added_nodes,
    get_form,
    preamble,
    resistor_cards,
    shared_nodes,
    step_limit_options,
)
from heatweave.simulators import get_simulator
from heatweave.tempmodels import REGISTRY, TempModel, get

FIXTURES = Path(__file__).parent / "fixtures" / "emitforms"
HOT = "hw_t_rx"
# Tight Newton tolerances so that two decks of the same equations can only differ by what
# these leave open (reltol 1e-9 of each value, 1e-12 V, 1e-15 A).  trtol = 1 is what ngspice
# uses anyway once a deck holds an XSPICE device (manual 15.1.4); writing it in every deck
# gives the behavioural-source deck the same step control.
OPTIONS = ".options reltol=1e-9 vntol=1e-12 abstol=1e-15 trtol=1"


@dataclass(frozen=True, slots=True)
class Case:
    id: str
    model: TempModel
    volts: float
    series: float
    rth: float
    cth: float
    ambient: float
    tstop: float


def _points(value: Any) -> Any:
    if isinstance(value, list):
        return tuple(tuple(float(x) for x in pair) for pair in value)
    return value


def load_cases() -> list[Case]:
    data = tomllib.loads((FIXTURES / "cases.toml").read_text())
    cases = []
    for row in data["case"]:
        params = {key: _points(value) for key, value in row["params"].items()}
        model = get(row["model"]).from_params(params, row["ohms"])
        cases.append(
            Case(row["id"], model, row["volts"], row["series"], row["rth"], row["cth"],
                 row["ambient"], row["tstop"])
        )  # fmt: skip
    return cases


CASES = load_cases()
CHEAP = [form for form in FORMS if form != "reference"]


def _linear(case_id: str, tc1: float, ohms: float, volts: float, series: float, rth: float,
            ambient: float) -> Case:  # fmt: skip
    model = get("linear").from_params({"tc1": tc1}, ohms)
    return Case(case_id, model, volts, series, rth, 0.01, ambient, 2.0)


# Linear models whose R(T) moves far from R0, for the switch form's split of R(T) into a
# fixed Rc (R0/8 or -R0) and a switch of R(T) - Rc (invented circuits; coefficients named).
STEEP = [
    # nickel's TCR, about 0.006 /K (from memory): R(T) grows by more than half
    _linear("linear-steep-positive", 0.006, 50.0, 20.0, 20.0, 60.0, 25.0),
    # a strongly negative linear TCR, -3000 ppm/K (invented): R(T) falls to 6 % of R0
    _linear("linear-steep-negative", -0.003, 50.0, 30.0, 20.0, 60.0, 25.0),
    # copper-like 0.0039 /K (common practice) at a -55 degC ambient, 80 K below tref
    _linear("linear-cold-ambient", 0.0039, 10.0, 2.0, 10.0, 20.0, -55.0),
]


def deck(
    case: Case, form: str, analysis: str, heating: bool = True, lifted: bool = True
) -> str:
    """The case's circuit with its resistor in *form*; *lifted*: with the step-limit option
    emit writes where the deck has no code models of its own (else ngspice's default)."""
    lines = [
        f"self-heated resistor, {form} form",
        f"V1 in 0 DC {case.volts!r}",
        f"Rs in a {case.series!r}",
        *resistor_cards(form, "rx", "a", "0", HOT, case.model, heating),
        *preamble(form, [case.model], heating),
        *(step_limit_options(form, [("t\nV1 in 0 DC 1\n", True)]) if lifted else []),
        f"Rhw_rx_1 {HOT} hw_amb {case.rth!r}",
        f"Chw_rx_1 {HOT} 0 {case.cth!r}",
        f"Vhw_amb hw_amb 0 DC {case.ambient!r}",
        f".ic V({HOT})={case.ambient!r}",
        OPTIONS,
        analysis,
        ".end",
    ]
    return "\n".join(lines) + "\n"


def simulate(text: str) -> dict[str, np.ndarray]:
    sim = get_simulator("batch").run(text)
    return {name: np.real(np.asarray(v)) for name, v in sim.plots[-1].vectors.items()}


def steady_temperature(case: Case) -> float:
    """The root of T = Ta + Rth * P(T), P the resistor's dissipation, by scipy's brentq."""

    def balance(t: float) -> float:
        r = case.model.resistance(t)
        power = (case.volts / (case.series + r)) ** 2 * r
        return t - case.ambient - case.rth * power

    rise = case.rth * case.volts**2 / case.series  # the most any R can dissipate, times Rth
    return float(brentq(balance, case.ambient, case.ambient + rise, xtol=1e-12, rtol=1e-14))


def test_every_registered_model_has_a_case() -> None:
    assert {type(case.model).name for case in CASES} == set(REGISTRY)


# --- ngspice: the cheap forms against the reference form, and against brentq ----------------


@pytest.mark.ngspice
@pytest.mark.parametrize("lifted", [True, False], ids=["step-limit-lifted", "step-limit-kept"])
@pytest.mark.parametrize("form", CHEAP)
@pytest.mark.parametrize("heating", [True, False])
@pytest.mark.parametrize("case", CASES + STEEP, ids=lambda c: c.id)
def test_operating_point_matches_reference_form(
    case: Case, form: str, heating: bool, lifted: bool
) -> None:
    ours = simulate(deck(case, form, ".op", heating, lifted))
    ref = simulate(deck(case, "reference", ".op", heating))
    rise = ref[f"v({HOT})"][0] - case.ambient
    if heating:
        assert rise > 0.5  # the case must heat enough for R(T) to matter
    else:
        assert abs(rise) < 1e-9
    # Same equations: only the Newton stop (reltol 1e-9 of each value) separates the two.
    assert ours[f"v({HOT})"][0] - case.ambient == pytest.approx(rise, rel=1e-9, abs=1e-9)
    assert ours["i(v1)"][0] == pytest.approx(ref["i(v1)"][0], rel=1e-9)
    assert ours["v(a)"][0] == pytest.approx(ref["v(a)"][0], rel=1e-9)


@pytest.mark.ngspice
@pytest.mark.parametrize("lifted", [True, False], ids=["step-limit-lifted", "step-limit-kept"])
@pytest.mark.parametrize("form", CHEAP)
@pytest.mark.parametrize("case", CASES + STEEP, ids=lambda c: c.id)
def test_cold_start_transient_matches_reference_form(case: Case, form: str, lifted: bool) -> None:
    step = case.tstop / 200
    analysis = f".tran {step!r} {case.tstop!r} 0 {step!r}"
    ours = simulate(deck(case, form, analysis, lifted=lifted))
    ref = simulate(deck(case, "reference", analysis))
    t_ref, t_ours = ref["time"], ours["time"]
    assert t_ours[-1] == pytest.approx(case.tstop)
    rise = ref[f"v({HOT})"] - case.ambient
    assert rise[0] == pytest.approx(0.0, abs=1e-9)  # .ic: a cold start
    assert rise[-1] > 0.5
    # Same equations and the same step control (trtol 1, reltol 1e-9): each step's Newton
    # stop (1e-9 relative) is integrated over a few hundred steps, and a steep R(T) (the
    # PTC near its switch point) amplifies it; 1e-6 of the final rise bounds that.
    ours_on_ref = np.interp(t_ref, t_ours, ours[f"v({HOT})"] - case.ambient)
    assert np.max(np.abs(ours_on_ref - rise)) < 1e-6 * rise[-1]
    current = np.interp(t_ref, t_ours, ours["i(v1)"])
    assert np.max(np.abs(current - ref["i(v1)"])) < 1e-6 * np.max(np.abs(ref["i(v1)"]))


@pytest.mark.ngspice
@pytest.mark.parametrize("form", list(FORMS))
@pytest.mark.parametrize("case", CASES + STEEP, ids=lambda c: c.id)
def test_steady_state_matches_brentq_power_balance(case: Case, form: str) -> None:
    expected = steady_temperature(case)
    out = simulate(deck(case, form, ".op"))
    # The B-source expressions hold constants to 11 digits (tempmodels/base.py); with
    # reltol 1e-9 on temperatures below 150 degC the Newton stop bounds the error by 1.5e-7 K.
    assert out[f"v({HOT})"][0] == pytest.approx(expected, abs=1.5e-7)
    r = case.model.resistance(expected)
    assert -out["i(v1)"][0] == pytest.approx(case.volts / (case.series + r), rel=1e-8)


# --- the naming contract and the choices of cards ---------------------------------------------


NAME = re.compile(r"^[A-Za-z]hw_")


@pytest.mark.parametrize("form", list(FORMS))
@pytest.mark.parametrize("heating", [True, False])
@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_added_names_are_reserved(case: Case, form: str, heating: bool) -> None:
    cards = resistor_cards(form, "rx", "a", "b", HOT, case.model, heating)
    for card in cards:
        assert NAME.match(card), card
    shared = preamble(form, [case.model], heating)
    for card in shared:
        assert card.startswith(".model hw_") or NAME.match(card), card
    for node in added_nodes(form, "rx", case.model, heating):
        assert node.startswith("hw_")
        assert any(node in card for card in [*cards, *shared])
    text = " ".join(cards)
    assert (HOT in text) == (heating or not falls_back_to_constant(case, form))


def falls_back_to_constant(case: Case, form: str) -> bool:
    """True when *form* writes a resistor whose cards never read the hot node."""
    return form == "switch" and case.id == "linear-zero-tc1"


@pytest.mark.parametrize("heating", [True, False])
def test_zero_tc1_is_a_plain_resistor(heating: bool) -> None:
    model = get("linear").from_params({"tc1": 0.0}, 330.0)
    cards = resistor_cards("switch", "r7", "n1", "n2", "hw_t_r7", model, heating)
    assert cards[0] == "Rhw_c_r7 n1 n2 330.0"
    assert len(cards) == (2 if heating else 1)


@pytest.mark.parametrize(("model_name", "params", "expected"), [
    ("linear", {"tc1": 0.004}, False),
    ("quadratic", {"tc2": 1e-6}, True),
    ("ntc-beta", {"beta": 3435.0}, True),
    ("linear", {"tc1": 0.0}, True),
])  # fmt: skip
def test_divider_form_falls_back_outside_linear_models(
    model_name: str, params: dict[str, float], expected: bool
) -> None:
    model = get(model_name).from_params(params, 100.0)
    assert (not get_form("divider").handles(model)) is expected
    assert (not get_form("switch").handles(model)) is False
    assert (not get_form("reference").handles(model)) is False


def test_parts_with_equal_parameters_share_one_model_card() -> None:
    same = [get("linear").from_params({"tc1": 0.004}, 10.0) for _ in range(3)]
    other = get("linear").from_params({"tc1": 0.004}, 12.0)
    # Heated: the switch of R(T) - R0/8 and the product V*V'/(R0/8); unheated: the switch
    # of R(T) alone.
    assert len(preamble("switch", same)) == 2
    assert len(preamble("switch", [*same, other])) == 4
    assert len(preamble("switch", same, heating=False)) == 1
    exponential = [get("exponential").from_params({"tce": 0.3}, 10.0) for _ in range(2)]
    assert len(preamble("switch", exponential)) == 2  # the log switch and the product V*I


@pytest.mark.parametrize(("model_name", "params", "heating", "sense"), [
    ("linear", {"tc1": 0.004}, True, "10.0"),  # R0/8: the switch's zero on the cold side
    ("linear", {"tc1": -0.0005}, True, "-80.0"),  # -R0: the cold side when R falls with T
    ("linear", {"tc1": 0.004}, False, None),
    ("exponential", {"tce": 0.3}, True, "branch"),
    ("exponential", {"tce": 0.3}, False, None),
    ("quadratic", {"tc1": 3.9083e-3, "tc2": -5.775e-7}, True, "branch"),
    ("ntc-beta", {"beta": 3435.0}, True, "branch"),
])  # fmt: skip
def test_switch_form_reads_the_current_where_the_docstring_says(
    model_name: str, params: dict[str, float], heating: bool, sense: str | None
) -> None:
    model = get(model_name).from_params(params, 80.0)
    cards = resistor_cards("switch", "r7", "n1", "n2", "hw_t_r7", model, heating)
    product = [card for card in cards if card.startswith("Ahw_p_r7 ")]
    if sense is None:
        assert not product and "hw_x_r7" not in " ".join(cards)
    elif sense != "branch":
        # The fixed resistor from n1 to hw_x_r7, the switch on to n2.
        assert f"Rhw_c_r7 n1 hw_x_r7 {sense}" in cards
        assert product == ["Ahw_p_r7 [%vd(n1 n2) %vd(n1 hw_x_r7)] %id(0 hw_t_r7) hw_sq_" +
                           product[0].rsplit("hw_sq_", 1)[1]]  # fmt: skip
        assert not any(card.startswith("Rhw_c_") for card in preamble("switch", [model]))
    else:
        assert product[0].startswith("Ahw_p_r7 [%vd(n1 n2) %id(n1 hw_x_r7)] ")


def test_unknown_form_names_the_known_ones() -> None:
    model = get("linear").from_params({"tc1": 0.004}, 10.0)
    with pytest.raises(ValueError, match="switch"):
        resistor_cards("fastest", "r1", "a", "b", HOT, model, True)


@pytest.mark.ngspice
@pytest.mark.parametrize("case", CASES, ids=lambda c: c.id)
def test_part_inside_a_subcircuit_matches_top_level(case: Case) -> None:
    # The emitter puts a part in a subcircuit copy and makes its thermal nodes .global;
    # the shared nodes of the preamble must be made .global the same way.
    top = simulate(deck(case, "switch", ".op"))
    inner = resistor_cards("switch", "x1_rx", "a", "n", HOT, case.model, True)
    shared = shared_nodes("switch", [case.model])
    text = deck(case, "switch", ".op").replace(
        "\n".join(resistor_cards("switch", "rx", "a", "0", HOT, case.model, True)),
        "\n".join(["X1 a 0 cell", ".subckt cell a n", *inner, ".ends"]),
    )
    text = text.replace(".op", ".global " + " ".join([HOT, *shared]) + "\n.op")
    out = simulate(text)
    assert out[f"v({HOT})"][0] == pytest.approx(top[f"v({HOT})"][0], rel=1e-9)


@pytest.mark.parametrize(
    ("form", "files", "lifted"),
    [
        ("switch", [("t\nV1 a 0 1\nR1 a 0 1k\n.end\n", True)], True),
        ("divider", [("t\nR1 a 0 1k\n", True)], True),
        ("reference", [("t\nR1 a 0 1k\n", True)], False),  # no code models written
        ("switch", [("amplifier bench (a title)\nR1 a 0 1k\n", True)], True),
        ("switch", [("t\nR1 a 0 1k\n  A1 in out gain1\n", True)], False),  # the user's own
        ("switch", [("t\nR1 a 0 1k\n", True), ("a2 x y amp\n", False)], False),  # included
        ("switch", [("t\n.options CONVSTEP=0.1\n", True)], False),  # the user's own setting
        ("switch", [("t\n* convabsstep left at its default\n", True)], False),  # even so
    ],
)
def test_step_limit_lifted_only_where_nothing_else_uses_it(
    form: str, files: list[tuple[str, bool]], lifted: bool
) -> None:
    assert (STEP_LIMIT_OPTION in step_limit_options(form, files)) is lifted


@pytest.mark.ngspice
@pytest.mark.parametrize("case", CASES + STEEP, ids=lambda c: c.id)
def test_step_limit_lifted_keeps_the_solution_under_an_ac_drive(case: Case) -> None:
    # Where the limit costs iterations (a sine crossing zero, benchmarks/bench_standalone.py)
    # lifting it must leave the solution as it was, up to the Newton stop.
    drive = f"V1 in 0 SIN(0 {case.volts!r} {50 / case.tstop!r})"
    analysis = f".tran {case.tstop / 400!r} {case.tstop!r}"
    temps = []
    for lifted in (True, False):
        text = deck(case, "switch", analysis, lifted=lifted)
        text = text.replace(f"V1 in 0 DC {case.volts!r}", drive)
        temps.append(simulate(text)[f"v({HOT})"][-1])
    assert temps[0] == pytest.approx(temps[1], rel=1e-7)


@pytest.mark.parametrize("form", list(FORMS))
@pytest.mark.parametrize("heating", [True, False])
@pytest.mark.parametrize("case", CASES + STEEP, ids=lambda c: c.id)
def test_every_model_card_is_used_and_every_used_one_defined(
    case: Case, form: str, heating: bool
) -> None:
    cards = resistor_cards(form, "rx", "a", "b", HOT, case.model, heating)
    shared = preamble(form, [case.model], heating)
    defined = {c.split()[1] for c in shared if c.startswith(".model")}
    used = {c.split()[-1] for c in cards if c.startswith("A")}
    assert used == defined


@pytest.mark.parametrize("form", list(FORMS))
def test_code_model_decks_say_that_ngspice_fixes_trtol(form: str) -> None:
    monitor = Path(__file__).parents[1] / "decks" / "current-monitor"
    text = emit_files(str(monitor / "monitor.cir"), str(monitor / "monitor.thermal.toml"),
                      form=form).text  # fmt: skip
    assert (TRTOL_NOTE in text) is (form != "reference")


@pytest.mark.ngspice
def test_ngspice_runs_code_model_decks_at_trtol_one() -> None:
    # What TRTOL_NOTE says, seen on ngspice 39 (manual 15.1.4: "If XSPICE is configured and
    # 'A' devices are included, the value is internally set to 1"): an RC-L deck whose step
    # the truncation error sets takes more time points once it holds one idle code model,
    # and .options trtol=7 does not bring them back.
    base = (
        "trtol\nV1 in 0 PULSE(0 1 0 1u 1u 50u 100u)\nR1 in a 1k\nC1 a 0 10n\nL1 a b 1m\n"
        "R2 b 0 50\n"
    )
    idle = (
        "Ax a %gd(a 0) hw_idle\n"
        ".model hw_idle aswitch(cntl_off=0 cntl_on=1 r_off=1e12 r_on=1e12 log=FALSE)\n"
    )
    counts = []
    for extra in ("", idle, idle + ".options trtol=7\n"):
        text = base + extra + ".tran 1u 10m\n.end\n"
        counts.append(len(simulate(text)["v(a)"]))
    plain, coded, asked = counts
    assert coded > 1.1 * plain and asked == coded
