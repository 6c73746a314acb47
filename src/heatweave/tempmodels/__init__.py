"""Temperature models: one registered class per model, looked up by annotation name.

A new model is one module here (a frozen dataclass subclassing :class:`TempModel`, decorated
with :func:`register`) plus one test table.
"""

from __future__ import annotations

# Importing the model modules registers them.
from heatweave.tempmodels import (
    exponential,
    linear,
    ntc_beta,
    ntc_sh,
    ptc,
    quadratic,
    rtd,
    table,
)
from heatweave.tempmodels.base import (
    ParamSpec,
    ParamValue,
    ParamWarning,
    TempModel,
    ValidRange,
)
from heatweave.tempmodels.registry import REGISTRY, UnknownModelError, get, register

__all__ = [
    "REGISTRY",
    "ParamSpec",
    "ParamValue",
    "ParamWarning",
    "TempModel",
    "UnknownModelError",
    "ValidRange",
    "exponential",
    "get",
    "linear",
    "ntc_beta",
    "ntc_sh",
    "ptc",
    "quadratic",
    "register",
    "rtd",
    "table",
]
