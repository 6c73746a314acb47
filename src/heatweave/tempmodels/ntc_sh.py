"""``ntc-sh``: NTC thermistor by the Steinhart-Hart equation, solved for R in closed form.

1/T = a + b ln R + c (ln R)^3, T in kelvin.  With x = ln R this is the depressed cubic
x^3 + p x + q = 0, p = b/c, q = (a - 1/T)/c; for b > 0, c > 0 it has one real root
(Cardano): with y = (a - 1/T)/(2c) and s = sqrt(p^3/27 + y^2),
x = cbrt(s - y) - cbrt(s + y) = u - p/(3u), u = cbrt(s - y), since (s - y)(s + y) = p^3/27.
The second form avoids cancellation where 1/T > a (every real thermistor temperature); s - y
is then positive, so ngspice's ``pow`` (which takes |base|) gives the right cube root.
With c = 0 the equation is linear in ln R.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import ClassVar, Self

import numpy as np

from heatweave.quantities import format_number as fmt
from heatweave.tempmodels.base import (
    KELVIN_OFFSET,
    FloatArray,
    NumberFormat,
    ParamSpec,
    ParamValue,
    ParamWarning,
    TempModel,
    ValidRange,
    paren,
    written,
)
from heatweave.tempmodels.registry import register


@register
@dataclass(frozen=True, slots=True)
class NtcSteinhartHart(TempModel):
    """Steinhart-Hart 1/T = a + b ln R + c (ln R)^3, R(T) by Cardano's formula."""

    name: ClassVar[str] = "ntc-sh"
    summary: ClassVar[str] = "NTC thermistor, Steinhart-Hart equation"
    valid_range: ClassVar[ValidRange | None] = None  # each fit its own; none universal
    params: ClassVar[tuple[ParamSpec, ...]] = (
        ParamSpec("a", "1/K", "Steinhart-Hart A", required=True, example="1.129148e-3"),
        ParamSpec(
            "b",
            "1/K",
            "Steinhart-Hart B (positive)",
            required=True,
            positive=True,
            example="2.34125e-4",
        ),
        ParamSpec(
            "c", "1/K", "Steinhart-Hart C (zero or positive)", required=True, example="8.76741e-8"
        ),
    )

    a: float
    b: float
    c: float
    tref: float = 25.0  # degC its nominal value is reported at (the deck's value is unused)

    @classmethod
    def from_params(
        cls, params: Mapping[str, ParamValue], r_nominal: float, tref: float | None = None
    ) -> Self:
        a, b, c = (written(params, k) for k in ("a", "b", "c"))
        assert a is not None and b is not None and c is not None
        if c < 0:
            raise ValueError("c must be zero or positive for a unique real R(T)")
        return cls(a, b, c, cls.reference(tref))

    @property
    def reference_temperature(self) -> float:
        return self.tref

    def ln_r(self, t_c: FloatArray) -> FloatArray:
        """ln R at *t_c* (degC), the real root of the Steinhart-Hart cubic."""
        inv_t = 1.0 / (t_c + KELVIN_OFFSET)
        if self.c == 0.0:
            return (inv_t - self.a) / self.b
        p3 = self.b / (3.0 * self.c)
        y = (self.a - inv_t) / (2.0 * self.c)
        u = np.cbrt(np.sqrt(p3**3 + y * y) - y)
        return u - p3 / u

    def _resistance(self, t_c: FloatArray) -> FloatArray:
        return np.exp(self.ln_r(t_c))

    def _slope(self, t_c: FloatArray) -> FloatArray:
        x = self.ln_r(t_c)
        kelvin = t_c + KELVIN_OFFSET
        # d(1/T)/dx = b + 3 c x^2 and d(1/T)/dT = -1/T^2, so dR/dT = -R / (T^2 (b + 3 c x^2)).
        return -np.exp(x) / (kelvin * kelvin * (self.b + 3.0 * self.c * x * x))

    def expression(self, temp: str, number: NumberFormat = fmt) -> str:
        inv_t = f"(1/({paren(temp)}+{number(KELVIN_OFFSET)}))"
        if self.c == 0.0:
            return f"exp(({inv_t}-{paren(number(self.a))})*{paren(number(1.0 / self.b))})"
        p3 = self.b / (3.0 * self.c)
        y = f"(({paren(number(self.a))}-{inv_t})*{paren(number(0.5 / self.c))})"
        u = f"pow(sqrt({paren(number(p3**3))}+{y}*{y})-{y},{number(1.0 / 3.0)})"
        return f"exp({u}-{paren(number(p3))}/{u})"

    @classmethod
    def warnings(cls, params: Mapping[str, ParamValue]) -> tuple[ParamWarning, ...]:
        a = written(params, "a")
        # Common practice: fitted A lies near 1e-3 /K for thermistors.
        if a is not None and not 1e-4 < abs(a) < 1e-2:
            return (
                ParamWarning(
                    "a",
                    f"a = {fmt(a)} is far from the usual 1e-3 /K of Steinhart-Hart fits",
                    "check that a, b, c belong to ln R in ohms and T in kelvin",
                ),
            )
        return ()
