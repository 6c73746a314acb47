"""Every part's temperature model evaluated at once, as arrays.

The co-simulation evaluates hundreds of models at every window; one Python call per part
dominates otherwise.  Models of one class with only numeric fields are evaluated together:
the class's own formula runs once on arrays of their fields (the formulas are numpy
expressions of the fields, so they broadcast).  Each group is checked against the
one-by-one evaluation when the bank is built and falls back to it if they differ.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import fields, is_dataclass
from types import SimpleNamespace

import numpy as np
import numpy.typing as npt

from heatweave.tempmodels.base import TempModel

FloatArray = npt.NDArray[np.float64]
_CHECK_TEMPERATURES = (-40.0, 25.0, 85.0, 150.0)
_FORMULAS = ("_resistance", "_slope")
_PUBLIC = ("resistance", "slope")


class ModelBank:
    """``resistance(T)`` and ``slope(T)`` of many models, one temperature per model."""

    def __init__(self, models: Sequence[TempModel]) -> None:
        self.models = list(models)
        self.size = len(self.models)
        groups: dict[tuple[type[TempModel], tuple[str, ...]], list[int]] = {}
        for k, model in enumerate(self.models):
            groups.setdefault((type(model), _numeric_fields(model)), []).append(k)
        self.groups: list[tuple[npt.NDArray[np.intp], SimpleNamespace | None, type[TempModel]]] = []
        for (cls, names), members in groups.items():
            index = np.array(members, dtype=np.intp)
            proxy = None
            if names and len(members) > 1:
                proxy = SimpleNamespace(
                    **{n: np.array([getattr(self.models[k], n) for k in members]) for n in names}
                )
                if not self._agrees(cls, proxy, index):
                    proxy = None
            self.groups.append((index, proxy, cls))

    def _agrees(
        self, cls: type[TempModel], proxy: SimpleNamespace, index: npt.NDArray[np.intp]
    ) -> bool:
        for t in _CHECK_TEMPERATURES:
            temps = np.full(index.shape[0], t)
            try:
                together = tuple(_formula(cls, f)(proxy, temps) for f in _FORMULAS)
            except (TypeError, ValueError, AttributeError, IndexError):
                return False
            for got, method in zip(together, _PUBLIC, strict=True):
                one = np.array([getattr(self.models[k], method)(t) for k in index])
                if np.shape(got) != one.shape or not np.allclose(got, one, rtol=1e-12, atol=0):
                    return False
        return True

    def resistance(self, temps: FloatArray) -> FloatArray:
        """R (ohm) of each model at its temperature in *temps* (degC)."""
        return self._evaluate(temps, "_resistance", lambda m, t: float(m.resistance(t)))

    def slope(self, temps: FloatArray) -> FloatArray:
        """dR/dT (ohm/K) of each model at its temperature in *temps* (degC)."""
        return self._evaluate(temps, "_slope", lambda m, t: float(m.slope(t)))

    def _evaluate(
        self, temps: FloatArray, formula: str, one: Callable[[TempModel, float], float]
    ) -> FloatArray:
        out = np.empty(self.size)
        for index, proxy, cls in self.groups:
            if proxy is not None:
                out[index] = _formula(cls, formula)(proxy, temps[index])
            else:
                for k in index:
                    out[k] = one(self.models[k], float(temps[k]))
        return out


def _numeric_fields(model: TempModel) -> tuple[str, ...]:
    """The model's field names when every field is a plain number, else ``()``."""
    if not is_dataclass(model):
        return ()
    names = tuple(f.name for f in fields(model))
    if all(isinstance(getattr(model, n), int | float) for n in names):
        return names
    return ()


def _formula(cls: type[TempModel], name: str) -> Callable[[object, FloatArray], FloatArray]:
    """A model class's formula (``_resistance`` or ``_slope``), to call on a field proxy."""
    found: Callable[[object, FloatArray], FloatArray] = getattr(cls, name)
    return found
