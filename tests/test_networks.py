"""Thermal network forms against first-order theory, scipy's solvers and ngspice.

Networks come from ``fixtures/networks/networks.toml``; each check names its reference.
"""

from __future__ import annotations

import math
import shutil
import subprocess
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy import signal
from scipy.integrate import solve_ivp
from scipy.linalg import expm
from scipy.optimize import curve_fit

from heatweave.networks import (
    FORMS,
    Cauer,
    Foster,
    NetworkError,
    NetworkForm,
    Single,
    from_annotation,
    to_cauer,
    to_foster,
)
from heatweave.networks.fit import fit_foster

FIXTURES = Path(__file__).parent / "fixtures" / "networks"
TABLE = tomllib.loads((FIXTURES / "networks.toml").read_text())


def _networks(kind: str) -> list[pytest.param]:
    make = Foster if kind == "foster" else Cauer
    return [
        pytest.param(make(tuple(tuple(st) for st in body["stages"])), id=f"{kind}-{name}")
        for name, body in TABLE[kind].items()
    ]


FOSTERS = _networks("foster")
CAUERS = _networks("cauer")
ALL = [*FOSTERS, *CAUERS, pytest.param(Single(1.7, 0.02), id="single")]

# Many complex frequencies: along the imaginary axis (AC) and the positive real axis.
S_POINTS = np.concatenate([1j * np.logspace(-3, 7, 81), np.logspace(-3, 7, 81)])


def _relative(a: np.ndarray, b: np.ndarray) -> float:
    return float(np.max(np.abs(a - b) / np.abs(b)))


def _signal_step(net: NetworkForm, t: np.ndarray) -> np.ndarray:
    """scipy.signal.step at each time (it wants equal spacing, our times are log-spaced)."""
    system = signal.StateSpace(*net.state_space().matrices())
    return np.array([signal.step(system, T=[0.0, ti])[1][-1] for ti in t])


def _time_grid(net: NetworkForm) -> np.ndarray:
    tau = to_foster(net).tau
    return np.logspace(np.log10(tau.min()) - 2, np.log10(tau.max()) + 1.5, 120)


# --- first-order step response ------------------------------------------------------------

# Standard first-order step response 1 - exp(-t/tau) (any circuits or heat-transfer
# textbook): 63.2 % after 1 tau, 95.0 % after 3, 99.3 % after 5 (rounded to 0.1 %).
@pytest.mark.parametrize(("multiple", "percent"), [(1, 63.2), (3, 95.0), (5, 99.3)])
@pytest.mark.parametrize(
    "make",
    [
        lambda r, c: Single(r, c),
        lambda r, c: Foster(((r, r * c),)),
        lambda r, c: Cauer(((r, c),)),
    ],
    ids=["single", "foster", "cauer"],
)
def test_first_order_rule(make: object, multiple: int, percent: float) -> None:
    rth, cth = 3.3, 0.015
    net = make(rth, cth)  # type: ignore[operator]
    value = float(net.zth(multiple * rth * cth)) / rth
    assert abs(100 * value - percent) < 0.05


def test_single_without_capacitance_is_steady_only() -> None:
    # Derived here: a bare resistor follows the power at once.
    net = Single(2.0, 0.0)
    assert np.array_equal(net.zth([-1.0, 0.0, 1e-9, 5.0]), [0.0, 0.0, 2.0, 2.0])
    assert np.allclose(net.impedance(S_POINTS), 2.0, rtol=0, atol=0)
    with pytest.raises(NetworkError) as info:
        to_foster(net)
    assert info.value.hint


# --- time responses against scipy ---------------------------------------------------------

@pytest.mark.parametrize("net", FOSTERS)
def test_foster_step_against_solve_ivp(net: Foster) -> None:
    # Reference: scipy.integrate.solve_ivp (Radau, tight tolerances) on dx/dt = A x + B.
    a, b, c, d = net.state_space().matrices()
    t = _time_grid(net)
    run = solve_ivp(lambda _, x: a @ x + b[:, 0], (0.0, t[-1]), np.zeros(a.shape[0]),
                    method="Radau", t_eval=t, rtol=1e-11, atol=1e-14 * net.total_rth)
    assert run.success
    reference = (c @ run.y)[0] + d[0, 0]
    assert np.allclose(net.zth(t), reference, rtol=1e-7, atol=1e-9 * net.total_rth)


@pytest.mark.parametrize("net", CAUERS)
def test_cauer_step_against_scipy_signal(net: Cauer) -> None:
    # Reference: scipy.signal.step on the ladder's state-space model (matrix exponential).
    t = _time_grid(net)
    reference = _signal_step(net, t)
    assert np.allclose(net.zth(t), reference, rtol=1e-8, atol=1e-10 * net.total_rth)


@pytest.mark.parametrize("net", CAUERS)
def test_cauer_step_against_its_foster(net: Cauer) -> None:
    # Reference: the converted Foster network's closed form sum Ri (1 - exp(-t/taui)).
    t = _time_grid(net)
    foster = to_foster(net)
    closed = np.sum(foster.rth * -np.expm1(-t[:, None] / foster.tau), axis=1)
    ladder = _signal_step(net, t)
    assert np.allclose(closed, ladder, rtol=1e-8, atol=1e-10 * net.total_rth)


@pytest.mark.parametrize("net", ALL)
def test_impedance_matches_state_space(net: NetworkForm) -> None:
    # Derived here: Z(s) = C (sI - A)^-1 B + D of the same model, by numpy linear algebra.
    a, b, c, d = net.state_space().matrices()
    eye = np.eye(a.shape[0])
    expected = np.array([(c @ np.linalg.solve(s * eye - a, b) + d)[0, 0] for s in S_POINTS])
    assert _relative(net.impedance(S_POINTS), expected) < 1e-9


@pytest.mark.parametrize("net", ALL)
def test_steady_state_and_initial_rises(net: NetworkForm) -> None:
    # Derived here: at rest under P every stage carries P, so Zth(inf) = sum R, and the
    # steady rises of the realisation's nodes agree with -A^-1 B P of the state model.
    power = 2.5
    model = net.state_space()
    rest = model.steady_state([power])
    assert math.isclose((model.c @ rest + model.d[:, 0] * power)[0], power * net.total_rth,
                        rel_tol=1e-12)
    rises = net.initial_rises("x", "hot", "steady", power)
    assert math.isclose(rises["hot"], power * net.total_rth, rel_tol=1e-12)
    if isinstance(net, Cauer):  # states are the node temperatures, in node order
        assert np.allclose(list(rises.values()), rest, rtol=1e-12)
    assert set(net.initial_rises("x", "hot", "cold").values()) == {0.0}


# --- conversions --------------------------------------------------------------------------

@pytest.mark.parametrize("net", FOSTERS)
def test_foster_to_cauer_invariants(net: Foster) -> None:
    ladder = to_cauer(net)
    # Same impedance everywhere (definition of the equivalence), 1e-9 relative.
    assert _relative(ladder.impedance(S_POINTS), net.impedance(S_POINTS)) < 1e-9
    # Z(0) = sum R in both forms; high-frequency limit Z ~ 1/(s C1) with 1/C1 = sum 1/Ci.
    assert math.isclose(ladder.total_rth, net.total_rth, rel_tol=1e-12)
    assert math.isclose(1.0 / ladder.cth[0], float(np.sum(1.0 / net.cth)), rel_tol=1e-12)
    t = _time_grid(net)
    assert np.allclose(ladder.zth(t), net.zth(t), rtol=1e-9, atol=1e-12 * net.total_rth)
    back = to_foster(ladder)
    assert len(back.stages) == len(net.stages)
    assert np.allclose(np.array(back.stages), np.array(net.stages), rtol=1e-9, atol=0)


@pytest.mark.parametrize("net", CAUERS)
def test_cauer_to_foster_invariants(net: Cauer) -> None:
    foster = to_foster(net)
    assert _relative(foster.impedance(S_POINTS), net.impedance(S_POINTS)) < 1e-9
    assert math.isclose(foster.total_rth, net.total_rth, rel_tol=1e-12)
    assert math.isclose(1.0 / net.cth[0], float(np.sum(1.0 / foster.cth)), rel_tol=1e-12)
    # Poles are minus the eigenvalues of C^-1 G (reference: numpy.linalg.eigvals).
    poles = np.sort(np.linalg.eigvals(-net.state_space().a).real)
    assert np.allclose(np.sort(1.0 / foster.tau), poles, rtol=1e-9)
    back = to_cauer(foster)
    assert np.allclose(np.array(back.stages), np.array(net.stages), rtol=1e-9, atol=0)


def test_conversion_is_exact_for_many_stages() -> None:
    # Derived here: ten stages over six decades, where float polynomial division fails.
    stages = tuple((0.1 * (k + 1), 10.0 ** (-5 + 0.65 * k)) for k in range(10))
    net = Foster(stages)
    assert _relative(to_cauer(net).impedance(S_POINTS), net.impedance(S_POINTS)) < 1e-9
    assert np.allclose(np.array(to_foster(to_cauer(net)).stages), np.array(stages),
                       rtol=1e-8)


# --- two-port model: a network on a shared node that moves --------------------------------

@pytest.mark.parametrize("net", [*ALL, pytest.param(Single(0.9, 0.0), id="single-steady")])
def test_port_model_on_a_shared_node(net: NetworkForm) -> None:
    # Derived here: the cold end sits on a shared node (Cs to the reference, Rs to a fixed
    # 0 K ambient) whose temperature is a state of the assembled system.  Assembled from
    # port_model, the hot spot must see Z_net(s) + Rs/(1 + s Rs Cs) for series stages
    # (Foster, bare R), and the longer ladder Cauer(stages + (Rs, Cs)) for Cauer forms.
    rs, cs = 4.0, 0.7
    port = net.port_model()
    n = port.a.shape[0]
    a = np.zeros((n + 1, n + 1))
    a[:n, :n], a[:n, n] = port.a, port.b[:, 1]
    a[n, :n] = port.c[1] / cs
    a[n, n] = (port.d[1, 1] - 1.0 / rs) / cs
    b = np.concatenate([port.b[:, 0], [port.d[1, 0] / cs]])
    c = np.concatenate([port.c[0], [port.d[0, 1]]])
    z = np.array([c @ np.linalg.solve(s * np.eye(n + 1) - a, b) + port.d[0, 0]
                  for s in S_POINTS])
    if isinstance(net, Cauer) or (isinstance(net, Single) and net.cth > 0):
        ladder = to_cauer(net)
        expected = Cauer((*ladder.stages, (rs, cs))).impedance(S_POINTS)
    else:
        expected = net.impedance(S_POINTS) + rs / (1.0 + S_POINTS * rs * cs)
    assert _relative(z, expected) < 1e-9


# --- validation ---------------------------------------------------------------------------

@pytest.mark.parametrize(
    ("kind", "data"),
    [
        ("foster", ()),
        ("foster", ((1.0, -1e-3),)),
        ("foster", ((0.0, 1e-3),)),
        ("foster", ((1.0, float("nan")),)),
        ("foster", ((1.0,),)),
        ("foster", "1, 2"),
        ("cauer", ((1.0, 0.0),)),
        ("cauer", ((1.0, "1m"),)),
        ("cauer", ((True, 1.0),)),
        ("single", (1.0,)),
        ("single", (-1.0, 0.0)),
        ("single", (1.0, -0.1)),
        ("single", (float("inf"), 0.0)),
        ("ladder", ((1.0, 1.0),)),
    ],
)
def test_bad_values_are_reported_with_a_hint(kind: str, data: object) -> None:
    # Common practice: every input error tells the user what to write instead.
    with pytest.raises(NetworkError) as info:
        from_annotation(kind, data)
    assert info.value.hint
    assert info.value.location is None  # the caller adds where the values came from


def test_registry_holds_every_form() -> None:
    assert set(FORMS) == {"single", "foster", "cauer"}
    assert from_annotation("single", (1.0, 0.0)) == Single(1.0, 0.0)
    # Foster stages are kept sorted by tau whatever order they are given in.
    assert from_annotation("foster", ((1.0, 2.0), (3.0, 0.5))).stages == ((3.0, 0.5), (1.0, 2.0))


# --- netlists -----------------------------------------------------------------------------

@pytest.mark.parametrize("net", ALL)
def test_elements_names_and_topology(net: NetworkForm) -> None:
    real = net.elements("th_x_", "hot", "amb", "0")
    assert all(name.startswith("th_x_") for name in real.nodes)
    assert all(el.name == el.kind + "th_x_" + el.name[len("th_x_") + 1:] for el in real.elements)
    assert len({el.name for el in real.elements}) == len(real.elements)
    caps = [el for el in real.elements if el.kind == "C"]
    resistors = [el for el in real.elements if el.kind == "R"]
    assert math.isclose(sum(el.value for el in resistors), net.total_rth, rel_tol=1e-12)
    if isinstance(net, Foster):
        assert all(el.node2 != "0" for el in caps)  # across the stage resistor
    else:
        assert all(el.node2 == "0" for el in caps)  # to the thermal reference


NGSPICE = shutil.which("ngspice")


def _spread(net: NetworkForm) -> float:
    if isinstance(net, Single) and net.cth == 0:
        return 1.0
    tau = to_foster(net).tau
    return float(tau.max() / tau.min())


# ngspice runs only networks whose taus span at most five decades: the cauer-six ladder
# (six decades) makes ngspice at reltol 1e-7 creep for more than a minute.
SIMULATED = [p for p in [*ALL, pytest.param(Single(0.9, 0.0), id="single-steady")]
             if _spread(p.values[0]) <= 1e5]


def _simulate(net: NetworkForm, start: str, power: float, cold: float, tmp: Path) -> tuple:
    real = net.elements("hw_", "hot", "amb", "0")
    tau = to_foster(net).tau if not (isinstance(net, Single) and net.cth == 0) else [1e-3]
    # tstep sets ngspice's first step (tau_min/100); tmax = tstop/2000 caps later steps.
    step, stop = float(min(tau)) / 100, 5 * float(max(tau))
    rises = net.initial_rises("hw_", "hot", start, power)  # type: ignore[arg-type]
    ic = " ".join(f"v({node})={cold + rise!r}" for node, rise in rises.items())
    lines = [
        "network step response",
        f"I1 0 hot DC {power!r}",
        f"Vamb amb 0 DC {cold!r}",
        *(f"{el.name} {el.node1} {el.node2} {el.value!r}" for el in real.elements),
        # Under uic the cold node needs its value too, or its caps start charged.
        f".ic {ic} v(amb)={cold!r}",
        ".options filetype=ascii reltol=1e-7 trtol=1 abstol=1e-15 vntol=1e-10 chgtol=1e-20",
        f".tran {step!r} {stop!r} 0 {stop / 2000!r} uic",
        ".end",
    ]
    deck, raw = tmp / "net.cir", tmp / "net.raw"
    deck.write_text("\n".join(lines) + "\n")
    done = subprocess.run([NGSPICE, "-b", "-r", str(raw), str(deck)], capture_output=True,
                          text=True, timeout=60, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    header, values = raw.read_text().split("Values:\n")
    names = [line.split()[1] for line in header.split("Variables:\n")[1].splitlines() if line]
    numbers = np.array([float(tok) for tok in values.split()]).reshape(-1, len(names) + 1)
    return numbers[:, 1], numbers[:, 1 + names.index("v(hot)")]


@pytest.mark.ngspice
@pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed")
@pytest.mark.parametrize("net", SIMULATED)
def test_elements_in_ngspice_follow_zth(net: NetworkForm, tmp_path: Path) -> None:
    # Reference: ngspice 39 transient of the emitted elements, 1 A into hot, cold node at
    # 25 V, cold start, compared at ngspice's own time points.  Tolerance 1e-4 of sum R:
    # ngspice's local truncation-error control (trapezoidal, reltol 1e-7, trtol 1) bounds
    # the local, not the global, error; measured here the error stays below 4e-5 of sum R
    # over taus spanning five decades.  1e-4 still exposes a misplaced element or node.
    t, v = _simulate(net, "cold", 1.0, 25.0, tmp_path)
    assert np.max(np.abs(v - 25.0 - net.zth(t))) < 1e-4 * net.total_rth


@pytest.mark.ngspice
@pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed")
@pytest.mark.parametrize("net", SIMULATED)
def test_steady_start_in_ngspice_stays_put(net: NetworkForm, tmp_path: Path) -> None:
    # Reference: ngspice 39; started in the steady state of 2 W, nothing may move
    # (derived here: the steady rises make every capacitor current zero).
    _, v = _simulate(net, "steady", 2.0, 25.0, tmp_path)
    assert np.max(np.abs(v - 25.0 - 2.0 * net.total_rth)) < 1e-6 * net.total_rth


# --- fit ----------------------------------------------------------------------------------

THREE = Foster(((0.5, 1e-3), (1.2, 3e-2), (2.0, 1.0)))
T_DATA = np.logspace(-5, 2, 150)


@pytest.mark.parametrize("net", [FOSTERS[1].values[0], THREE, FOSTERS[3].values[0]])
def test_fit_recovers_known_stages(net: Foster) -> None:
    # Derived here: noise-free samples of a known network must give it back.
    t = np.logspace(np.log10(net.tau.min()) - 2, np.log10(net.tau.max()) + 2, 150)
    result = fit_foster(t, net.zth(t), len(net.stages))
    assert np.allclose(np.array(result.network.stages), np.array(net.stages), rtol=1e-6)
    assert result.rms_rel < 1e-9 and result.max_rel < 1e-8


@pytest.mark.parametrize("noise", [0.003, 0.01, 0.03])
def test_fit_error_on_noisy_data_is_consistent(noise: float) -> None:
    # Derived here: with Gaussian relative noise sigma and m points, p = 6 parameters, the
    # least-squares RMS relative residual is sigma sqrt((m - p)/m) (its spread: about
    # sigma/sqrt(2m) = 6 %, so +-25 % is four spreads).  The reported figures must also be
    # exactly those of the returned network on the data.
    rng = np.random.default_rng(20261201)
    data = THREE.zth(T_DATA) * (1.0 + noise * rng.standard_normal(T_DATA.size))
    result = fit_foster(T_DATA, data, 3)
    m = T_DATA.size
    expected = noise * math.sqrt((m - 6) / m)
    assert 0.75 * expected < result.rms_rel < 1.25 * expected
    error = result.network.zth(T_DATA) - data
    assert math.isclose(result.rms_abs, float(np.sqrt(np.mean(error**2))), rel_tol=1e-12)
    assert math.isclose(result.max_abs, float(np.max(np.abs(error))), rel_tol=1e-12)
    assert math.isclose(result.max_rel, float(np.max(np.abs(error / data))), rel_tol=1e-12)
    assert result.points == m


def test_fit_agrees_with_curve_fit() -> None:
    # Reference: scipy.optimize.curve_fit (Levenberg-Marquardt) on the same model with the
    # same relative weighting (sigma = data), started near the truth.  Both must reach the
    # same minimum: no worse cost for ours, and the same stages.
    rng = np.random.default_rng(7)
    data = THREE.zth(T_DATA) * (1.0 + 0.01 * rng.standard_normal(T_DATA.size))

    def model(t: np.ndarray, *p: float) -> np.ndarray:
        r, tau = np.array(p[:3]), np.array(p[3:])
        return np.sum(r * -np.expm1(-t[:, None] / tau), axis=1)

    p0 = [*(1.2 * THREE.rth), *(0.8 * THREE.tau)]
    popt, _ = curve_fit(model, T_DATA, data, p0=p0, sigma=data, maxfev=20000,
                        xtol=1e-14, ftol=1e-14)
    theirs = np.sum(((model(T_DATA, *popt) - data) / data) ** 2)
    result = fit_foster(T_DATA, data, 3)
    ours = np.sum(((result.network.zth(T_DATA) - data) / data) ** 2)
    assert ours <= theirs * (1 + 1e-9)
    order = np.argsort(popt[3:])
    reference = np.column_stack([popt[:3][order], popt[3:][order]])
    assert np.allclose(np.array(result.network.stages), reference, rtol=1e-5)


@pytest.mark.parametrize(
    ("t", "z", "stages"),
    [
        ([1e-3, 2e-3, 3e-3, 4e-3], [0.1, 0.2, 0.3, 0.4], 2),  # 4 points, 4 unknowns
        ([1e-3, 1e-3, 1e-3, 2e-3, 3e-3], [0.1, 0.1, 0.1, 0.2, 0.3], 2),  # repeated times
        ([0.0, 1e-3, 2e-3, 3e-3, 4e-3], [0.0, 0.1, 0.2, 0.3, 0.4], 1),  # t = 0
        ([1e-3, 2e-3, 3e-3], [0.1, -0.2, 0.3], 1),
        ([1e-3, 2e-3, 3e-3], [0.1, 0.2], 1),
        ([1e-3, 2e-3, 3e-3], [0.1, 0.2, 0.3], 0),
    ],
)
def test_fit_rejects_unusable_data(t: list[float], z: list[float], stages: int) -> None:
    with pytest.raises(NetworkError) as info:
        fit_foster(t, z, stages)
    assert info.value.hint


def test_single_stage_fit_and_expm_agree() -> None:
    # Reference: scipy.linalg.expm of the fitted network's state model (exact advance).
    net = Foster(((1.3, 0.02),))
    result = fit_foster(T_DATA, net.zth(T_DATA), 1)
    a, b, c, _ = result.network.state_space().matrices()
    t = 0.05
    x = np.linalg.solve(a, (expm(a * t) - np.eye(1)) @ b)
    assert math.isclose(float((c @ x)[0, 0]), float(net.zth(t)), rel_tol=1e-9)
