"""The annotation file (``DECK.thermal.toml``): load, validate, bind to a deck, sample.

:func:`load` reads and validates the file on its own and returns an immutable
:class:`Annotation`; :func:`bind` resolves each ``[part."..."]`` key against a deck's elements
(any object satisfying :class:`DeckCatalog`).  Every error is an
:class:`~heatweave.errors.AnnotationError` with a file:line:column and a hint; likely unit
slips are :class:`~heatweave.errors.Finding` warnings in :attr:`Annotation.warnings`.

Part keys name deck elements case-insensitively, as SPICE does.  A key with ``*``, ``?`` or
``[`` is a glob (:mod:`fnmatch`) over the whole instance path: ``RDIV*`` matches ``RDIV1`` but
not ``X1.RDIV1`` (write ``*RDIV*`` or ``X1.*`` for that).  An exact key beats a glob; two
globs matching one element is an error naming both; a glob matching nothing is an error.
"""

from __future__ import annotations

from heatweave.annotation.binding import DeckCatalog, bind
from heatweave.annotation.fields import Distribution
from heatweave.annotation.loader import annotation_beside, default_path, load, loads
from heatweave.annotation.sampling import sample
from heatweave.annotation.schema import schema
from heatweave.annotation.types import (
    AMBIENT,
    SCHEMA_VERSION,
    Ambient,
    Annotation,
    BoundPart,
    LimitSpec,
    NetworkSpec,
    NodeSpec,
    PartSpec,
    PathSpec,
    ReviewSpec,
)

__all__ = [
    "AMBIENT",
    "SCHEMA_VERSION",
    "Ambient",
    "Annotation",
    "BoundPart",
    "DeckCatalog",
    "Distribution",
    "LimitSpec",
    "NetworkSpec",
    "NodeSpec",
    "PartSpec",
    "PathSpec",
    "ReviewSpec",
    "annotation_beside",
    "bind",
    "default_path",
    "load",
    "loads",
    "sample",
    "schema",
]
