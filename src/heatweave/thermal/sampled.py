"""The thermal network's exact response to power sampled at a simulator's time points.

The co-simulation holds each resistance over a window, but the power inside the window is
whatever ngspice computed at its own time points: a sine's ripple, an inrush, a PWM edge.
Between two samples the input is taken as the straight line through them (the same input
the trapezoid rule integrates for the window's mean), and the linear ODE
``dz/dt = A z + B u`` is solved exactly for it, mode by mode (``A = V diag(rates) V^-1``).
Over a step of ``dt`` with ``x = rate * dt`` and modal forcing ``f`` (``V^-1 B u``)::

    w(t + dt) = e^x w(t) + dt (f(t) (phi1(x) - phi2(x)) + f(t + dt) phi2(x))

with ``phi1(x) = (e^x - 1) / x`` and ``phi2(x) = (e^x - 1 - x) / x^2``: the variation of
constants formula integrated for a linear input.  A window's steps are summed at once,
``w_k = E_k (w_0 + sum_{i<k} beta_i / E_{i+1})`` with ``E_k = e^{rate (t_k - t_0)}``, in
stretches short enough (:data:`SPAN` of the fastest time constant) that ``1 / E`` cannot
overflow.  This is the window mean's response plus the ripple's response, by superposition
(the network is linear), so every temperature at every sample is the network's state for
the power ngspice computed, and its largest value is the instantaneous peak.
"""

from __future__ import annotations

import math

import numpy as np
import numpy.typing as npt
from scipy.sparse import csr_matrix

from heatweave.thermal.solver import Propagator

FloatArray = npt.NDArray[np.float64]

#: A stretch of one summation spans at most this many of the fastest time constants.
SPAN = 30.0
#: A stretch's arrays (modes x steps) hold about this many numbers (a few 100 kB).
CACHE_WORDS = 32768
#: Below this |x| the phi functions come from their series (their formulas cancel).
SERIES_BELOW = 0.05


class SampledResponse:
    """The exact response of a :class:`~heatweave.thermal.solver.ThermalSystem` to
    piecewise-linear inputs, through the modes of its :class:`Propagator`.

    Raises ``ValueError`` when the propagator has no well-conditioned modes
    (:attr:`Propagator.modes` is ``None``)."""

    def __init__(self, propagator: Propagator) -> None:
        modes = propagator.modes
        if modes is None:
            raise ValueError("the thermal network has no well-conditioned modes")
        system = propagator.system
        self.rates, self.vectors, self.inverse = modes
        self.forcing = csr_matrix(self.inverse @ system.b)  # block structure: mostly zeros
        self.readout = csr_matrix(system.c @ self.vectors)
        self.direct = system.d if np.any(system.d != 0.0) else None
        self.fastest = float(np.max(-self.rates)) if self.rates.size else 0.0
        # Steps per stretch: a stretch's arrays stay within the processor's cache.
        self.chunk = max(16, CACHE_WORDS // max(self.rates.size, 1))

    def run(
        self, z0: FloatArray, times: FloatArray, inputs: FloatArray
    ) -> tuple[FloatArray, FloatArray]:
        """``(state at the last time, outputs at every time)`` from state *z0* at
        ``times[0]``, for *inputs* (one column of ``u`` per time, straight lines between)."""
        outputs = np.empty((self.readout.shape[0], times.shape[0]))
        w = self.inverse @ z0
        if self.rates.size == 0:
            outputs[:] = 0.0
        else:
            start, last = 0, times.shape[0] - 1
            while True:
                stop = self._stretch_end(times, start)
                forcing = np.asarray(self.forcing @ inputs[:, start : stop + 1])
                states = self._stretch(w, times[start : stop + 1], forcing)
                outputs[:, start : stop + 1] = self.readout @ states
                w = states[:, -1]
                if stop >= last:
                    break
                start = stop
        if self.direct is not None:
            outputs += self.direct @ inputs
        return np.asarray(self.vectors @ w), outputs

    def _stretch_end(self, times: FloatArray, start: int) -> int:
        """The last sample of the stretch from *start*: at least one step, at most
        :data:`SPAN` fastest time constants long."""
        last = int(times.shape[0]) - 1
        if start >= last:
            return last
        limit = times[start] + SPAN / self.fastest
        stop = int(np.searchsorted(times, limit, side="right")) - 1
        return int(min(max(stop, start + 1), last, start + self.chunk))

    def _stretch(self, w0: FloatArray, times: FloatArray, forcing: FloatArray) -> FloatArray:
        """Modal states (modes x samples) over one stretch (see the module docstring)."""
        rates = self.rates
        if times.shape[0] < 2:
            return w0[:, None].copy()
        dt = np.diff(times)
        first, second = step_weights(np.multiply.outer(rates, dt))
        if times.shape[0] == 2:  # one step: no running sum (e^x may underflow to 0)
            step = np.exp(rates * dt[0]) * w0
            step += dt[0] * (forcing[:, 0] * first[:, 0] + forcing[:, 1] * second[:, 0])
            return np.column_stack((w0, step))
        growth = np.exp(np.multiply.outer(rates, times[1:] - times[0]))  # E_k >= e^-SPAN
        states = np.empty((rates.shape[0], times.shape[0]))
        states[:, 0] = w0
        rest = states[:, 1:]
        np.multiply(first, forcing[:, :-1], out=rest)
        second *= forcing[:, 1:]
        rest += second
        rest *= dt
        rest /= growth  # beta_k / E_{k+1}
        np.cumsum(rest, axis=1, out=rest)
        rest += w0[:, None]
        rest *= growth
        return states


def step_weights(x: FloatArray) -> tuple[FloatArray, FloatArray]:
    """``phi1(x) - phi2(x)`` and ``phi2(x)`` (1/2 and 1/2 at 0) with
    ``phi1(x) = (e^x - 1) / x`` and ``phi2(x) = (e^x - 1 - x) / x^2``: the weights of a
    step's two end samples.  Their Taylor series where the formulas would cancel, with as
    many terms as the largest ``|x|`` needs for full double precision."""
    small = np.abs(x) < SERIES_BELOW
    top = float(np.max(np.abs(x), where=small, initial=0.0))
    terms = 1
    while terms < 12 and top**terms / math.factorial(terms + 2) > 1e-16:
        terms += 1
    # phi2 = sum x^j / (j+2)!, phi1 - phi2 = sum x^j (j+1) / (j+2)!, by Horner's rule
    first = x * (terms / math.factorial(terms + 1))
    second = x * (1 / math.factorial(terms + 1))
    for j in range(terms - 1, -1, -1):
        first += (j + 1) / math.factorial(j + 2)
        second += 1 / math.factorial(j + 2)
        if j:
            first *= x
            second *= x
    if not small.all():
        big = ~small
        xb = x[big]
        em1 = np.expm1(xb)
        two = (em1 - xb) / (xb * xb)
        first[big] = em1 / xb - two
        second[big] = two
    return first, second
