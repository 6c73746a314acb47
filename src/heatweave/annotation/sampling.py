"""Monte Carlo sampling of an annotation's tolerances."""

from __future__ import annotations

from dataclasses import replace

import numpy as np

from heatweave.annotation.fields import (
    NODE_FIELDS,
    PART_FIELDS,
    PATH_FIELDS,
    Distribution,
    Field,
    fits,
    model_fields,
)
from heatweave.annotation.types import Annotation, NetworkSpec, PartSpec, Tolerances
from heatweave.tempmodels import REGISTRY

_MAX_DRAWS = 1000


def _draw(dist: Distribution, spec: Field, rng: np.random.Generator) -> float:
    """A draw inside the key's valid range (redrawn, i.e. a truncated distribution)."""
    for _ in range(_MAX_DRAWS):
        value = dist.draw(rng)
        if fits(spec.kind, value):
            return value
    return dist.nominal


def _drawn(
    tolerances: Tolerances, fields: tuple[Field, ...], rng: np.random.Generator
) -> dict[str, float]:
    by_key = {f.key: f for f in fields}
    return {key: _draw(dist, by_key[key], rng) for key, dist in tolerances}


def _sample_part(part: PartSpec, rng: np.random.Generator) -> PartSpec:
    if not part.tolerances:
        return part
    extra = model_fields(REGISTRY[part.model].params) if part.model else ()
    values = _drawn(part.tolerances, PART_FIELDS + extra, rng)
    params = tuple((k, values.get(k, v)) for k, v in part.params)
    network = part.network
    if network.kind == "single":
        rth, cth = network.stages[0]
        network = NetworkSpec("single", ((values.get("rth", rth), values.get("cth", cth)),))
    return replace(part, params=params, network=network)


def sample(annotation: Annotation, rng: np.random.Generator) -> Annotation:
    """A new annotation with each toleranced key drawn from its distribution.

    Normal draws outside a key's valid range (a negative rth) are drawn again, so the
    distribution is truncated there.  Keys without a tolerance keep their values.
    """
    nodes = []
    for node in annotation.nodes:
        drawn = _drawn(node.tolerances, NODE_FIELDS, rng)
        nodes.append(replace(node, rth=drawn.get("rth", node.rth), cth=drawn.get("cth", node.cth)))
    paths = []
    for coupling in annotation.paths:
        drawn = _drawn(coupling.tolerances, PATH_FIELDS, rng)
        paths.append(replace(coupling, rth=drawn.get("rth", coupling.rth)))
    parts = tuple(_sample_part(p, rng) for p in annotation.parts)
    return replace(annotation, nodes=tuple(nodes), parts=parts, paths=tuple(paths))
