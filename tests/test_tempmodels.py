"""Temperature models against published tables, independent computations and ngspice itself."""

from __future__ import annotations

import math
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from heatweave.quantities import format_number
from heatweave.tempmodels import REGISTRY, TempModel, UnknownModelError, get
from heatweave.tempmodels.base import ParamValue

NGSPICE = shutil.which("ngspice")
needs_ngspice = pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed")


def build(
    name: str, params: dict[str, ParamValue], r_nominal: float = 1000.0, tref: float | None = None
) -> TempModel:
    return get(name).from_params(params, r_nominal, tref)


# --------------------------------------------------------------------------- published values

# IEC 60751 Pt100 table (R0 = 100 ohm at 0 degC); the first three values are those quoted in
# the standard's table and on countless data sheets, the rest are from memory of that table.
PT100_TABLE = [
    (100.0, 138.51),  # IEC 60751
    (200.0, 175.86),  # IEC 60751
    (-100.0, 60.26),  # IEC 60751
    (0.0, 100.00),  # IEC 60751 (definition of R0)
    (-200.0, 18.52),  # IEC 60751, from memory
    (-50.0, 80.31),  # IEC 60751, from memory
    (50.0, 119.40),  # IEC 60751, from memory
    (300.0, 212.05),  # IEC 60751, from memory
    (500.0, 280.98),  # IEC 60751, from memory
    (850.0, 390.48),  # IEC 60751, from memory (top of the range)
]


@pytest.mark.parametrize(("t_c", "ohm"), PT100_TABLE)
def test_pt100_matches_iec60751_table(t_c: float, ohm: float) -> None:
    # The deck says "100" for a Pt100: r0 = 100 ohm at 0 degC (rtd's tref defaults to 0).
    assert build("rtd", {}, 100.0).resistance(t_c) == pytest.approx(ohm, abs=0.01)


@pytest.mark.parametrize(("t_c", "ohm"), [(100.0, 1385.05), (-100.0, 602.56)])
def test_pt1000_is_ten_pt100(t_c: float, ohm: float) -> None:
    # IEC 60751: Pt1000 = 10 x Pt100 (1385.05 ohm at 100 degC, from memory of the table).
    assert build("rtd", {}, 1000.0).resistance(t_c) == pytest.approx(ohm, abs=0.1)


def test_rtd_r0_from_deck_value_at_tref() -> None:
    # A Pt100 whose deck value is its 25 degC resistance: 109.73 ohm (IEC 60751, from memory).
    rtd = build("rtd", {}, 109.73, tref=25.0)
    assert rtd.resistance(0.0) == pytest.approx(100.0, abs=0.01)


@pytest.mark.parametrize(("t_c", "factor"), [(25.0, 0.981), (30.0, 0.962)])
def test_copper_tcr_iec(t_c: float, factor: float) -> None:
    # Copper: alpha_20 = 0.00393 /K (IEC 60028 annealed copper); the conductor-resistance
    # correction factors to 20 degC, k_t = 1/(1 + 0.00393 (t - 20)), tabulated in IEC 60228
    # Annex B (values from memory, 3 digits).
    wire = build("linear", {"tc1": 0.00393}, 1.0, tref=20.0)
    assert 1.0 / wire.resistance(t_c) == pytest.approx(factor, abs=5e-4)
    # The same copper written in ppm/K.
    assert build("linear", {"tc1_ppm": 3930}, 1.0, tref=20.0).resistance(t_c) == pytest.approx(
        wire.resistance(t_c), rel=1e-12
    )


@pytest.mark.parametrize(
    ("t_c", "r25", "beta"),
    [(0.0, 10e3, 3435.0), (85.0, 10e3, 3435.0), (-40.0, 4.7e3, 3950.0), (125.0, 100e3, 4250.0)],
)
def test_ntc_beta_from_definition(t_c: float, r25: float, beta: float) -> None:
    # Computed from the definition R = R25 exp(B (1/T - 1/298.15 K)) by hand.
    expected = r25 * math.exp(beta * (1.0 / (t_c + 273.15) - 1.0 / 298.15))
    assert build("ntc-beta", {"r25": r25, "beta": beta}).resistance(t_c) == pytest.approx(
        expected, rel=1e-12
    )


@pytest.mark.parametrize(("t1", "t2"), [(25.0, 85.0), (0.0, 50.0), (-20.0, 120.0)])
def test_ntc_beta_recovers_beta_between_two_points(t1: float, t2: float) -> None:
    # Data-sheet definition of B(T1/T2) = ln(R1/R2) / (1/T1 - 1/T2) (kelvin).
    ntc = build("ntc-beta", {"beta": 3380.0}, 47e3)
    r1, r2 = ntc.resistance(t1), ntc.resistance(t2)
    beta = math.log(r1 / r2) / (1.0 / (t1 + 273.15) - 1.0 / (t2 + 273.15))
    assert beta == pytest.approx(3380.0, rel=1e-12)


def test_ntc_beta_deck_value_holds_at_tref() -> None:
    ntc = build("ntc-beta", {"beta": 3435.0}, 12e3, tref=40.0)
    assert ntc.resistance(40.0) == pytest.approx(12e3, rel=1e-14)


# Steinhart-Hart coefficients widely quoted for a 10 kohm (25 degC) thermistor (from memory).
SH_10K = {"a": 1.129148e-3, "b": 2.34125e-4, "c": 8.76741e-8}
SH_CASES = [SH_10K, {"a": 1.4e-3, "b": 2.37e-4, "c": 9.9e-8}, {"a": 1.0e-3, "b": 2.5e-4, "c": 0.0}]


@pytest.mark.parametrize("coeffs", SH_CASES)
@pytest.mark.parametrize("t_c", [-40.0, 0.0, 25.0, 100.0, 150.0])
def test_steinhart_hart_closed_form_round_trip(coeffs: dict[str, float], t_c: float) -> None:
    sh = build("ntc-sh", dict(coeffs))
    x = math.log(sh.resistance(t_c))
    inv_t = coeffs["a"] + coeffs["b"] * x + coeffs["c"] * x**3  # the forward equation
    assert 1.0 / inv_t - 273.15 == pytest.approx(t_c, abs=1e-9)
    # Against scipy's bracketing root finder on the forward equation.
    root = brentq(
        lambda lnr: coeffs["a"] + coeffs["b"] * lnr + coeffs["c"] * lnr**3 - 1 / (t_c + 273.15),
        -10.0,
        40.0,
        xtol=1e-14,
        rtol=1e-15,
    )
    assert x == pytest.approx(root, rel=1e-11)


def test_steinhart_hart_10k_is_10k_at_25c() -> None:
    # The quoted coefficient set describes a 10 kohm part at 25 degC (from memory, 0.1 %).
    assert build("ntc-sh", dict(SH_10K)).resistance(25.0) == pytest.approx(10e3, rel=1e-3)


def test_exponential_matches_ngspice_statement() -> None:
    # ngspice manual 3.3.1 eq. 12, and the 39.3 check tce = 0.5 over +20 K -> 1.01^10.
    model = build("exponential", {"tce": 0.5}, 1000.0, tref=27.0)
    assert model.resistance(47.0) == pytest.approx(1000.0 * 1.01**10, rel=1e-13)


def test_ptc_shape() -> None:
    ptc = build("ptc", {"r25": 50.0, "t_switch": 110.0, "decade": 5.0, "r_max": 5e5})
    assert ptc.resistance(25.0) == pytest.approx(50.0, rel=1e-6)  # cold plateau
    assert ptc.resistance(110.0) == pytest.approx(100.0, rel=1e-3)  # about 2 r25 at switch
    # Tenfold per decade well above the switch and far below the cap.
    uncapped = build("ptc", {"r25": 50.0, "t_switch": 110.0, "decade": 5.0, "r_max": 5e12})
    assert uncapped.resistance(135.0) / uncapped.resistance(130.0) == pytest.approx(10.0, rel=1e-3)
    assert ptc.resistance(400.0) == pytest.approx(5e5, rel=1e-9)  # levels off at r_max
    temps = np.linspace(-50, 300, 3501)
    ohms = ptc.resistance(temps)
    # Monotonic, up to a few rounding steps where it has levelled off at r_max.
    assert np.all(np.diff(ohms) >= -1e-14 * ohms[1:])


def test_table_flat_outside_and_linear_inside() -> None:
    table = build("table", {"points": ((0.0, 100.0), (50.0, 150.0), (100.0, 300.0))})
    assert table.resistance(-20.0) == 100.0
    assert table.resistance(200.0) == 300.0
    assert table.resistance(75.0) == pytest.approx(225.0, rel=1e-15)
    ratio = build("table", {"ratio": ((0.0, 1.0), (100.0, 2.0))}, 1500.0, tref=50.0)
    assert ratio.resistance(50.0) == pytest.approx(1500.0, rel=1e-15)
    assert ratio.resistance(100.0) == pytest.approx(2000.0, rel=1e-15)


# --------------------------------------------------------------------------- every model

CASES: list[tuple[str, str, dict[str, ParamValue], float, float | None]] = [
    ("linear", "linear", {"tc1_ppm": 3930.0}, 1000.0, 20.0),
    ("quadratic", "quadratic", {"tc1": 3.9e-3, "tc2_ppm": -0.6}, 100.0, None),
    ("exponential", "exponential", {"tce": 0.7}, 2200.0, 27.0),
    ("rtd", "rtd", {}, 100.0, None),
    ("rtd-custom", "rtd", {"r0": 1000.0, "a": 3.85e-3, "b": -5.8e-7, "c": -4.2e-12}, 1.0, None),
    ("ntc-beta", "ntc-beta", {"beta": 3435.0}, 10e3, None),
    ("ntc-sh", "ntc-sh", dict(SH_10K), 10e3, None),
    ("ntc-sh-c0", "ntc-sh", {"a": 1.0e-3, "b": 2.5e-4, "c": 0.0}, 1.0, None),
    ("ptc", "ptc", {"t_switch": 120.0, "decade": 4.0}, 47.0, None),
    # A near-step PTC whose exponent reaches the +-200 clamp inside the sweep.
    ("ptc-steep", "ptc", {"r25": 10.0, "t_switch": 80.0, "alpha_pct": 5000.0}, 1.0, None),
    ("table", "table", {"points": ((-20.0, 900.0), (25.0, 1000.0), (150.0, 1600.0))}, 1.0, None),
    ("table-ratio", "table", {"ratio": ((0.0, 1.0), (60.0, 1.2), (61.0, 1.5))}, 330.0, None),
]
CASE_IDS = [c[0] for c in CASES]


def _model(case: tuple[str, str, dict[str, ParamValue], float, float | None]) -> TempModel:
    _, name, params, r_nominal, tref = case
    return build(name, params, r_nominal, tref)


def _read_ascii_raw(path: Path) -> dict[str, np.ndarray]:
    """Vectors of an ngspice ASCII rawfile (one real plot)."""
    lines = path.read_text().splitlines()
    count = int(next(ln for ln in lines if ln.startswith("No. Variables:")).split(":")[1])
    start = lines.index("Variables:") + 1
    names = [lines[start + i].split()[1] for i in range(count)]
    values = [float(ln.split()[-1]) for ln in lines[lines.index("Values:") + 1 :] if ln.strip()]
    table = np.array(values).reshape(-1, count)
    return {name: table[:, i] for i, name in enumerate(names)}


def _run(deck: str, tmp_path: Path) -> dict[str, np.ndarray]:
    assert NGSPICE is not None
    cir, raw = tmp_path / "deck.cir", tmp_path / "deck.raw"
    cir.write_text(deck)
    done = subprocess.run(
        [NGSPICE, "-b", "-r", str(raw), str(cir)], capture_output=True, text=True, timeout=60
    )
    assert done.returncode == 0, done.stdout + done.stderr
    return _read_ascii_raw(raw)


class ParamNumbers:
    """A NumberFormat that declares each constant as a `.param` (full double precision)."""

    def __init__(self) -> None:
        self.cards: list[str] = []

    def __call__(self, value: float) -> str:
        name = f"hwk{len(self.cards)}"
        self.cards.append(f".param {name}={format_number(value)}")
        return name


# Newton's method must converge far beyond ngspice's default reltol 1e-3 for a 1e-9 check.
TIGHT = ".options filetype=ascii reltol=1e-14 vntol=1e-15 abstol=1e-18"


def _sweep(literal: bool, tmp_path: Path) -> dict[str, np.ndarray]:
    """Every case's expression, with temp = v(t), evaluated by ngspice over -50..200 degC."""
    numbers = ParamNumbers()
    sources = "\n".join(
        f"B{i} n{i} 0 V="
        + (_model(case).expression("v(t)") if literal else _model(case).expression("v(t)", numbers))
        for i, case in enumerate(CASES)
    )
    deck = "\n".join(
        [
            "temperature model expressions",
            *numbers.cards,
            "VT t 0 0",
            sources,
            ".dc VT -50 200 0.5",
            TIGHT,
            ".end",
            "",
        ]
    )
    return _run(deck, tmp_path)


@pytest.fixture(scope="module")
def ngspice_params(tmp_path_factory: pytest.TempPathFactory) -> dict[str, np.ndarray]:
    return _sweep(False, tmp_path_factory.mktemp("params"))


@pytest.fixture(scope="module")
def ngspice_literals(tmp_path_factory: pytest.TempPathFactory) -> dict[str, np.ndarray]:
    return _sweep(True, tmp_path_factory.mktemp("literals"))


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("index", range(len(CASES)), ids=CASE_IDS)
def test_expression_evaluated_by_ngspice(index: int, ngspice_params: dict[str, np.ndarray]) -> None:
    # Constants as .param (full precision); ngspice's rawfile has 16 digits: 1e-9 relative.
    temps = ngspice_params["v(t)"]
    expected = _model(CASES[index]).resistance(temps)
    assert np.allclose(ngspice_params[f"v(n{index})"], expected, rtol=1e-9, atol=0.0)


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("index", range(len(CASES)), ids=CASE_IDS)
def test_literal_expression_evaluated_by_ngspice(
    index: int, ngspice_literals: dict[str, np.ndarray]
) -> None:
    # Constants written inline: ngspice 39.3 rounds them to 11 significant digits (checked
    # in test_ngspice_rounds_literals), and ntc-sh's Cardano form amplifies that rounding
    # about a hundredfold, so the tolerance here is 1e-8.
    temps = ngspice_literals["v(t)"]
    expected = _model(CASES[index]).resistance(temps)
    assert np.allclose(ngspice_literals[f"v(n{index})"], expected, rtol=1e-8, atol=0.0)


@needs_ngspice
@pytest.mark.ngspice
def test_ngspice_rounds_literals(tmp_path: Path) -> None:
    # The reason for NumberFormat: a literal loses digits in a B source, a .param does not.
    got = _run(
        "literal precision\n.param k=0.12345678901234567\nB1 a 0 V=0.12345678901234567\n"
        "B2 b 0 V=k\n.op\n.options filetype=ascii\n.end\n",
        tmp_path,
    )
    assert got["v(a)"][0] == pytest.approx(0.12345678901, rel=1e-13)
    assert got["v(b)"][0] == pytest.approx(0.12345678901234567, rel=1e-15)


@needs_ngspice
@pytest.mark.ngspice
def test_ngspice_exp_saturates_beyond_clamp(tmp_path: Path) -> None:
    # Why the PTC clamps its exponent at 200: ngspice 39.3's B-source exp saturates near 1e99.
    got = _run(
        "exp check\nVX x 0 0\nB1 y 0 V=exp(v(x))\n.dc VX 150 300 50\n"
        ".options filetype=ascii\n.end\n",
        tmp_path,
    )
    x, y = got["v(x)"], got["v(y)"]
    assert y[x == 200.0][0] == pytest.approx(math.exp(200.0), rel=1e-12)
    assert y[x == 300.0][0] < 1e100 < math.exp(300.0)


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize(
    ("name", "card", "params"),
    [
        ("linear", "tc1=3.9e-3", {"tc1": 3.9e-3}),
        ("quadratic", "tc1=3.9e-3 tc2=-6e-7", {"tc1": 3.9e-3, "tc2": -6e-7}),
        ("exponential", "tce=0.5", {"tce": 0.5}),
        ("exponential", "tce=-1.2", {"tce": -1.2}),
    ],
)
def test_models_match_ngspice_resistor(
    name: str, card: str, params: dict[str, ParamValue], tmp_path: Path
) -> None:
    # ngspice's own resistor with tc1/tc2/tce at .dc TEMP; TNOM defaults to 27 degC (15.1.1).
    got = _run(
        f"resistor temperature\nV1 a 0 1\nR1 a 0 1k {card}\n.dc TEMP -50 200 10\n"
        ".options filetype=ascii\n.end\n",
        tmp_path,
    )
    temps = got["temp-sweep"] if "temp-sweep" in got else got[next(iter(got))]
    ohms = 1.0 / -got["i(v1)"]
    expected = build(name, params, 1000.0, tref=27.0).resistance(temps)
    assert np.allclose(ohms, expected, rtol=1e-9, atol=0.0)


@pytest.mark.parametrize("index", range(len(CASES)), ids=CASE_IDS)
def test_slope_matches_numerical_derivative(index: int) -> None:
    model = _model(CASES[index])
    h = 1e-4
    # Points between table breakpoints and away from the PTC clamp, so R is smooth around them.
    temps = np.array([-43.3, -7.7, 13.1, 37.9, 59.3, 79.6, 80.2, 104.7, 121.3, 163.9, 187.1])
    numeric = (model.resistance(temps + h) - model.resistance(temps - h)) / (2 * h)
    scale = np.maximum(np.abs(numeric), np.abs(model.resistance(temps)) * 1e-6)
    assert np.all(np.abs(model.slope(temps) - numeric) <= 1e-6 * scale)


def test_scalar_in_scalar_out() -> None:
    model = build("linear", {"tc1": 1e-3})
    assert isinstance(model.resistance(30.0), float)
    assert isinstance(model.slope(30.0), float)
    assert model.resistance(np.array([25.0, 35.0])).shape == (2,)


# --------------------------------------------------------------------------- warnings, registry

WARNING_CASES = [
    ("linear", {"tc1": 3900.0}, "tc1", "write tc1_ppm = 3900"),
    ("linear", {"tc1": 0.05}, "tc1", "tc1 is in 1/K, tc1_ppm in ppm/K"),
    ("linear", {"tc1_ppm": 0.0039}, "tc1_ppm", "write tc1 = 0.0039"),
    ("quadratic", {"tc2": 12.0}, "tc2", "write tc2_ppm = 12"),
    ("exponential", {"tce": 700.0}, "tce", "tce = 0.07"),
    ("ntc-beta", {"beta": 3.435}, "beta", "beta = 3435"),
    ("rtd", {"a": 3908.3}, "a", "not ppm/K"),
    ("ptc", {"t_switch": 100.0, "decade": 0.05}, "decade", "decade = 5"),
    ("ntc-sh", {"a": 1.1, "b": 2.3e-4, "c": 8.8e-8}, "a", "T in kelvin"),
]


@pytest.mark.parametrize(("name", "params", "key", "hint_part"), WARNING_CASES)
def test_unit_slip_warnings(
    name: str, params: dict[str, ParamValue], key: str, hint_part: str
) -> None:
    found = get(name).warnings(params)
    assert [w.key for w in found] == [key]
    assert found[0].hint is not None and hint_part in found[0].hint


@pytest.mark.parametrize(
    ("name", "params"),
    [
        ("linear", {"tc1_ppm": 50.0}),
        ("ntc-beta", {"beta": 3435.0}),
        ("rtd", {}),
        ("ptc", {"t_switch": 120.0, "decade": 5.0}),
    ],
)
def test_plausible_values_give_no_warning(name: str, params: dict[str, ParamValue]) -> None:
    assert get(name).warnings(params) == ()


def test_registry_has_every_model_once() -> None:
    assert sorted(REGISTRY) == sorted(
        ["linear", "quadratic", "exponential", "rtd", "ntc-beta", "ntc-sh", "ptc", "table"]
    )


def test_unknown_model_suggests_closest() -> None:
    with pytest.raises(UnknownModelError) as err:
        get("ntc_beta")
    assert isinstance(err.value, KeyError)
    assert err.value.suggestions[0] == "ntc-beta"
    assert 'did you mean "ntc-beta"?' in err.value.hint()


@pytest.mark.parametrize(
    ("name", "params"),
    [
        ("ntc-sh", {"a": 1e-3, "b": 2e-4, "c": -1e-7}),
        ("table", {"points": ((10.0, 1.0), (10.0, 2.0))}),
        ("table", {"points": ((10.0, 1.0), (20.0, -2.0))}),
        ("ptc", {"r25": 100.0, "t_switch": 100.0, "decade": 5.0, "r_max": 50.0}),
    ],
)
def test_impossible_parameters_raise_value_error(name: str, params: dict[str, ParamValue]) -> None:
    with pytest.raises(ValueError):
        build(name, params)
