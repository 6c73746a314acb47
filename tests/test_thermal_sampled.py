"""The thermal network's response to sampled power, against independent references.

References:

* a first-order low-pass driven by a sine: the periodic steady state of
  ``C dT/dt = P0 + Pa sin(w t) - (T - Ta) / R`` swings by ``Pa R / sqrt(1 + (w tau)^2)``
  about ``Ta + P0 R`` with ``tau = R C`` (the amplitude response of a single-pole RC
  low-pass, e.g. Incropera, Fundamentals of Heat and Mass Transfer, ch. 5.7, periodic
  heating; common practice in circuit theory);
* the ramp response of the same network, ``T - Ta = k R (t - tau (1 - e^{-t/tau}))`` for
  ``P = k t`` (Laplace transform of ``k / s^2`` through ``R / (1 + s tau)``; common practice);
* scipy.integrate.solve_ivp (Radau, tight tolerances) on the assembled ODE of a mixed
  network (Cauer, Foster, shared nodes, a coupling) under the piecewise-linear input;
* scipy.linalg.expm of the augmented matrix ``[[A, B, 0], [0, 0, I], [0, 0, 0]]``, whose
  exponential carries ``(z, u, du/dt)`` exactly across a step where ``u`` is a straight
  line (C. Van Loan, "Computing integrals involving the matrix exponential", IEEE Trans.
  Automatic Control 23 (1978); the same construction as for a held input, one order up),
  step by step with no shared arithmetic with the modal solver;
* the matrix product itself (numpy, dense) for :class:`SparseRows`.
"""

from __future__ import annotations

import math
from fractions import Fraction

import numpy as np
import pytest
import scipy.integrate
import scipy.linalg

from heatweave.networks import Foster, Single
from heatweave.thermal.sampled import SampledResponse, SparseRows, step_weights
from heatweave.thermal.solver import Propagator, assemble
from test_thermal_solver import AMBIENT, MIXED, board, circuit, part

RTH, CTH = 50.0, 6e-4
TAU = RTH * CTH


def single() -> SampledResponse:
    return SampledResponse(Propagator(assemble(circuit([part("R1", Single(RTH, CTH))], []))))


def inputs(power: np.ndarray) -> np.ndarray:
    return np.vstack([power, np.full(power.shape, AMBIENT)])


def test_sine_ripple_is_the_first_order_low_pass_amplitude() -> None:
    response = single()
    w = 2 * np.pi * 2e3
    p0 = pa = 0.5
    t = np.linspace(0.0, 20 * TAU, 400_001)  # 1.5 us steps: 333 per period
    z = np.array([AMBIENT])
    _, temps = response.run(z, t, inputs(p0 + pa * np.sin(w * t)))
    settled = t > 19 * TAU  # the start's exp(-19) is 1.4e-7 K
    amplitude = pa * RTH / np.sqrt(1 + (w * TAU) ** 2)
    # Straight lines between samples lose (w dt)^2 / 12 of a sine's amplitude, and a
    # sample misses the crest by up to (w dt / 2)^2 / 2 of it: second order in w dt.
    dt = float(t[1] - t[0])
    tol = amplitude * (w * dt) ** 2 / 4 + 2e-7
    assert tol < 1e-4 * amplitude
    assert temps[0, settled].max() == pytest.approx(AMBIENT + p0 * RTH + amplitude, abs=tol)
    assert temps[0, settled].min() == pytest.approx(AMBIENT + p0 * RTH - amplitude, abs=tol)


@pytest.mark.parametrize("steps", [3, 40, 1000])
def test_ramp_is_exact_for_any_sampling(steps: int) -> None:
    # A ramp is a straight line between any two samples: the response is exact, however
    # few and uneven the samples, up to round-off.
    response = single()
    k = 3.0
    t = np.sort(
        np.concatenate(([0.0, 2 * TAU], np.random.default_rng(1).uniform(0, 2 * TAU, steps)))
    )
    _, temps = response.run(np.array([AMBIENT]), t, inputs(k * t))
    want = AMBIENT + k * RTH * (t - TAU * (1 - np.exp(-t / TAU)))
    np.testing.assert_allclose(temps[0], want, rtol=1e-12, atol=1e-12)


def test_long_stretches_do_not_overflow() -> None:
    # 2000 time constants in one call, and one step of 1000: split into stretches.
    response = single()
    t = np.concatenate((np.linspace(0.0, 1000 * TAU, 5001), [2000 * TAU]))
    z, temps = response.run(np.array([AMBIENT]), t, inputs(np.full(t.shape, 0.2)))
    assert np.all(np.isfinite(temps))
    assert temps[0, -1] == pytest.approx(AMBIENT + 0.2 * RTH, rel=1e-12)
    assert z[0] == pytest.approx(temps[0, -1], rel=1e-12)


def test_mixed_network_matches_solve_ivp() -> None:
    system = assemble(MIXED)
    response = SampledResponse(Propagator(system))
    t = np.sort(np.random.default_rng(2).uniform(0.0, 0.5, 60))
    t[0] = 0.0
    rng = np.random.default_rng(3)
    power = rng.uniform(0.0, 2.0, (3, t.shape[0]))
    u = np.vstack([power, np.full(t.shape, AMBIENT)])
    z0 = system.rest_state(AMBIENT)
    z_end, temps = response.run(z0, t, u)
    z = z0
    for k in range(1, t.shape[0]):  # one smooth stretch of input at a time
        slope = (u[:, k] - u[:, k - 1]) / (t[k] - t[k - 1])
        sol = scipy.integrate.solve_ivp(
            lambda s, y, k=k, slope=slope: system.a @ y + system.b @ (u[:, k - 1] + slope * s),
            (0.0, t[k] - t[k - 1]), z, method="Radau", rtol=1e-11, atol=1e-12,
        )  # fmt: skip
        z = sol.y[:, -1]
        np.testing.assert_allclose(temps[:, k], system.temperatures(z, u[:, k]), atol=1e-7)
    np.testing.assert_allclose(z_end, z, atol=1e-7)


@pytest.mark.parametrize("scale", [1e-9, 1e-4, 1e-2, 0.049, 0.05, 0.5, 3.0, 700.0])
def test_step_weights_meet_their_formulas(scale: float) -> None:
    # phi1 = (e^x - 1)/x, phi2 = (e^x - 1 - x)/x^2, evaluated in extended precision with
    # Python's fractions of the exponential series as the reference near 0.
    x = -scale * np.array([0.3, 0.99, 1.0])
    first, second = step_weights(x)
    for k, value in enumerate(x):
        v = Fraction(float(value))
        if scale < 1:  # the exponential series, exactly in fractions
            em1 = sum((v**j / math.factorial(j) for j in range(1, 80)), Fraction(0))
        else:  # no cancellation left: extended precision suffices
            em1 = Fraction(float(np.expm1(np.longdouble(value))))
        two = (em1 - v) / (v * v)
        assert second[k] == pytest.approx(float(two), rel=1e-13)
        assert first[k] == pytest.approx(float(em1 / v - two), rel=1e-13)


def exact_by_expm(system, z0: np.ndarray, t: np.ndarray, u: np.ndarray) -> np.ndarray:
    """Outputs at every time, stepping ``(z, u, du/dt)`` with expm of the augmented matrix
    (Van Loan 1978), one matrix exponential per distinct step length."""
    n, q = system.a.shape[0], system.b.shape[1]
    big = np.zeros((n + 2 * q, n + 2 * q))
    big[:n, :n], big[:n, n : n + q], big[n : n + q, n + q :] = system.a, system.b, np.eye(q)
    found: dict[float, np.ndarray] = {}
    z, out = z0, [system.temperatures(z0, u[:, 0])]
    for k in range(1, t.shape[0]):
        h = float(t[k] - t[k - 1])
        if h not in found:
            found[h] = scipy.linalg.expm(big * h)
        slope = (u[:, k] - u[:, k - 1]) / h
        z = (found[h] @ np.concatenate((z, u[:, k - 1], slope)))[:n]
        out.append(system.temperatures(z, u[:, k]))
    return np.array(out).T


# A ngspice-like grid: runs of equal steps (a run over a whole stretch takes the tables
# kept per step length), and stretches of mixed steps (the general path); windows longer
# than a cache-sized stretch and than SPAN fastest time constants.  Dyadic step lengths
# keep every difference of the times exact.
def simulator_grid(stop: float, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    lengths = [2.0**-13, 2.0**-11, 3 * 2.0**-14, 5 * 2.0**-16]
    steps: list[float] = []
    while sum(steps) < stop:
        if rng.uniform() < 0.5:  # one length for 0.05 .. 0.4 s
            length = float(rng.choice(lengths))
            steps += [length] * int(rng.uniform(0.05, 0.4) / length)
        else:
            steps += [float(x) for x in rng.choice(lengths, size=int(rng.integers(50, 800)))]
    return np.concatenate(([0.0], np.cumsum(steps)))


def stretches(response: SampledResponse, t: np.ndarray) -> int:
    count, start = 0, 0
    while start < t.shape[0] - 1:
        start, count = response.stretch_end(t, start), count + 1
    return count


FEEDTHROUGH = circuit(  # a board without heat capacity: temperatures follow the power at once
    [part("R1", Foster(((10.0, 0.1),)), "board"), part("R2", Single(30.0, 2e-4))],
    [board(rth=30.0, cth=0.0)],
)


@pytest.mark.parametrize(("net", "stop"), [(MIXED, 1.5), (FEEDTHROUGH, 0.6)])
def test_every_sample_matches_the_augmented_matrix_exponential(net, stop: float) -> None:
    system = assemble(net)
    response = SampledResponse(Propagator(system))
    t = simulator_grid(stop, seed=4)
    assert stretches(response, t) >= 3
    rng = np.random.default_rng(5)
    n_parts = len(system.parts)
    power = np.abs(np.sin(np.outer(np.arange(1, n_parts + 1), t) * 40.0)) * 2.0
    power += rng.uniform(0.0, 0.3, power.shape)
    u = np.vstack([power, AMBIENT + 3.0 * np.sin(5.0 * t)[None, :]])  # the ambient moves too
    z0 = system.rest_state(AMBIENT) + np.linspace(0.0, 4.0, system.size)
    want = exact_by_expm(system, z0, t, u)
    rise = np.abs(want - AMBIENT).max()
    z_end, temps = response.run(z0, t, u)
    np.testing.assert_allclose(temps, want, rtol=0, atol=1e-10 * rise)
    # the same from inputs stored samples-first (what a caller may hand over)
    z_f, temps_f = response.run(z0, t, np.asfortranarray(u))
    np.testing.assert_allclose(temps_f, want, rtol=0, atol=1e-10 * rise)
    # peaks: the state, the last outputs and each output's largest sample, as run gives
    z_p, last, top = response.peaks(z0, t, u)
    np.testing.assert_allclose(last, want[:, -1], rtol=0, atol=1e-10 * rise)
    np.testing.assert_allclose(top, want.max(axis=1), rtol=0, atol=1e-10 * rise)
    np.testing.assert_array_equal(z_p, z_end)
    np.testing.assert_array_equal(z_f, z_end)
    assert system.temperatures(z_end, u[:, -1]) == pytest.approx(want[:, -1], abs=1e-10 * rise)
    assert len(response._even) > 0  # runs of one length took the kept tables


def test_one_sample_is_the_outputs_of_the_start() -> None:
    system = assemble(MIXED)
    z0 = system.rest_state(AMBIENT) + 1.0
    u = system.inputs([0.3, 0.2, 0.1], AMBIENT)[:, None]
    z, temps = SampledResponse(Propagator(system)).run(z0, np.array([0.0]), u)
    np.testing.assert_allclose(temps[:, 0], system.temperatures(z0, u[:, 0]), rtol=1e-13)
    np.testing.assert_allclose(z, z0, rtol=1e-13)


def test_sparse_rows_is_the_matrix_product() -> None:
    # Rows with 0 to 4 nonzeros, out of order; slots on consecutive columns, on one column
    # and on scattered ones: x M^T against numpy's dense product.
    m = np.zeros((7, 9))
    m[0, [1, 4, 5, 8]] = [1.5, -2.0, 0.25, 3.0]
    m[2, 8] = 7.0
    m[3, [0, 8]] = [-1.0, 2.0]
    m[4, [1, 8]] = [4.0, 0.5]
    m[5, [2, 3, 8]] = [1e-3, 9.0, -6.0]
    m[6, 8] = 1.0  # row 1 stays empty
    x = np.random.default_rng(6).normal(size=(13, 9))
    np.testing.assert_allclose(SparseRows(m).apply(x), x @ m.T, rtol=1e-14, atol=1e-14)
    diagonal = np.diag(np.arange(1.0, 6.0))  # one slot on consecutive columns
    ambient = np.hstack((diagonal, np.full((5, 1), 0.5)))  # and one on a single column
    y = x[:, :6]
    np.testing.assert_allclose(SparseRows(ambient).apply(y), y @ ambient.T, rtol=1e-14)
    np.testing.assert_array_equal(SparseRows(np.zeros((3, 4))).apply(x[:, :4]), 0.0)
