"""Thermal network forms (single stage, Foster, Cauer), their conversions and the Zth fit.

Every form has one interface (:class:`~heatweave.networks.base.NetworkForm`) and registers
itself under the annotation key it is written with; :func:`from_annotation` builds one.
"""

from __future__ import annotations

from heatweave.networks.base import (
    FORMS,
    Element,
    NetworkError,
    NetworkForm,
    Realisation,
    StateSpace,
)
from heatweave.networks.cauer import Cauer
from heatweave.networks.convert import to_cauer, to_foster
from heatweave.networks.foster import Foster
from heatweave.networks.single import Single


def from_annotation(kind: str, data: object) -> NetworkForm:
    """The network of form *kind* (``"single"``, ``"foster"``, ``"cauer"``) from its tuples."""
    form = FORMS.get(kind)
    if form is None:
        raise NetworkError(
            f"unknown thermal network form {kind!r}",
            hint="use one of " + ", ".join(sorted(FORMS)),
        )
    return form.from_annotation(data)


__all__ = [
    "FORMS",
    "Cauer",
    "Element",
    "Foster",
    "NetworkError",
    "NetworkForm",
    "Realisation",
    "Single",
    "StateSpace",
    "from_annotation",
    "to_cauer",
    "to_foster",
]
