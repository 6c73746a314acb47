"""``ntc-beta``: NTC thermistor by the Beta equation.

R(T) = R_ref exp(B (1/T - 1/T_ref)), T in kelvin (degC + 273.15).  With ``r25`` written,
R_ref = r25 at T_ref = 25 degC; otherwise R_ref is the deck's value at ``tref`` (default 25).
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
class NtcBeta(TempModel):
    """R = R_ref exp(beta (1/T - 1/T_ref)), kelvin (the thermistor Beta equation)."""

    name: ClassVar[str] = "ntc-beta"
    summary: ClassVar[str] = "NTC thermistor, Beta equation"
    valid_range: ClassVar[ValidRange | None] = None  # each data sheet its own; none universal
    params: ClassVar[tuple[ParamSpec, ...]] = (
        ParamSpec(
            "r25",
            "ohm",
            "resistance at 25 degC (default: the deck's value at tref)",
            positive=True,
            example="10e3",
        ),
        ParamSpec("beta", "K", "Beta constant", required=True, positive=True, example="3435"),
    )

    r_ref: float
    t_ref: float  # degC
    beta: float

    @classmethod
    def from_params(
        cls, params: Mapping[str, ParamValue], r_nominal: float, tref: float | None = None
    ) -> Self:
        beta = written(params, "beta")
        assert beta is not None
        r25 = written(params, "r25")
        if r25 is not None:
            return cls(r25, 25.0, beta)
        return cls(r_nominal, cls.reference(tref), beta)

    @property
    def reference_temperature(self) -> float:
        return self.t_ref

    def _resistance(self, t_c: FloatArray) -> FloatArray:
        inv = 1.0 / (t_c + KELVIN_OFFSET) - 1.0 / (self.t_ref + KELVIN_OFFSET)
        return self.r_ref * np.exp(self.beta * inv)

    def _slope(self, t_c: FloatArray) -> FloatArray:
        kelvin = t_c + KELVIN_OFFSET
        return -self.beta / (kelvin * kelvin) * self._resistance(t_c)

    def expression(self, temp: str, number: NumberFormat = fmt) -> str:
        inv_ref = 1.0 / (self.t_ref + KELVIN_OFFSET)
        return (
            f"{paren(number(self.r_ref))}*exp({paren(number(self.beta))}*"
            f"(1/({paren(temp)}+{number(KELVIN_OFFSET)})-{paren(number(inv_ref))}))"
        )

    @classmethod
    def warnings(cls, params: Mapping[str, ParamValue]) -> tuple[ParamWarning, ...]:
        beta = written(params, "beta")
        # Common practice: NTC Beta constants lie between about 2000 K and 6000 K.
        if beta is not None and not 1000 <= beta <= 10000:
            return (
                ParamWarning(
                    "beta",
                    f"beta = {fmt(beta)} K is outside the usual 1000..10000 K of NTC thermistors",
                    "beta is in kelvin, e.g. beta = 3435",
                ),
            )
        return ()
