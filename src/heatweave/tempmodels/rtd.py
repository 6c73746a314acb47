"""``rtd``: platinum resistance thermometers by the Callendar-Van Dusen equation.

IEC 60751: R(t) = R0 (1 + A t + B t^2 + C (t - 100) t^3), t in degC, the C term only below
0 degC; A = 3.9083e-3, B = -5.775e-7, C = -4.183e-12.  R0 is the resistance at 0 degC.
The standard defines the equation from -200 to 850 degC only; beyond 850 degC the negative
B term bends R(t) back down (a maximum near 3400 degC), so solutions there are artefacts.

The deck's value is R0 by default: for this model ``tref`` defaults to 0 degC, so a Pt100
written as ``100`` is 100 ohm at 0 degC.  With ``r0`` given the deck's value is ignored; with
``tref`` given (and no ``r0``) the deck's value is taken to hold at ``tref``.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import ClassVar, Self

import numpy as np

from heatweave.quantities import format_number as fmt
from heatweave.tempmodels.base import (
    FloatArray,
    NumberFormat,
    ParamSpec,
    ParamValue,
    ParamWarning,
    TempModel,
    ValidRange,
    paren,
    pick,
    written,
)
from heatweave.tempmodels.registry import register

IEC_A = 3.9083e-3
IEC_B = -5.775e-7
IEC_C = -4.183e-12


@register
@dataclass(frozen=True, slots=True)
class Rtd(TempModel):
    """Callendar-Van Dusen, IEC 60751 coefficients by default, r0 at 0 degC."""

    name: ClassVar[str] = "rtd"
    summary: ClassVar[str] = "platinum RTD, Callendar-Van Dusen (IEC 60751)"
    default_tref: ClassVar[float] = 0.0
    valid_range: ClassVar[ValidRange | None] = ValidRange(-200.0, 850.0, "IEC 60751")
    params: ClassVar[tuple[ParamSpec, ...]] = (
        ParamSpec(
            "r0",
            "ohm",
            "resistance at 0 degC (default: the deck's value at tref)",
            positive=True,
            example="100.0",
        ),
        ParamSpec("a", "1/K", "Callendar-Van Dusen A", default=IEC_A),
        ParamSpec("b", "1/K^2", "Callendar-Van Dusen B", default=IEC_B),
        ParamSpec("c", "1/K^4", "Callendar-Van Dusen C, used below 0 degC", default=IEC_C),
    )

    r0: float
    a: float = IEC_A
    b: float = IEC_B
    c: float = IEC_C
    tref: float = 0.0  # degC where r0's value belongs: 0, or tref when the deck's value holds

    @classmethod
    def from_params(
        cls, params: Mapping[str, ParamValue], r_nominal: float, tref: float | None = None
    ) -> Self:
        a = pick(params, cls.params, "a")
        b = pick(params, cls.params, "b")
        c = pick(params, cls.params, "c")
        assert a is not None and b is not None and c is not None
        shape = cls(1.0, a, b, c)
        r0 = written(params, "r0")
        if r0 is not None:
            return cls(r0, a, b, c)
        at = cls.reference(tref)
        return cls(r_nominal / shape.resistance(at), a, b, c, at)

    @property
    def reference_temperature(self) -> float:
        return self.tref

    def _resistance(self, t_c: FloatArray) -> FloatArray:
        cold: FloatArray = np.minimum(t_c, 0.0)
        return self.r0 * (
            1.0 + self.a * t_c + self.b * t_c * t_c + self.c * (cold - 100.0) * cold**3
        )

    def _slope(self, t_c: FloatArray) -> FloatArray:
        cold = np.minimum(t_c, 0.0)
        return self.r0 * (self.a + 2.0 * self.b * t_c + self.c * (4.0 * cold**3 - 300.0 * cold**2))

    def expression(self, temp: str, number: NumberFormat = fmt) -> str:
        t = paren(temp)
        # min(t, 0) makes the C term vanish above 0 degC; products, not ^, keep the sign.
        cold = f"min({t},0)"
        return (
            f"{paren(number(self.r0))}*(1+{paren(number(self.a))}*{t}+{paren(number(self.b))}*{t}*{t}"
            f"+{paren(number(self.c))}*({cold}-100)*{cold}*{cold}*{cold})"
        )

    @classmethod
    def warnings(cls, params: Mapping[str, ParamValue]) -> tuple[ParamWarning, ...]:
        a = written(params, "a")
        if a is not None and not 3.0e-3 < a < 4.5e-3:
            return (
                ParamWarning(
                    "a",
                    f"a = {fmt(a)} /K is far from platinum's 3.9083e-3 (IEC 60751)",
                    "a is in 1/K, not ppm/K; leave it out for the IEC 60751 value",
                ),
            )
        return ()
