"""Every temperature model keeps its documented contract, for every combination of its keys.

The contract (README, "Temperature models", and each model's docstring): the deck's value
holds at ``tref`` (the model's default reference when ``tref`` is not written), unless a key
that states the resistance itself is written; then that key's value holds at its own
temperature (``r25`` at 25 degC, ``r0`` at 0 degC, ``points`` at their temperatures), and the
deck's value is not used.  ``ntc-sh`` is defined by its coefficients alone.

Each row below is one combination of the keys a model accepts (every alias of a group, every
optional key written or not) with ``tref`` absent or written at several temperatures; the
check is R(T) evaluated by the model against the value that must hold there.
"""

from __future__ import annotations

import itertools
import math

import pytest

from heatweave.tempmodels import REGISTRY, get
from heatweave.tempmodels.base import ParamValue

DECK = 470.0  # ohm, the deck's value
TREFS: tuple[float | None, ...] = (None, -20.0, 0.0, 25.0, 60.0, 150.0)

# The keys each model can take, by group: the alternatives written for that group (None:
# the group left out, allowed only when the group is optional).
KEYS: dict[str, dict[str, tuple[dict[str, ParamValue] | None, ...]]] = {
    "linear": {"tc1": ({"tc1": 3.9e-3}, {"tc1_ppm": -850.0})},
    "quadratic": {
        "tc1": (None, {"tc1": 1e-3}, {"tc1_ppm": 50.0}),
        "tc2": ({"tc2": -6e-7}, {"tc2_ppm": 0.4}),
    },
    "exponential": {"tce": ({"tce": 0.5},)},
    "ntc-beta": {"r25": (None, {"r25": 10e3}), "beta": ({"beta": 3435.0},)},
    "ptc": {
        "r25": (None, {"r25": 47.0}),
        "t_switch": ({"t_switch": 120.0}, {"t_switch": 40.0}),
        "rise": ({"decade": 5.0}, {"alpha_pct": 30.0}),
        "r_max": (None, {"r_max": 4.7e3}, {"r_max": 2e5}),
    },
    "rtd": {
        "r0": (None, {"r0": 100.0}),
        "a": (None, {"a": 3.85e-3}),
        "b": (None, {"b": -5.8e-7}),
        "c": (None, {"c": -4.2e-12}),
    },
    "table": {
        "table": (
            {"points": ((-40.0, 300.0), (25.0, 470.0), (200.0, 900.0))},
            {"ratio": ((-40.0, 0.7), (25.0, 1.0), (90.0, 1.4), (200.0, 2.0))},
        )
    },
}

# Keys that state the resistance itself, and the temperature (degC) their value holds at;
# for ``points`` each point holds at its own temperature.
ABSOLUTE = {"r25": 25.0, "r0": 0.0}


def combinations() -> list[tuple[str, dict[str, ParamValue], float | None]]:
    rows: list[tuple[str, dict[str, ParamValue], float | None]] = []
    for model, groups in KEYS.items():
        for choice in itertools.product(*groups.values()):
            params: dict[str, ParamValue] = {}
            for written in choice:
                params.update(written or {})
            rows.extend((model, dict(params), tref) for tref in TREFS)
    return rows


def test_every_model_and_key_is_in_the_table() -> None:
    # A model or key added later must join the table, or the contract goes untested.
    assert set(KEYS) | {"ntc-sh"} == set(REGISTRY)
    for model, groups in KEYS.items():
        keys = {k for options in groups.values() for o in options if o for k in o}
        assert keys == {p.key for p in REGISTRY[model].params}, model


def _id(row: tuple[str, dict[str, ParamValue], float | None]) -> str:
    model, params, tref = row
    return f"{model}-{'+'.join(sorted(params))}-tref={tref}"


ROWS = combinations()


@pytest.mark.parametrize(("model", "params", "tref"), ROWS, ids=[_id(r) for r in ROWS])
def test_the_deck_value_holds_at_tref(
    model: str, params: dict[str, ParamValue], tref: float | None
) -> None:
    cls = get(model)
    built = cls.from_params(params, DECK, tref)
    points = params.get("points")
    if isinstance(points, tuple):  # R is written point by point: each one holds
        for t_c, ohm in points:
            assert built.resistance(t_c) == pytest.approx(ohm, rel=1e-12)
        return
    absolute = [k for k in ABSOLUTE if k in params]
    if absolute:
        key = absolute[0]
        value = params[key]
        assert isinstance(value, float)
        expected_at = ABSOLUTE[key]
        if model == "ptc":
            # r25 is the cold resistance: R(25) equals it up to the switching factor
            # F(25) = 10^((25 - t_switch) / decade), which the formula adds on purpose.
            f = _ptc_factor(params, 25.0)
            r_max = float(params.get("r_max", 1e4 * value))  # type: ignore[arg-type]
            expected = value * (1 + f) / (1 + f * value / r_max)
            assert built.resistance(expected_at) == pytest.approx(expected, rel=1e-12)
        else:
            assert built.resistance(expected_at) == pytest.approx(value, rel=1e-12)
        return
    at = cls.reference(tref)
    assert built.resistance(at) == pytest.approx(DECK, rel=1e-12)


def _ptc_factor(params: dict[str, ParamValue], t_c: float) -> float:
    """F = exp(k (T - t_switch)) of the ptc docstring, k from decade or alpha_pct."""
    t_switch = params["t_switch"]
    assert isinstance(t_switch, float)
    if "decade" in params:
        decade = params["decade"]
        assert isinstance(decade, float)
        k = math.log(10.0) / decade
    else:
        alpha = params["alpha_pct"]
        assert isinstance(alpha, float)
        k = math.log1p(alpha / 100.0)
    return math.exp(max(min(k * (t_c - t_switch), 200.0), -200.0))


def test_ptc_with_r_max_and_no_r25_keeps_the_deck_value() -> None:
    # Issue 12 section 4: r_max written, r25 not, the switch near tref: the deck's 47 ohm must
    # hold at 25 degC exactly (it was 3 % off when the solve took the default r_max ratio).
    params: dict[str, ParamValue] = {"t_switch": 40.0, "decade": 5.0, "r_max": 470.0}
    ptc = get("ptc").from_params(params, 47.0, None)
    assert ptc.resistance(25.0) == pytest.approx(47.0, rel=1e-12)
    assert ptc.resistance(1000.0) == pytest.approx(470.0, rel=1e-9)  # levels off at r_max


def test_ptc_deck_value_above_r_max_is_refused() -> None:
    params: dict[str, ParamValue] = {"t_switch": 40.0, "decade": 5.0, "r_max": 40.0}
    with pytest.raises(ValueError, match="below r_max"):
        get("ptc").from_params(params, 47.0, None)
