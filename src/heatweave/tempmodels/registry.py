"""The registry of temperature models: ``@register`` adds a class, ``get`` finds one by name."""

from __future__ import annotations

import difflib
from typing import TypeVar

from heatweave.tempmodels.base import TempModel

REGISTRY: dict[str, type[TempModel]] = {}

_M = TypeVar("_M", bound=type[TempModel])


def register(cls: _M) -> _M:
    """Class decorator adding a model to :data:`REGISTRY` under its ``name``."""
    if cls.name in REGISTRY:
        raise ValueError(f"temperature model {cls.name!r} registered twice")
    if not any("valid_range" in vars(k) for k in cls.__mro__ if k is not TempModel):
        raise ValueError(f"temperature model {cls.name!r} declares no valid_range")
    REGISTRY[cls.name] = cls
    return cls


class UnknownModelError(KeyError):
    """``get`` found no model; carries the closest known names for a hint."""

    def __init__(self, name: str, suggestions: tuple[str, ...]) -> None:
        super().__init__(name)
        self.name = name
        self.suggestions = suggestions

    def hint(self) -> str:
        known = ", ".join(sorted(REGISTRY))
        if self.suggestions:
            return f'did you mean "{self.suggestions[0]}"? known models: {known}'
        return f"known models: {known}"


def get(name: str) -> type[TempModel]:
    """The model class registered as *name*; :class:`UnknownModelError` (a KeyError) if none."""
    try:
        return REGISTRY[name]
    except KeyError:
        close = tuple(difflib.get_close_matches(name, list(REGISTRY), n=3, cutoff=0.5))
        raise UnknownModelError(name, close) from None
