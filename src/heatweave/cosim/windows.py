"""The window rule of the co-simulation, and the mean power of a window.

Over a window of length ``h`` every resistance is held at one value; the thermal network
is advanced exactly with the window's mean power plus the first-order term of the power's
variation inside the window (:class:`heatweave.thermal_solver.Propagator`).  Two errors
remain, and the rule bounds both:

1. Holding R.  R is held at its value at the predicted mid-window temperature
   ``T + (h/2) dT/dt``.  Over the window R moves by ``dR/R ~ |d ln R/dT| |dT/dt| h``; the
   dissipation of a resistor in a linear network changes by at most that fraction
   (``|d ln P / d ln R| <= 1``), so ``|dP_j| <= P_j |dR_j/R_j|``.  The thermal network is
   passive (non-negative impulse responses), so the temperature error it causes is at most
   ``sum_j Z_ij(0) P_j |dR_j/R_j|``, whatever the history.  Since ``dT/dt`` is at most
   ``(T_final - T) / tau_min``, this is the bound "first order in h / tau_min times the
   relative change of R".  The rule keeps ``max_j |dR_j/R_j| <= tolerance / S`` with
   ``S = max_i sum_j Z_ij(0) P_j`` (the largest steady rise under the present power).
2. Power varying inside the window.  The first-order term is included; the remainder is
   below ``h / (2 tau_min)`` of it, so windows stay below ``MAX_FRACTION * tau_min``.

Windows also grow at most :data:`GROWTH` times per window (the prediction uses the last
window's power) and the first window is ``FIRST_FRACTION * tau_min`` long (its power is
not known before it runs).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]

MAX_FRACTION = 0.25
FIRST_FRACTION = 1e-3
GROWTH = 2.0
ALTER_FRACTION = 0.1


@dataclass(frozen=True, slots=True)
class WindowRule:
    """Window lengths for a temperature tolerance (K) and the network's time constant."""

    tolerance: float
    tau_min: float
    min_window: float = 0.0

    def first(self) -> float:
        """The first window's length (s)."""
        return max(FIRST_FRACTION * self.tau_min, self.min_window)

    def next(self, last: float, rise_scale: float, log_rate: float) -> float:
        """The next window after one of *last* seconds.

        *rise_scale* is ``S`` (K) of the module docstring; *log_rate* the largest predicted
        ``|d ln R / dt|`` (1/s) over the parts.
        """
        h = min(GROWTH * last, MAX_FRACTION * self.tau_min)
        if log_rate > 0:
            h = min(h, self.allowed_change(rise_scale) / log_rate)
        return max(h, self.min_window)

    def allowed_change(self, rise_scale: float) -> float:
        """The largest relative change of R per window, ``tolerance / S`` (``inf`` if S = 0)."""
        return self.tolerance / rise_scale if rise_scale > 0 else float("inf")

    def alter_threshold(self, rise_scale: float) -> float:
        """Below this relative change a held resistance is left as it is: a tenth of the
        allowed change per window, so skipping adds at most a tenth to the bound."""
        return min(ALTER_FRACTION * self.allowed_change(rise_scale), 1e-3)


def window_power(
    time: FloatArray, drops: FloatArray, resistance: FloatArray
) -> tuple[FloatArray, FloatArray]:
    """Mean dissipation (W) of each resistor over a window and its first moment.

    *time* are the window's time points (first = window start), *drops* the voltage across
    each resistor there (one row per resistor; overwritten), *resistance* the held values.  Returns
    ``(mean, m1)`` with ``m1 = int (t_end - t) (P(t) - mean) dt`` (trapezoidal rule).
    """
    h = float(time[-1] - time[0])
    squares = np.square(drops, out=drops)  # the caller's drops are not needed afterwards
    if h <= 0 or time.shape[0] < 2:
        return squares[:, -1] / resistance, np.zeros(squares.shape[0])
    dt = np.diff(time)
    weights = np.zeros((time.shape[0], 2))
    weights[:-1, 0] += dt / 2
    weights[1:, 0] += dt / 2
    weights[:, 1] = weights[:, 0] * (time[-1] - time)
    integrals = squares @ weights / resistance[:, None]
    mean = integrals[:, 0] / h
    moment = integrals[:, 1] - mean * h * h / 2
    return np.asarray(mean), np.asarray(moment)
