"""The periodic steady state of the linear thermal network under a sampled power waveform.

``settle`` needs the temperature ripple within one switching period once the temperatures
have settled: the network of :mod:`heatweave.thermal.solver` driven by the instantaneous
power of the last simulated period, periodically for ever.  That state is found exactly
(for power linear between samples) without simulating any warm-up:

* in modal coordinates ``q = V^-1 x`` (``A = V diag(lam) V^-1``; an RC network's modes are
  real and negative) each mode obeys ``q' = lam q + w(t)``;
* an interval of length ``h`` with ``w`` linear from ``w0`` to ``w1`` advances exactly as
  ``q(t+h) = e^z q + h (phi1(z) w0 + phi2(z) (w1 - w0))``, ``z = lam h``, with
  ``phi1(z) = (e^z - 1)/z`` and ``phi2(z) = (e^z - 1 - z)/z^2``;
* from ``q = 0`` one period gives the forced response ``r``; periodicity
  ``q(0) = e^(lam T) q(0) + r`` gives ``q(0) = r / (1 - e^(lam T))``, and each sample is
  its forced response plus ``e^(lam t) q(0)``;
* the cycle mean needs no samples: integrating ``x' = A x + B u`` over a period with
  ``x(T) = x(0)`` gives ``0 = A mean(x) + B mean(u)``, the steady state at the mean power.

When the eigenvectors are too ill-conditioned for that, the state is advanced interval by
interval with :class:`~heatweave.thermal.solver.Propagator` (power at the interval's mean)
from the steady state at the mean power, over periods until it repeats.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt

from heatweave.thermal.solver import MAX_MODAL_CONDITION, Propagator, ThermalSystem, phi1

FloatArray = npt.NDArray[np.float64]


def phi2(z: FloatArray) -> FloatArray:
    """``(e^z - 1 - z) / z^2``, limit 1/2 at ``z = 0`` (Taylor series below |z| = 1e-3)."""
    small = np.abs(z) < 1e-3
    safe = np.where(small, 1.0, z)
    series = 0.5 + z / 6.0 + z * z / 24.0 + z**3 / 120.0
    return np.where(small, series, (np.expm1(safe) - safe) / (safe * safe))


@dataclass(frozen=True, slots=True)
class Periodic:
    """A periodic steady state sampled at the waveform's times (one period, both ends).

    ``outputs`` are the system's temperatures (parts, then shared nodes) per sample.
    """

    time: FloatArray = field(repr=False)
    outputs: FloatArray = field(repr=False)
    mean: FloatArray

    @property
    def peak(self) -> FloatArray:
        """The highest temperature of each output within the period (degC)."""
        return np.asarray(self.outputs.max(axis=0))

    @property
    def valley(self) -> FloatArray:
        """The lowest temperature of each output within the period (degC)."""
        return np.asarray(self.outputs.min(axis=0))


def periodic(
    system: ThermalSystem, time: FloatArray, power: FloatArray, ambient: float
) -> Periodic:
    """The periodic steady state under *power* (``samples x parts``, W) sampled at *time*
    (one period, first to last sample), ambient fixed (see the module docstring)."""
    time = np.asarray(time, dtype=float)
    power = np.asarray(power, dtype=float).reshape(len(time), len(system.parts))
    span = float(time[-1] - time[0])
    mean_power = np.asarray(np.trapezoid(power, time, axis=0) / span)
    mean_u = system.inputs(mean_power, ambient)
    mean = system.temperatures(system.steady_state(mean_power, ambient), mean_u)
    u = np.column_stack([power, np.full(len(time), float(ambient))])  # samples x inputs
    if system.size == 0:
        return Periodic(time, u @ system.d.T, mean)
    rates, vectors = np.linalg.eig(system.a)
    if (
        np.max(np.abs(rates.imag)) > 1e-9 * np.max(np.abs(rates))
        or np.linalg.cond(np.real(vectors)) > MAX_MODAL_CONDITION
    ):
        states = _stepped(system, time, u, mean_power, ambient)
    else:
        states = _modal(np.real(rates), np.real(vectors), system.b, time, u)
    return Periodic(time, states @ system.c.T + u @ system.d.T, mean)


def _modal(
    rates: FloatArray, vectors: FloatArray, b: FloatArray, time: FloatArray, u: FloatArray
) -> FloatArray:
    """States per sample of the exact periodic solution (modal coordinates)."""
    w = u @ (np.linalg.inv(vectors) @ b).T  # samples x modes
    forced = np.zeros_like(w)
    q = np.zeros(len(rates))
    for j, h in enumerate(np.diff(time)):
        z = rates * h
        q = np.exp(z) * q + h * (phi1(z) * w[j] + phi2(z) * (w[j + 1] - w[j]))
        forced[j + 1] = q
    start = forced[-1] / -np.expm1(rates * float(time[-1] - time[0]))
    modal = forced + np.exp(np.outer(time - time[0], rates)) * start
    return np.asarray(modal @ vectors.T)


def _stepped(
    system: ThermalSystem, time: FloatArray, u: FloatArray, mean_power: FloatArray,
    ambient: float, rtol: float = 1e-9, max_periods: int = 10_000,
) -> FloatArray:  # fmt: skip
    """States per sample by repeated periods from the mean-power steady state (fallback)."""
    propagate = Propagator(system)
    z = system.steady_state(mean_power, ambient)
    middle = 0.5 * (u[1:] + u[:-1])
    steps = np.diff(time)
    for _ in range(max_periods):
        rows = [z]
        for h, inputs in zip(steps, middle, strict=True):
            rows.append(propagate.advance(rows[-1], inputs, float(h)))
        done = np.max(np.abs(rows[-1] - z)) <= rtol * max(1.0, float(np.max(np.abs(z))))
        z = rows[-1]
        if done:
            break
    return np.array(rows)


def ripple_bound(system: ThermalSystem, period: float, excess: FloatArray,
                 time: FloatArray) -> FloatArray | None:  # fmt: skip
    """How far each output's temperature (parts, then shared nodes) within the periodic
    steady state may move when every part's power is the exact product of straight-line
    voltages and currents between the samples rather than :func:`periodic`'s straight
    line through them; ``None`` when the network has no well-conditioned modes.

    *excess* holds per step of *time* and part the trapezoid's integral minus the exact
    one (:mod:`heatweave.run.sampling`).  On a step the two powers differ by a parabola of
    one sign, zero at both ends: its integral is the excess, its largest value 3/2 of the
    excess over the step.  The periodic response to a periodic difference ``dP`` is
    ``integral g_T(s) dP(t - s) ds`` over a period, with the periodized impulse response
    ``g_T(s) = sum_m r_m e^(lam_m s) / (1 - e^(lam_m T))`` (residues ``r_m`` of the modes),
    so ``|dT| <= sum_m |r_m| / (1 - e^(lam_m T)) * sum |excess|``, plus the direct
    feedthrough's ``|D| max |dP|``.
    """
    n = len(system.parts)
    spread = np.sum(np.abs(excess), axis=0).reshape(n)  # J per part over the period
    bound = np.zeros(len(system.outputs))
    if system.size:
        modes = Propagator(system).modes
        if modes is None:
            return None
        rates, vectors, inverse = modes
        residues = np.abs(system.c @ vectors)[:, :, None] * np.abs(inverse @ system.b[:, :n])
        periodized = residues / -np.expm1(rates * period)[None, :, None]
        bound += np.sum(periodized, axis=1) @ spread
    if np.any(system.d[:, :n] != 0.0) and len(time) > 1:
        steps = np.maximum(np.diff(time), np.finfo(float).tiny)[:, None]
        bound += np.abs(system.d[:, :n]) @ np.max(1.5 * np.abs(excess) / steps, axis=0)
    return bound
