"""One lumped stage: Rth from the hot spot to the cold end, Cth from the hot spot to the reference.

``cth = 0`` means steady state only: the hot spot follows the power at once.
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
    positive,
    register,
)
from heatweave.networks.cauer import Cauer


@register
@dataclass(frozen=True, slots=True)
class Single(NetworkForm):
    """``(rth, cth)`` in K/W and J/K; a one-stage Cauer ladder when ``cth > 0``.

    States (``port_model``): the hot spot's absolute temperature, or none when ``cth = 0``
    (then ``T_hot = T_cold + rth P`` and ``Q_cold = P`` directly).
    """

    rth: float
    cth: float = 0.0
    kind = "single"

    def __post_init__(self) -> None:
        object.__setattr__(self, "rth", positive(self.rth, "rth of the single stage"))
        object.__setattr__(
            self, "cth", positive(self.cth, "cth of the single stage", allow_zero=True)
        )

    @classmethod
    def from_annotation(cls, data: object) -> Single:
        """From ``(rth, cth)``; ``cth`` may be 0."""
        if isinstance(data, str | bytes) or not isinstance(data, tuple | list) or len(data) != 2:
            raise NetworkError(
                "a single stage needs exactly two values [rth, cth]",
                hint="write it as single = [rth, cth]; use cth = 0 for steady state only",
            )
        rth = positive(data[0], "rth of the single stage")
        cth = positive(data[1], "cth of the single stage", allow_zero=True)
        return cls(rth, cth)

    @property
    def tau(self) -> float:
        """The time constant ``rth * cth`` (s)."""
        return self.rth * self.cth

    @property
    def total_rth(self) -> float:
        return self.rth

    def stage_rth(self) -> tuple[float, ...]:
        return (self.rth,)

    def ladder(self) -> Cauer:
        """The one-stage Cauer ladder; a steady-only stage (cth = 0) has none."""
        if self.cth == 0:
            raise NetworkError(
                "a single stage with cth = 0 has no dynamic (Foster or Cauer) form",
                hint="give the stage a heat capacity cth > 0",
            )
        return Cauer(((self.rth, self.cth),))

    def zth(self, t: npt.ArrayLike) -> FloatArray:
        times = as_times(t)
        if self.cth == 0:
            return np.where(times > 0, self.rth, 0.0)
        return self.ladder().zth(times)

    def impedance(self, s: npt.ArrayLike) -> ComplexArray:
        freq = np.asarray(s, dtype=complex)
        return np.asarray(self.rth / (1.0 + freq * self.tau))

    def foster_pairs(self) -> tuple[tuple[float, float], ...]:
        self.ladder()
        return ((self.rth, self.tau),)

    def port_model(self) -> StateSpace:
        if self.cth == 0:
            return StateSpace(
                np.zeros((0, 0)),
                np.zeros((0, 2)),
                np.zeros((2, 0)),
                np.array([[self.rth, 1.0], [1.0, 0.0]]),
                (),
                ("P", "T_cold"),
                ("T_hot", "Q_cold"),
            )
        return self.ladder().port_model()

    def elements(self, prefix: str, hot: str, cold: str, ground: str = "0") -> Realisation:
        """``R{prefix}1`` hot to cold and, when ``cth > 0``, ``C{prefix}1`` hot to *ground*."""
        resistor = Element("R", f"R{prefix}1", hot, cold, self.rth)
        if self.cth == 0:
            return Realisation((resistor,), ())
        return Realisation((Element("C", f"C{prefix}1", hot, ground, self.cth), resistor), ())
