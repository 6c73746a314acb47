"""The example decks in ``decks/``: each one emits, simulates and gives its key numbers.

The numbers the examples' notes quote are checked here against computations that share
nothing with heatweave's emitter or ngspice:

* current monitor: a numpy fixed point of the electrical nodal equations (Kirchhoff) and
  the linear thermal network (heat balance), each resistor at its own temperature;
* RTD: IEC 60751 table values for the cold resistance and a scipy ``brentq`` root of the
  self-heating balance ``T = Ta + I^2 R(T) Rth`` for a current-driven resistor;
* inrush limiter: Ohm's law at the instant the bus switch closes, ``V / (R_ntc + R_series)``,
  with the NTC at its temperature of that moment, and a ``brentq`` root for the running state;
* PWM heater: the mean power ``D V^2 R / (R + R_on)^2`` times the total thermal resistance,
  solved with ``brentq`` because the heater's resistance depends on its temperature.

The element values come from the decks, the thermal values from the annotation files (so
an edited example is checked as written); the temperature laws are written out here.
"""

from __future__ import annotations

import itertools
import json
import math
import re
import shutil
import subprocess
from collections.abc import Callable
from functools import cache
from pathlib import Path

import numpy as np
import numpy.typing as npt
import pytest
from click.testing import CliRunner
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from heatweave.annotation import load
from heatweave.cli import main
from heatweave.emit.emitter import Inputs, load_inputs
from heatweave.quantities import parse_number
from heatweave.run.prepare import RunOptions
from heatweave.run.results import main_plot
from heatweave.run.runner import RunOutcome, run, run_baseline
from heatweave.settle.periodic import SettleOptions, settle

DECKS = Path(__file__).resolve().parent.parent / "decks"
EXAMPLES = (
    ("current-monitor", "monitor"),
    ("rtd-excitation", "rtd"),
    ("inrush-limiter", "inrush"),
    ("pwm-heater", "heater"),
)
KELVIN = 273.15
FloatArray = npt.NDArray[np.float64]

needs_ngspice = pytest.mark.skipif(shutil.which("ngspice") is None, reason="needs ngspice")


def paths(folder: str, name: str) -> tuple[str, str]:
    """An example's deck and its annotation file (the default name beside the deck)."""
    deck = DECKS / folder / f"{name}.cir"
    return str(deck), str(deck.with_name(f"{name}.thermal.toml"))


@cache
def inputs_of(folder: str, name: str) -> Inputs:
    return load_inputs(*paths(folder, name))


@cache
def outcome_of(folder: str, name: str) -> RunOutcome:
    """One run of an example with its own analyses (shared by the tests of that example)."""
    return run(*paths(folder, name), inputs=inputs_of(folder, name))


def numbers(inputs: Inputs, element: str, start: int) -> list[float]:
    """The number fields of an element card from field *start* on (PULSE, PWL lists)."""
    resolved = inputs.index.resolve(element)
    assert resolved is not None, element
    found = [parse_number(f) for f in resolved.card.fields()[start:]]
    assert None not in found, (element, found)
    return [f for f in found if f is not None]


def value(inputs: Inputs, element: str, field: int = 3) -> float:
    """A number field of an element card of the deck (field 3: a two-terminal value)."""
    return numbers(inputs, element, field)[0]


def model_value(inputs: Inputs, model: str, key: str) -> float:
    """A ``key=value`` number of a ``.model`` card of the deck."""
    fields = inputs.index.models[model.lower()].fields()
    number = parse_number(fields[fields.index(key) + 2])
    assert number is not None, (model, key)
    return number


def spec_of(inputs: Inputs, element: str) -> dict[str, float]:
    """Thermal and model numbers of the part table bound to *element*."""
    for bound in inputs.bound:
        if bound.element.lower() == element.lower():
            spec = bound.spec
            numbers = {k: float(v) for k, v in spec.params if isinstance(v, int | float)}
            numbers["rth"] = spec.network.rth_total
            return numbers
    raise KeyError(element)


# -- every example: valid annotations, every part bound, a deck ngspice accepts -------------


@pytest.mark.parametrize(("folder", "name"), EXAMPLES)
def test_annotation_is_valid_and_every_part_binds(folder: str, name: str) -> None:
    _, annotation_path = paths(folder, name)
    annotation = load(annotation_path)
    assert annotation.warnings == ()
    inputs = inputs_of(folder, name)
    used = {bound.spec.pattern for bound in inputs.bound}
    assert used == {spec.pattern for spec in annotation.parts}
    for bound in inputs.bound:
        assert inputs.index.resolve(bound.element) is not None
    assert (DECKS / folder / "README.md").is_file()


@needs_ngspice
@pytest.mark.parametrize(("folder", "name"), EXAMPLES)
def test_ngspice_accepts_the_plain_deck(folder: str, name: str, tmp_path: Path) -> None:
    deck, _ = paths(folder, name)
    done = subprocess.run(
        ["ngspice", "-b", "-r", str(tmp_path / "out.raw"), deck],
        capture_output=True,
        text=True,
        timeout=60,
        check=False,
    )
    log = done.stdout + done.stderr
    assert done.returncode == 0, log
    assert not re.search(r"\berror\b", log, re.IGNORECASE), log


def test_rtd_annotation_ambient_is_the_bath_at_zero() -> None:
    _, annotation_path = paths("rtd-excitation", "rtd")
    assert load(annotation_path).ambient.temperature == 0.0


# -- current monitor ------------------------------------------------------------------------

MONITOR = ("current-monitor", "monitor")


def linear_r(inputs: Inputs, element: str, t_c: float) -> float:
    """R = R0 (1 + tc1 (T - 25)): the linear TCR law (ngspice manual 3.3.3, eq. 14)."""
    tc1 = spec_of(inputs, element)["tc1_ppm"] * 1e-6
    return value(inputs, element) * (1.0 + tc1 * (t_c - 25.0))


def monitor_circuit(inputs: Inputs, temps: dict[str, float]) -> tuple[dict[str, float], float]:
    """Powers of the five resistors and V(out) by nodal analysis of the monitor at the given
    part temperatures: unknowns V(sh), V(inp), V(inn); V(out) = A (V(inp) - V(inn))."""
    r = {name: linear_r(inputs, name, temps[name]) for name in ("RSH", "R1", "R2", "R3", "R4")}
    current, gain = value(inputs, "ILOAD", 4), value(inputs, "EAMP", 5)
    g = {name: 1.0 / res for name, res in r.items()}
    matrix = np.array(
        [
            [g["RSH"] + g["R3"], -g["R3"], 0.0],
            [-g["R3"], g["R3"] + g["R4"], 0.0],
            [0.0, -gain * g["R2"], g["R1"] + g["R2"] + gain * g["R2"]],
        ]
    )
    v_sh, v_inp, v_inn = np.linalg.solve(matrix, np.array([current, 0.0, 0.0]))
    v_out = gain * (v_inp - v_inn)
    drops = {"RSH": v_sh, "R3": v_sh - v_inp, "R4": v_inp, "R1": v_inn, "R2": v_out - v_inn}
    return {name: drops[name] ** 2 / r[name] for name in r}, float(v_out)


def thermal_matrices(inputs: Inputs) -> tuple[list[str], FloatArray, FloatArray, FloatArray]:
    """Node names, conductance matrix G (W/K), capacitance diagonal C (J/K) and the vector of
    conductances to ambient, from the annotation's nodes, paths and single-stage parts."""
    annotation = inputs.annotation
    names = [b.element for b in inputs.bound] + [n.name for n in annotation.nodes]
    at = {name: k for k, name in enumerate(names)}
    size = len(names)
    g_matrix = np.zeros((size, size))
    c_diag = np.zeros(size)
    to_ambient = np.zeros(size)

    def connect(a: str, b: str, rth: float) -> None:
        g = 1.0 / rth
        g_matrix[at[a], at[a]] += g
        if b == "ambient":
            to_ambient[at[a]] += g
            return
        g_matrix[at[b], at[b]] += g
        g_matrix[at[a], at[b]] -= g
        g_matrix[at[b], at[a]] -= g

    for bound in inputs.bound:
        ((rth, cth),) = bound.spec.network.stages
        connect(bound.element, bound.spec.to, rth)
        c_diag[at[bound.element]] = cth
    for node in annotation.nodes:
        connect(node.name, node.to, node.rth)
        c_diag[at[node.name]] = node.cth
    for path in annotation.paths:
        connect(*path.between, path.rth)
    return names, g_matrix, c_diag, to_ambient


def monitor_steady_state(inputs: Inputs, ambient: float) -> tuple[dict[str, float], float]:
    """Temperatures of parts and nodes, and V(out), at the coupled steady state: alternate
    the nodal solve and the heat balance G T = P + g_amb Ta until nothing moves."""
    names, g_matrix, _c, to_ambient = thermal_matrices(inputs)
    parts = [b.element for b in inputs.bound]
    temps = dict.fromkeys(names, ambient)
    v_out = math.nan
    for _ in range(50):
        powers, v_out = monitor_circuit(inputs, temps)
        heat = np.array([powers.get(name, 0.0) for name in names]) + to_ambient * ambient
        solved = np.linalg.solve(g_matrix, heat)
        change = max(abs(solved[k] - temps[name]) for k, name in enumerate(names))
        temps = {name: float(solved[k]) for k, name in enumerate(names)}
        if change < 1e-12:
            break
    assert set(parts) <= set(temps)
    return temps, v_out


@needs_ngspice
def test_monitor_steady_state_matches_heat_balance() -> None:
    inputs = inputs_of(*MONITOR)
    ambient = inputs.annotation.ambient.temperature
    expected, v_out = monitor_steady_state(inputs, ambient)
    done = run(*paths(*MONITOR), RunOptions(analyses=("op",)), inputs=inputs)
    for part in done.results.parts:
        assert part.temperature == pytest.approx(expected[part.path], abs=1e-4)
    for label, temp in done.results.nodes.items():
        assert temp == pytest.approx(expected[label], abs=1e-4)
    # Kirchhoff with resistances at their temperatures: the reading to 1 ppm.
    assert done.results.voltages["out"] == pytest.approx(v_out, rel=1e-6)
    # The note's numbers: shunt at 50.0 degC, board 35.0 degC (25 degC ambient, 10 A).
    assert expected["RSH"] == pytest.approx(50.0, abs=0.1)
    assert expected["board"] == pytest.approx(35.0, abs=0.1)


@needs_ngspice
def test_monitor_warm_up_follows_the_thermal_ode() -> None:
    """The warm-up against scipy's solve_ivp of C dT/dt = P(T) - G T + g_amb Ta, the powers
    from the nodal solve at each step; ngspice's own error control (RELTOL default 1e-3 of the
    node value, ngspice manual 15.1.2) sets the tolerance."""
    inputs = inputs_of(*MONITOR)
    ambient = inputs.annotation.ambient.temperature
    names, g_matrix, c_diag, to_ambient = thermal_matrices(inputs)

    def slope(_t: float, temps: FloatArray) -> FloatArray:
        powers, _ = monitor_circuit(inputs, dict(zip(names, temps, strict=True)))
        heat = np.array([powers.get(name, 0.0) for name in names])
        flow: FloatArray = heat + to_ambient * ambient - g_matrix @ temps
        return flow / c_diag

    results = outcome_of(*MONITOR).results
    assert results.time is not None
    times = results.time
    ode = solve_ivp(
        slope,
        (0.0, float(times[-1])),
        np.full(len(names), ambient),
        method="Radau",
        t_eval=times,
        rtol=1e-9,
        atol=1e-9,
    )
    assert ode.success
    simulated = {part.path: part.temperature_series for part in results.parts}
    simulated.update(results.node_series)
    for k, name in enumerate(names):
        series = simulated[name]
        assert series is not None
        np.testing.assert_allclose(series, ode.y[k], atol=1e-3 * float(np.abs(series).max()))
    # The slowest thermal time constant, and how far the end of the warm-up is from it.
    rates = np.linalg.eigvals(np.diag(1.0 / c_diag) @ g_matrix).real
    assert 1.0 / rates.min() == pytest.approx(107.5, abs=0.5)
    steady, _ = monitor_steady_state(inputs, ambient)
    assert results.part("RSH").temperature == pytest.approx(steady["RSH"], abs=0.1)


@needs_ngspice
def test_monitor_readme_commands_run(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    """The note's first command writes its JSON and PNG; ``check`` passes (exit 0)."""
    monkeypatch.chdir(tmp_path)
    (tmp_path / "out").mkdir()
    deck, _ = paths(*MONITOR)
    runner = CliRunner()
    done = runner.invoke(
        main,
        ["run", deck, "--json", "out/monitor.json", "--plot", "out/monitor.png", "-q"],
        catch_exceptions=False,
    )
    assert done.exit_code == 0, done.output
    report = json.loads((tmp_path / "out" / "monitor.json").read_text(encoding="utf-8"))
    assert report["analysis"] == "tran"
    assert report["parts"]["RSH"]["temperature"] == pytest.approx(49.98, abs=0.01)
    assert (tmp_path / "out" / "monitor.png").stat().st_size > 10_000
    checked = runner.invoke(main, ["check", deck], catch_exceptions=False)
    assert checked.exit_code == 0, checked.output
    assert "max_drift_ppm" in checked.output


@needs_ngspice
def test_monitor_reading_drifts_by_the_shunt_less_the_gain() -> None:
    """The drift of V(out) against the unheated run, as the note quotes it (about +400 ppm),
    equals the drift of the nodal solution between cold and warm parts."""
    inputs = inputs_of(*MONITOR)
    ambient = inputs.annotation.ambient.temperature
    heated = run(*paths(*MONITOR), RunOptions(analyses=("op",)), inputs=inputs)
    cold = run_baseline(inputs, RunOptions(analyses=("op",)))
    drift = heated.results.voltages["out"] / cold.results.voltages["out"] - 1.0
    warm, v_warm = monitor_steady_state(inputs, ambient)
    _, v_cold = monitor_circuit(inputs, dict.fromkeys(warm, ambient))
    assert drift == pytest.approx(v_warm / v_cold - 1.0, abs=1e-6)
    assert drift * 1e6 == pytest.approx(400.0, abs=10.0)
    limit = inputs.annotation.limits[0]
    assert limit.max_drift_ppm is not None and drift * 1e6 < limit.max_drift_ppm


# -- RTD ------------------------------------------------------------------------------------

RTD = ("rtd-excitation", "rtd")
# IEC 60751 Callendar-Van Dusen coefficients for platinum (from memory of the standard).
IEC_A, IEC_B, IEC_C = 3.9083e-3, -5.775e-7, -4.183e-12


def cvd(r0: float, t_c: float) -> float:
    """Callendar-Van Dusen resistance (IEC 60751), the C term only below 0 degC."""
    c_term = IEC_C * (t_c - 100.0) * t_c**3 if t_c < 0 else 0.0
    return r0 * (1.0 + IEC_A * t_c + IEC_B * t_c * t_c + c_term)


def rtd_inputs(tmp_path: Path, iexc: float) -> Inputs:
    """The RTD deck with ``.param iexc`` rewritten (what a sweep over iexc would do)."""
    deck, annotation = paths(*RTD)
    text = Path(deck).read_text(encoding="utf-8")
    rewritten, count = re.subn(r"(?im)^\.param iexc=\S+", f".param iexc={iexc!r}", text)
    assert count == 1
    copy = tmp_path / "rtd.cir"
    copy.write_text(rewritten, encoding="utf-8")
    return load_inputs(str(copy), annotation)


@needs_ngspice
@pytest.mark.parametrize(
    ("ambient", "table_ohm"),
    [
        # IEC 60751 Pt100 reference table (from memory): 0 degC 100.00, 100 degC 138.51,
        # 200 degC 175.86, -100 degC 60.26 ohm; the table is given to 0.01 ohm.
        (0.0, 100.00),
        (100.0, 138.51),
        (200.0, 175.86),
        (-100.0, 60.26),
    ],
)
def test_rtd_cold_reading_matches_the_iec_table(ambient: float, table_ohm: float) -> None:
    inputs = inputs_of(*RTD)
    cold = run_baseline(inputs, RunOptions(ambient=ambient))
    iexc = 1e-3  # the deck's .param iexc=1m
    reading = cold.results.voltages["sense"] / iexc
    assert reading == pytest.approx(table_ohm, abs=0.005)
    assert cold.results.part("RPT").resistance == pytest.approx(table_ohm, abs=0.005)


@needs_ngspice
@pytest.mark.parametrize("ambient", [0.0, 100.0])
@pytest.mark.parametrize("iexc", [0.2e-3, 1e-3, 2e-3, 5e-3, 10e-3])
def test_rtd_self_heating_matches_the_fixed_point(
    ambient: float, iexc: float, tmp_path: Path
) -> None:
    """T = Ta + I^2 R(T) Rth for a current-driven RTD, root found by brentq; the reading
    error (K) is the self-heating rise, as the note's table lists it."""
    inputs = rtd_inputs(tmp_path, iexc)
    rth = spec_of(inputs, "RPT")["rth"]
    r0 = value(inputs, "RPT")

    def balance(t_c: float) -> float:
        return ambient + iexc * iexc * cvd(r0, t_c) * rth - t_c

    expected = brentq(balance, ambient, ambient + 100.0, xtol=1e-12)
    done = run(inputs.deck_path, inputs.annotation_path, RunOptions(ambient=ambient), inputs=inputs)
    part = done.results.part("RPT")
    assert part.temperature == pytest.approx(expected, abs=1e-6)
    reading = done.results.voltages["sense"] / iexc
    assert reading == pytest.approx(cvd(r0, expected), rel=1e-7)
    # Hand estimate: the rise is close to I^2 R(Ta) Rth (2.5 K at 10 mA and 0 degC).
    rough = iexc * iexc * cvd(r0, ambient) * rth
    assert expected - ambient == pytest.approx(rough, rel=0.02)


# -- inrush limiter -------------------------------------------------------------------------

INRUSH = ("inrush-limiter", "inrush")


def switch_times(inputs: Inputs) -> list[float]:
    """When VCTL's PWL crosses the threshold of ``.model busswitch``, up or down: the bus
    switch closes, opens, closes again (the edges are 1 us, the crossing is taken at the
    edge's start, well inside the windows the tests use)."""
    pwl = numbers(inputs, "VCTL", 4)
    points = list(zip(pwl[::2], pwl[1::2], strict=True))
    threshold = model_value(inputs, "busswitch", "vt")
    return [
        t0
        for (t0, v0), (_t1, v1) in itertools.pairwise(points)
        if (v0 - threshold) * (v1 - threshold) < 0
    ]


def series_resistance(inputs: Inputs) -> float:
    """Wiring and bank resistance plus the closed switch."""
    return value(inputs, "RWIRE") + model_value(inputs, "busswitch", "ron")


def ntc_r(inputs: Inputs, t_c: float) -> float:
    """Beta equation R = R25 exp(B (1/T - 1/T25)), kelvin (thermistor Beta definition)."""
    beta = spec_of(inputs, "RNTC")["beta"]
    inv = 1.0 / (t_c + KELVIN) - 1.0 / (25.0 + KELVIN)
    return value(inputs, "RNTC") * math.exp(beta * inv)


def window(time: FloatArray, start: float, stop: float) -> npt.NDArray[np.bool_]:
    return (time >= start) & (time < stop)


@needs_ngspice
@pytest.mark.parametrize(("event", "which"), [("cold start", 0), ("hot restart", 2)])
def test_inrush_peak_follows_ohms_law_at_closing(event: str, which: int) -> None:
    """Peak current = V_bus / (R_ntc(T at closing) + R_wire + R_on), the bank at 0 V;
    tolerance 1 %: during the first microseconds the bank charges by dt / tau and the NTC
    warms a little, both well below that."""
    inputs = inputs_of(*INRUSH)
    done = outcome_of(*INRUSH)
    plot = main_plot(done.sim)
    time = np.real(np.asarray(plot["time"]))
    current = np.real(np.asarray(plot["i(vamm)"]))
    ntc = done.results.part("RNTC")
    assert ntc.temperature_series is not None
    closing = switch_times(inputs)[which]
    before = window(time, closing - 0.5, closing)
    t_ntc = float(ntc.temperature_series[before][-1])
    # The switch is open and the bank empty before it closes: the formula's premises.
    assert float(np.abs(current[before]).max()) < 1e-3
    v_bus = value(inputs, "VBUS", 4)
    assert abs(done.results.voltage_series["bank"][before][-1]) < 1e-4 * v_bus
    expected = v_bus / (ntc_r(inputs, t_ntc) + series_resistance(inputs))
    peak = float(np.abs(current[window(time, closing, closing + 1.0)]).max())
    assert peak == pytest.approx(expected, rel=0.01), event


@needs_ngspice
def test_inrush_hot_restart_peak_is_many_times_the_cold_one() -> None:
    closing = switch_times(inputs_of(*INRUSH))
    assert closing == pytest.approx([0.010, 150.0, 152.0])
    done = outcome_of(*INRUSH)
    plot = main_plot(done.sim)
    time = np.real(np.asarray(plot["time"]))
    current = np.abs(np.real(np.asarray(plot["i(vamm)"])))
    cold = float(current[window(time, 0.0, 1.0)].max())
    hot = float(current[window(time, closing[2], closing[2] + 1.0)].max())
    # The note's numbers: 9.39 A cold, about 95 A on the hot restart.
    assert cold == pytest.approx(9.39, abs=0.01)
    assert hot == pytest.approx(95.1, abs=0.5)


@needs_ngspice
def test_inrush_running_state_matches_the_fixed_point() -> None:
    """With the bank charged, the load current I = V / (R_load + R_ntc(T) + R_series) heats
    the NTC to T = Ta + I^2 R_ntc(T) Rth (brentq); read just before the bus opens."""
    inputs = inputs_of(*INRUSH)
    ambient = inputs.annotation.ambient.temperature
    rth = spec_of(inputs, "RNTC")["rth"]
    v_bus, r_load = value(inputs, "VBUS", 4), value(inputs, "RLOAD")
    series = series_resistance(inputs)

    def balance(t_c: float) -> float:
        r_ntc = ntc_r(inputs, t_c)
        current = v_bus / (r_load + r_ntc + series)
        return ambient + current * current * r_ntc * rth - t_c

    expected = brentq(balance, ambient, 300.0, xtol=1e-10)
    done = outcome_of(*INRUSH)
    ntc = done.results.part("RNTC")
    assert done.results.time is not None and ntc.temperature_series is not None
    opening = switch_times(inputs)[1]
    running = window(done.results.time, opening - 1.0, opening)
    assert float(ntc.temperature_series[running][-1]) == pytest.approx(expected, abs=0.05)
    # The note's numbers: about 110 degC and 0.37 ohm while running, 24 ohm load at 48 V.
    assert expected == pytest.approx(110.1, abs=0.2)
    assert ntc_r(inputs, expected) == pytest.approx(0.37, abs=0.01)


# -- PWM heater -----------------------------------------------------------------------------

HEATER = ("pwm-heater", "heater")


def heater_duty(inputs: Inputs) -> float:
    """The share of each period the low-side switch is on: VGATE's PULSE rises over tr and
    falls over tf; the switch closes above vt + vh and opens below vt - vh (ngspice's switch
    with hysteresis, from memory: the manual lists vt and vh without the rule; with tr = tf
    the on-time comes out the same for a single threshold vt), so it is on from
    ``tr (vt + vh) / V2`` to ``tr + pw + tf (1 - (vt - vh) / V2)``."""
    v1, v2, _delay, rise, fall, width, period = numbers(inputs, "VGATE", 4)
    assert v1 == 0.0
    vt, vh = model_value(inputs, "lowside", "vt"), model_value(inputs, "lowside", "vh")
    on = rise * (vt + vh) / v2
    off = rise + width + fall * (1.0 - (vt - vh) / v2)
    return (off - on) / period


def heater_balance(inputs: Inputs) -> tuple[float, Callable[[float], float]]:
    """The heater's mean temperature, the root of T = Ta + P_mean(T) (Rth_part + Rth_plate)
    (scipy brentq), and P_mean(T) = D V^2 R(T) / (R(T) + R_on)^2."""
    ambient = inputs.annotation.ambient.temperature
    rth_part = spec_of(inputs, "RHEAT")["rth"]
    rth_plate = inputs.annotation.node("plate").rth
    v_sup = value(inputs, "VSUP", 4)
    duty, r_on = heater_duty(inputs), model_value(inputs, "lowside", "ron")
    assert duty == pytest.approx(0.4)

    def mean_power(t_c: float) -> float:
        r = linear_r(inputs, "RHEAT", t_c)
        return duty * v_sup * v_sup * r / (r + r_on) ** 2

    def balance(t_c: float) -> float:
        return ambient + mean_power(t_c) * (rth_part + rth_plate) - t_c

    return float(brentq(balance, ambient, ambient + 200.0, xtol=1e-10)), mean_power


@needs_ngspice
def test_pwm_heater_mean_rise_is_mean_power_times_rth() -> None:
    """Mean rise = P_mean * (Rth_part + Rth_plate), P_mean = D V^2 R(T) / (R(T) + R_on)^2
    with R(T) at the mean temperature (the ripple at 2 kHz is below a millikelvin)."""
    inputs = inputs_of(*HEATER)
    ambient = inputs.annotation.ambient.temperature
    rth_plate = inputs.annotation.node("plate").rth
    expected, mean_power = heater_balance(inputs)
    settled = settle(*paths(*HEATER), SettleOptions(period=500e-6), inputs=inputs)
    (part,) = settled.parts
    # settle stops when an iteration moves less than its tol (0.01 K).
    assert part.temperature == pytest.approx(expected, abs=0.01)
    assert part.power == pytest.approx(mean_power(expected), rel=1e-3)
    assert settled.nodes["plate"] == pytest.approx(
        ambient + mean_power(expected) * rth_plate, abs=0.01
    )
    assert part.peak_temperature - part.valley_temperature < 1e-3
    # The note's numbers: 4.78 W mean, 31.3 degC (5 degC in the box), plate 24.1 degC.
    assert part.power == pytest.approx(4.78, abs=0.01)
    assert part.temperature == pytest.approx(31.3, abs=0.05)


@needs_ngspice
def test_pwm_heater_is_checked_in_its_periodic_steady_state() -> None:
    """check gates the deck in its periodic steady state (its own transient is ten periods
    from cold): the rating against the brentq mean power, tmax against the mean temperature
    (the ripple is below a millikelvin), five printed digits."""
    expected, mean_power = heater_balance(inputs_of(*HEATER))
    result = CliRunner().invoke(main, ["check", paths(*HEATER)[0]])
    assert result.exit_code == 0, result.output
    assert result.output.startswith("method: periodic steady state")
    power = re.search(r"RHEAT power_rating: ([0-9.]+) W, at most 25 W", result.output)
    peak = re.search(r"RHEAT tmax: ([0-9.]+) degC", result.output)
    assert power is not None and peak is not None, result.output
    assert float(power[1]) == pytest.approx(mean_power(expected), rel=1e-4)
    assert float(peak[1]) == pytest.approx(expected, abs=0.01)


@pytest.mark.parametrize("note", sorted(DECKS.glob("*/README.md")), ids=lambda p: p.parent.name)
def test_deck_notes_run_their_own_deck(note: Path) -> None:
    """A deck's note lists commands for that deck only (a command for another example
    belongs in that example's note)."""
    named = re.findall(r"decks/([\w.-]+)/", note.read_text(encoding="utf-8"))
    assert named, note
    assert set(named) == {note.parent.name}
