"""Foster network: independent RC stages in series, each with its own time constant.

Zth(t) = sum_i Ri (1 - exp(-t/taui)),  Zth(s) = sum_i Ri / (1 + s taui),  Ci = taui / Ri.

A Foster network is a curve fit of the terminal behaviour: its internal nodes are not
physical temperatures, and its capacitors sit across their stage resistors, not to the
thermal reference.  It is exact between its two terminals only.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from heatweave.networks.base import (
    ComplexArray,
    Element,
    FloatArray,
    NetworkForm,
    Realisation,
    StateSpace,
    as_times,
    positive_pairs,
    register,
)


@register
@dataclass(frozen=True, slots=True)
class Foster(NetworkForm):
    """Foster stages ``((rth, tau), ...)`` in K/W and s, kept sorted by tau.

    States (``port_model``): the voltage across each stage, ``v_i = T_(i-1) - T_i`` with
    ``dv_i/dt = -v_i/tau_i + P/C_i``.  They are differences, so they do not move when the
    cold node moves: ``T_hot = T_cold + sum v_i`` and, the stages being in series, all of
    ``P`` arrives at the cold node at once (``Q_cold = P``).
    """

    stages: tuple[tuple[float, float], ...]
    kind = "foster"

    def __post_init__(self) -> None:
        checked = positive_pairs(self.stages, self.kind, ("rth", "tau"))
        object.__setattr__(self, "stages", tuple(sorted(checked, key=lambda st: st[1])))

    @classmethod
    def from_annotation(cls, data: object) -> Foster:
        """From ``((rth, tau), ...)``."""
        return cls(positive_pairs(data, cls.kind, ("rth", "tau")))

    @property
    def rth(self) -> FloatArray:
        """Stage resistances (K/W)."""
        return np.array([r for r, _ in self.stages])

    @property
    def tau(self) -> FloatArray:
        """Stage time constants (s)."""
        return np.array([tau for _, tau in self.stages])

    @property
    def cth(self) -> FloatArray:
        """Stage capacitances ``tau / rth`` (J/K)."""
        return self.tau / self.rth

    @property
    def total_rth(self) -> float:
        return float(sum(r for r, _ in self.stages))

    def stage_rth(self) -> tuple[float, ...]:
        return tuple(r for r, _ in self.stages)

    def zth(self, t: npt.ArrayLike) -> FloatArray:
        times = as_times(t)
        after = np.maximum(times, 0.0)[..., None]
        return np.asarray(np.sum(self.rth * -np.expm1(-after / self.tau), axis=-1))

    def impedance(self, s: npt.ArrayLike) -> ComplexArray:
        freq = np.asarray(s, dtype=complex)[..., None]
        return np.asarray(np.sum(self.rth / (1.0 + freq * self.tau), axis=-1))

    def foster_pairs(self) -> tuple[tuple[float, float], ...]:
        return self.stages

    def port_model(self) -> StateSpace:
        n = len(self.stages)
        b = np.zeros((n, 2))
        b[:, 0] = 1.0 / self.cth
        c = np.zeros((2, n))
        c[0, :] = 1.0
        d = np.array([[0.0, 1.0], [1.0, 0.0]])
        states = tuple(f"v{i}" for i in range(1, n + 1))
        return StateSpace(
            np.diag(-1.0 / self.tau), b, c, d, states, ("P", "T_cold"), ("T_hot", "Q_cold")
        )

    def elements(self, prefix: str, hot: str, cold: str, ground: str = "0") -> Realisation:
        """Stage i: ``R{prefix}{i}`` and ``C{prefix}{i}`` in parallel, stages in series.

        Internal nodes ``{prefix}n1 ...`` lie between stages (tau ascending from *hot*).
        They are not physical temperatures; *ground* is not used.
        """
        inner = tuple(f"{prefix}n{i}" for i in range(1, len(self.stages)))
        chain = (hot, *inner, cold)
        elements: list[Element] = []
        for i, (r, c) in enumerate(zip(self.rth, self.cth, strict=True), start=1):
            a, b = chain[i - 1], chain[i]
            elements.append(Element("R", f"R{prefix}{i}", a, b, float(r)))
            elements.append(Element("C", f"C{prefix}{i}", a, b, float(c)))
        return Realisation(tuple(elements), inner)
