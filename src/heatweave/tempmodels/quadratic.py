"""``quadratic``: R = R0 (1 + tc1 dT + tc2 dT^2), as SPICE defines tc1/tc2.

The formula is ngspice's resistor temperature equation (manual 3.3.3, eq. 14); tc1 defaults
to 0, tc2 is required (without it, use ``linear``).
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import ClassVar

from heatweave.tempmodels.base import ParamSpec, ValidRange
from heatweave.tempmodels.linear import TC1, TC2, Polynomial
from heatweave.tempmodels.registry import register


@register
@dataclass(frozen=True, slots=True)
class Quadratic(Polynomial):
    """R = R0 (1 + tc1 dT + tc2 dT^2), dT = T - tref (ngspice manual 3.3.3, eq. 14)."""

    name: ClassVar[str] = "quadratic"
    summary: ClassVar[str] = "second-order TCR: R0 (1 + tc1 dT + tc2 dT^2)"
    valid_range: ClassVar[ValidRange | None] = None  # a coefficient fit: no published range
    params: ClassVar[tuple[ParamSpec, ...]] = TC1 + tuple(replace(s, required=True) for s in TC2)
