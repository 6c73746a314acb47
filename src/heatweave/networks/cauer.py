"""Cauer ladder: the physical form, every node a temperature, every capacitor to the reference.

Stage k = (Rk, Ck): Ck from ladder node k to the thermal reference (node 0 = 0 degC
absolute, which is where a heat capacity's stored energy is measured from), Rk from node k
to node k+1.  Node 1 is the hot spot, node n+1 the cold end.  So C1 is the capacitance
seen first from the hot spot: at high frequency Zth(s) ~ 1/(s C1).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from heatweave.networks.base import (
    ComplexArray,
    Element,
    FloatArray,
    NetworkError,
    NetworkForm,
    Realisation,
    StateSpace,
    as_times,
    positive_pairs,
    register,
)


@register
@dataclass(frozen=True, slots=True)
class Cauer(NetworkForm):
    """Cauer stages ``((rth, cth), ...)`` in K/W and J/K, hot end first.

    States (``port_model``): the absolute temperatures of ladder nodes 1..n (node 1 =
    hot spot).  ``Ck dTk/dt = (T(k-1) - Tk)/R(k-1) - (Tk - T(k+1))/Rk`` with the power
    entering node 1 and ``T(n+1) = T_cold``;  ``Q_cold = (Tn - T_cold)/Rn``.
    """

    stages: tuple[tuple[float, float], ...]
    kind = "cauer"

    def __post_init__(self) -> None:
        object.__setattr__(self, "stages", positive_pairs(self.stages, self.kind, ("rth", "cth")))

    @classmethod
    def from_annotation(cls, data: object) -> Cauer:
        """From ``((rth, cth), ...)``, hot end first."""
        return cls(positive_pairs(data, cls.kind, ("rth", "cth")))

    @property
    def rth(self) -> FloatArray:
        """Stage resistances (K/W), hot end first."""
        return np.array([r for r, _ in self.stages])

    @property
    def cth(self) -> FloatArray:
        """Stage capacitances (J/K), hot end first."""
        return np.array([c for _, c in self.stages])

    @property
    def total_rth(self) -> float:
        return float(sum(r for r, _ in self.stages))

    def stage_rth(self) -> tuple[float, ...]:
        return tuple(r for r, _ in self.stages)

    def conductance(self) -> FloatArray:
        """The ladder's nodal conductance matrix G (W/K), cold end held at 0."""
        g = 1.0 / self.rth
        matrix = np.diag(g)
        matrix[1:, 1:] += np.diag(g[:-1])
        idx = np.arange(len(g) - 1)
        matrix[idx, idx + 1] = matrix[idx + 1, idx] = -g[:-1]
        return matrix

    def zth(self, t: npt.ArrayLike) -> FloatArray:
        """Through the exactly equivalent Foster form (eigen-decomposition of the ladder)."""
        pairs = np.array(self.foster_pairs())
        after = np.maximum(as_times(t), 0.0)[..., None]
        return np.asarray(np.sum(pairs[:, 0] * -np.expm1(-after / pairs[:, 1]), axis=-1))

    def impedance(self, s: npt.ArrayLike) -> ComplexArray:
        freq = np.asarray(s, dtype=complex)
        z = np.zeros_like(freq)
        # From the cold end inwards: Zk = 1 / (s Ck + 1 / (Rk + Z(k+1))).
        for r, c in reversed(self.stages):
            z = 1.0 / (freq * c + 1.0 / (r + z))
        return np.asarray(z)

    def foster_pairs(self) -> tuple[tuple[float, float], ...]:
        """Partial fractions: the poles of Zth(s) are minus the eigenvalues of the ladder
        matrix C^-1 G, made symmetric tridiagonal by scaling with C^(1/2) (see convert)."""
        from scipy.linalg import eigh_tridiagonal  # scipy loads only here: emit stays quick

        scale = 1.0 / np.sqrt(self.cth)
        g = self.conductance()
        diagonal = np.diag(g) * scale**2
        off = np.diag(g, 1) * scale[:-1] * scale[1:]
        lam, vectors = eigh_tridiagonal(diagonal, off)
        weights = vectors[0, :] * scale[0]
        if np.any(lam <= 0):
            raise NetworkError(
                "the Cauer ladder has a non-positive pole; its values are out of range",
                hint="check that every Cauer rth and cth is positive and of sensible size",
            )
        return tuple(zip((weights**2 / lam).tolist(), (1.0 / lam).tolist(), strict=True))

    def port_model(self) -> StateSpace:
        n = len(self.stages)
        inv_c = 1.0 / self.cth
        a = -inv_c[:, None] * self.conductance()
        b = np.zeros((n, 2))
        b[0, 0] = inv_c[0]
        b[-1, 1] = inv_c[-1] / self.rth[-1]
        c = np.zeros((2, n))
        c[0, 0] = 1.0
        c[1, -1] = 1.0 / self.rth[-1]
        d = np.array([[0.0, 0.0], [0.0, -1.0 / self.rth[-1]]])
        states = tuple(f"T{k}" for k in range(1, n + 1))
        return StateSpace(a, b, c, d, states, ("P", "T_cold"), ("T_hot", "Q_cold"))

    def elements(self, prefix: str, hot: str, cold: str, ground: str = "0") -> Realisation:
        """``C{prefix}k`` from ladder node k to *ground*, ``R{prefix}k`` from node k to k+1.

        Ladder node 1 is *hot*, nodes 2..n are ``{prefix}n1 ... {prefix}n(n-1)``, node
        n+1 is *cold*.  The internal nodes are physical temperatures inside the part.
        """
        inner = tuple(f"{prefix}n{k}" for k in range(1, len(self.stages)))
        chain = (hot, *inner, cold)
        elements: list[Element] = []
        for k, (r, c) in enumerate(self.stages, start=1):
            elements.append(Element("C", f"C{prefix}{k}", chain[k - 1], ground, c))
            elements.append(Element("R", f"R{prefix}{k}", chain[k - 1], chain[k], r))
        return Realisation(tuple(elements), inner)
