"""Where each temperature model's formula is defined (``TempModel.valid_range``).

Only a model whose equation is defined by a standard over a stated span has a range; the
others are coefficient fits or data-sheet equations whose span belongs to the part, not
to the formula, and declare none.
"""

from __future__ import annotations

import pytest

from heatweave import tempmodels
from heatweave.tempmodels import ValidRange

RANGES: list[tuple[str, tuple[float, float] | None]] = [
    # IEC 60751 (industrial platinum resistance thermometers): Callendar-Van Dusen is
    # defined from -200 degC to 850 degC.
    ("rtd", (-200.0, 850.0)),
    # Beta and Steinhart-Hart: each thermistor data sheet states its own span; no standard
    # fixes one for the equations (common practice: the range comes with the fit).
    ("ntc-beta", None),
    ("ntc-sh", None),
    # TCR polynomials and ngspice's tce: coefficients of a fit, no range of their own
    # (common practice; the resistor's data sheet gives its operating range).
    ("linear", None),
    ("quadratic", None),
    ("exponential", None),
    # The PTC shape saturates at r_max and the table is flat outside its points: both are
    # defined at every temperature by construction (heatweave's own definitions).
    ("ptc", None),
    ("table", None),
]


@pytest.mark.parametrize(("name", "expected"), RANGES)
def test_declared_range(name: str, expected: tuple[float, float] | None) -> None:
    found = tempmodels.get(name).valid_range
    assert (None if found is None else (found.low, found.high)) == expected


def test_every_registered_model_is_in_the_table() -> None:
    assert sorted(tempmodels.REGISTRY) == sorted(name for name, _ in RANGES)


def test_rtd_range_names_its_standard() -> None:
    found = tempmodels.get("rtd").valid_range
    assert found is not None and found.source == "IEC 60751"
    assert found.describe() == "-200 to 850 degC (IEC 60751)"


@pytest.mark.parametrize(
    ("t_c", "inside"), [(-200.0, True), (850.0, True), (850.5, False), (-200.5, False)]
)
def test_range_bounds_are_inclusive(t_c: float, inside: bool) -> None:
    # IEC 60751 states the span as -200 degC to 850 degC, both ends included.
    assert (t_c in ValidRange(-200.0, 850.0, "IEC 60751")) is inside


def test_a_model_without_a_declared_range_is_refused() -> None:
    class Undeclared(tempmodels.get("linear")):  # type: ignore[misc]
        name = "undeclared-range"

    # The subclass inherits the declaration of linear, so it registers; one that
    # subclasses the interface directly without declaring is refused.
    assert tempmodels.register(Undeclared) is Undeclared
    del tempmodels.REGISTRY["undeclared-range"]

    class Bare(tempmodels.TempModel):
        name = "bare-range"

    with pytest.raises(ValueError, match="valid_range"):
        tempmodels.register(Bare)  # type: ignore[type-abstract]
