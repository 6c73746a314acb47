"""The window rule of the co-simulation, and the mean power of a window.

Over a window of length ``h`` every resistance is held at one value; the thermal network
is advanced exactly for the power at ngspice's own time points inside the window, straight
lines between them (:class:`heatweave.thermal.sampled.SampledResponse`).  The error left is
that of holding R, and the rule bounds it:

1. Holding R.  R is held at its value at the predicted mid-window temperature
   ``T + (h/2) dT/dt``.  Over the window R moves by ``|dR_j/R_j| = r_j h`` with
   ``r_j = |d ln R_j/dT| |dT_j/dt|``; the dissipation of a resistor in a linear network
   changes by at most that fraction (``|d ln P / d ln R| <= 1``), so
   ``|dP_j| <= P_j r_j h``.  The thermal network is passive (non-negative impulse
   responses), so the temperature error this causes is at most
   ``E_i = h sum_j Z_ij(0) P_j r_j`` whatever the history (``Z(0)``: the network's DC gain,
   K/W).  ``dT/dt`` is at most ``(T_final - T) / tau_min``, so this is the bound "first
   order in h / tau_min times the relative change of R".  Electrothermal feedback
   amplifies an error by up to ``1 / (1 - g)`` with the loop gain
   ``g = max_i sum_j Z_ij(0) P_j |d ln R_j/dT|`` (g >= 1 is thermal runaway).  The rule
   keeps ``max_i E_i / (1 - g) <= tolerance``.
2. Windows stay below ``MAX_FRACTION * tau_min``, so that the prediction of the next
   window's mid-point temperature (first order in ``h``) stays close.

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
MAX_ALTER_SKIP = 1e-3
#: Below this stability margin (1 - loop gain) the bound is taken at this margin.
MIN_MARGIN = 0.1
#: Above this loop gain the co-simulation gives up: errors grow as 1 / (1 - g), and near
#: runaway the full deck's own diagnosis is wanted.
MAX_LOOP_GAIN = 0.8


@dataclass(frozen=True, slots=True)
class WindowRule:
    """Window lengths for a temperature tolerance (K) and the network's time constant."""

    tolerance: float
    tau_min: float
    min_window: float = 0.0

    def first(self) -> float:
        """The first window's length (s)."""
        return max(FIRST_FRACTION * self.tau_min, self.min_window)

    def next(self, last: float, error_rate: float) -> float:
        """The next window after one of *last* seconds; *error_rate* is
        ``max_i E_i / (h (1 - g))`` (K/s) of the module docstring (:func:`error_rate`)."""
        h = min(GROWTH * last, MAX_FRACTION * self.tau_min)
        if error_rate > 0:
            h = min(h, self.tolerance / error_rate)
        return max(h, self.min_window)

    def alter_threshold(self, gain: FloatArray, power: FloatArray) -> FloatArray:
        """Per part, the relative change of R below which its held value is kept: what
        would cost a tenth of the tolerance, ``0.1 tol / max_i Z_ij(0) P_j``."""
        weight = np.max(gain * power[None, :], axis=0) if gain.size else np.zeros(0)
        with np.errstate(divide="ignore"):
            allowed = np.where(weight > 0, ALTER_FRACTION * self.tolerance / weight, np.inf)
        return np.asarray(np.minimum(allowed, MAX_ALTER_SKIP))


def error_rate(
    gain: FloatArray, power: FloatArray, log_slope: FloatArray, rate: FloatArray
) -> float:
    """The growth of the hold-error bound per second of window, ``max_i E_i / h / (1 - g)``.

    *gain* is the DC gain ``Z(0)`` (parts x parts, K/W), *power* the parts' dissipation (W),
    *log_slope* ``d ln R/dT`` (1/K), *rate* ``dT/dt`` (K/s) of each part.
    """
    if gain.size == 0:
        return 0.0
    spread = gain @ (power * np.abs(log_slope * rate))
    return float(np.max(spread)) / max(1.0 - loop_gain(gain, power, log_slope), MIN_MARGIN)


def loop_gain(gain: FloatArray, power: FloatArray, log_slope: FloatArray) -> float:
    """Bound on the electrothermal loop gain ``g = max_i sum_j Z_ij(0) P_j |d ln R_j/dT|``."""
    if gain.size == 0:
        return 0.0
    return float(np.max(gain @ (power * np.abs(log_slope))))


def window_power(time: FloatArray, drops: FloatArray, resistance: FloatArray) -> FloatArray:
    """Mean dissipation (W) of each resistor over a window (trapezoidal rule).

    *time* are the window's time points (first = window start), *drops* the voltage across
    each resistor there (one row per resistor; squared in place), *resistance* the held
    values.
    """
    h = float(time[-1] - time[0])
    squares = np.square(drops, out=drops)  # the caller's drops are not needed afterwards
    if h <= 0 or time.shape[0] < 2:
        return np.asarray(squares[:, -1] / resistance)
    dt = np.diff(time)
    weights = np.zeros(time.shape[0])
    weights[:-1] += dt / 2
    weights[1:] += dt / 2
    return np.asarray(squares @ weights / resistance / h)
