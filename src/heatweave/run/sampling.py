"""How much a mean power depends on what happens between a simulator's time points.

The mean ``power`` reports is a trapezoid over ngspice's points.  Between two points the
voltages and currents are unknown; taking them as straight lines, the power of a resistor
(``V^2 / R``) or of a terminal (``V I``) is a parabola whose exact integral differs from the
trapezoid by ``h dV dI / 6`` per step.  Where the waveform is resolved the two agree; a
ramp or a corner crossed in one step shows up as a difference (README, "How a result is
verified").
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

FloatArray = npt.NDArray[np.float64]


def sampling_error(time: FloatArray, excess: FloatArray, period: float | None) -> float:
    """How far :func:`period_mean`'s trapezoid of the power lies from the exact mean of the
    power of straight-line voltages and currents between the same time points (W), over the
    same window: *excess* holds, per step, the trapezoid's integral minus that exact one
    (a resistor's ``h dV^2 / 6R``, a product's ``h dV dI / 6``).  Where the waveform is
    resolved the two agree; a step across a ramp or a corner shows up here."""
    if len(time) < 2 or not time[-1] > time[0]:
        return 0.0
    start = float(time[0]) if period is None else max(float(time[-1]) - period, float(time[0]))
    inside = time[1:] > start
    return abs(float(np.sum(excess[inside]))) / (float(time[-1]) - start)


def step_excess(drop: FloatArray, current: FloatArray, time: FloatArray) -> FloatArray:
    """Per step, the trapezoid's integral of ``drop * current`` minus the exact integral of
    the product of the two straight lines between the points: ``h d(drop) d(current) / 6``."""
    return np.diff(time) * np.diff(drop) * np.diff(current) / 6.0


def square_law_excess(time: FloatArray, power: FloatArray) -> FloatArray:
    """:func:`step_excess` of a resistance held over each step, from its power alone:
    ``h (sqrt P1 - sqrt P0)^2 / 6`` (``V^2 / R`` of a straight-line voltage that keeps its
    sign; one that crosses zero within a step is underestimated)."""
    root = np.sqrt(np.maximum(power, 0.0))
    return np.asarray(np.diff(time) * np.diff(root) ** 2 / 6.0, dtype=np.float64)
