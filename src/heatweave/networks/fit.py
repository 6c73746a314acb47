"""Fit an N-stage Foster network to measured or simulated Zth(t) data.

Zth data span decades in time and value, so the fit minimises *relative* residuals
``(model - data) / data``: every point counts alike whether it is 1 mK/W at 10 us or
10 K/W at 100 s.  The unknowns are ``log R`` and ``log tau``, which keeps every stage
positive without bounds and gives the solver well-scaled steps.  Starting taus are spread
log-evenly over the data's time span (a few shifted spreads are tried); for each spread the
stage resistances that fit best are found first by non-negative linear least squares, since
Zth is linear in R once the taus are fixed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt
from scipy.optimize import least_squares, nnls

from heatweave.networks.base import FloatArray, NetworkError
from heatweave.networks.foster import Foster

_R_FLOOR = 1e-9  # smallest stage R, as a fraction of the largest Zth value
_R_CEILING = 1e3
_TAU_MARGIN = 1e3  # taus may lie this factor outside the data's time span


@dataclass(frozen=True, slots=True)
class FitResult:
    """The fitted network and how far it is from the data (over all points)."""

    network: Foster
    rms_abs: float  # K/W
    max_abs: float  # K/W
    rms_rel: float  # fraction of the data value
    max_rel: float
    points: int


def _count(n: int, noun: str) -> str:
    return f"{n} {noun}" + ("" if n == 1 else "s")


def _basis(t: FloatArray, tau: FloatArray) -> FloatArray:
    return np.asarray(-np.expm1(-t[:, None] / tau[None, :]))


def _check(t: npt.ArrayLike, zth: npt.ArrayLike, stages: int) -> tuple[FloatArray, FloatArray]:
    times = np.asarray(t, dtype=float).ravel()
    values = np.asarray(zth, dtype=float).ravel()
    if times.shape != values.shape:
        raise NetworkError(
            f"{times.size} times but {values.size} Zth values", hint="give one Zth per time"
        )
    if stages < 1:
        raise NetworkError(f"cannot fit {stages} stages", hint="ask for 1 stage or more")
    needed = 2 * stages + 1
    if times.size < needed:
        raise NetworkError(
            f"{_count(times.size, 'data point')} {'is' if times.size == 1 else 'are'} too few "
            f"for {_count(stages, 'Foster stage')}",
            hint=f"give at least {needed} points (one more than the {2 * stages} unknowns) "
            "or fit fewer stages",
        )
    if not (np.all(np.isfinite(times)) and np.all(np.isfinite(values))):
        raise NetworkError("the Zth data hold a value that is not finite", hint="remove it")
    if np.any(times <= 0) or np.any(values <= 0):
        raise NetworkError(
            "every time and every Zth value must be greater than zero",
            hint="Zth(0) = 0 carries no information; drop points at t <= 0",
        )
    if np.unique(times).size < needed:
        raise NetworkError(
            "too few distinct times for the stages asked for",
            hint=f"give at least {needed} different times",
        )
    order = np.argsort(times, kind="stable")
    return times[order], values[order]


def _start(times: FloatArray, values: FloatArray, tau: FloatArray) -> FloatArray:
    weighted = _basis(times, tau) / values[:, None]
    r, _ = nnls(weighted, np.ones_like(values))
    floor = 1e-6 * float(values.max())  # a stage NNLS drops still needs a positive start
    return np.concatenate([np.log(np.maximum(r, floor)), np.log(tau)])


def _residuals(params: FloatArray, times: FloatArray, values: FloatArray) -> FloatArray:
    n = params.size // 2
    r, tau = np.exp(params[:n]), np.exp(params[n:])
    return np.asarray(_basis(times, tau) @ r / values - 1.0)


def fit_foster(
    t: npt.ArrayLike, zth: npt.ArrayLike, stages: int, *, starts: int = 5
) -> FitResult:
    """Least-squares Foster fit with positive R and tau; *starts* starting spreads are tried."""
    times, values = _check(t, zth, stages)
    lo, hi = np.log10(times[0]), np.log10(times[-1])
    # Bounds keep a surplus stage from running off to R -> 0 or tau -> infinity.
    top = float(np.log(values.max()))
    lower = np.concatenate([np.full(stages, top + np.log(_R_FLOOR)),
                            np.full(stages, np.log(times[0] / _TAU_MARGIN))])
    upper = np.concatenate([np.full(stages, top + np.log(_R_CEILING)),
                            np.full(stages, np.log(times[-1] * _TAU_MARGIN))])
    best = None
    for shift in np.linspace(-0.5, 0.5, max(starts, 1)):
        # Spread the taus over the data span, shifted by up to half a step either way.
        step = (hi - lo) / stages
        centres = lo + step * (np.arange(stages) + 0.5 + shift)
        guess = np.clip(_start(times, values, 10.0**centres), lower + 1e-9, upper - 1e-9)
        run = least_squares(
            _residuals, guess, args=(times, values), bounds=(lower, upper), method="trf",
            xtol=1e-15, ftol=1e-15, gtol=1e-15, max_nfev=2000 * stages,
        )
        if best is None or run.cost < best.cost:
            best = run
    assert best is not None
    n = stages
    network = Foster(tuple(zip(np.exp(best.x[:n]).tolist(), np.exp(best.x[n:]).tolist(),
                               strict=True)))
    error = network.zth(times) - values
    relative = error / values
    return FitResult(
        network,
        rms_abs=float(np.sqrt(np.mean(error**2))),
        max_abs=float(np.max(np.abs(error))),
        rms_rel=float(np.sqrt(np.mean(relative**2))),
        max_rel=float(np.max(np.abs(relative))),
        points=int(times.size),
    )
