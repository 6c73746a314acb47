"""The JSON Schema (draft 2020-12) of the annotation file, generated from the declarations
the validator uses: :mod:`heatweave.annotation.fields` and the models' ``ParamSpec`` rows."""

from __future__ import annotations

from typing import Any

from heatweave.annotation.fields import (
    AMBIENT_FIELDS,
    LIMIT_FIELDS,
    NODE_FIELDS,
    PART_FIELDS,
    PATH_FIELDS,
    REVIEW_FIELDS,
    TOP_FIELDS,
    Field,
    model_fields,
)
from heatweave.annotation.types import AMBIENT, SCHEMA_VERSION
from heatweave.tempmodels import REGISTRY

Schema = dict[str, Any]

#: The schema's identifier: a URN (RFC 8141), so it names this layout version without
#: pretending to be a place to download from; editors load the schema from a file.
SCHEMA_ID = f"urn:heatweave:annotation-schema:{SCHEMA_VERSION}"

# A SPICE number written as a string ("10k", "1k5"), read like quantities.parse_number; the
# mantissa's sign and digits carry the range, since a scale factor never changes the sign.
_EXPONENT_AND_SUFFIX = r"([eE][+-]?\d+)?([A-Za-z_]\w*)?\s*$"
_MANTISSA = {
    "number": r"[+-]?(\d+\.?\d*|\.\d+)",
    "nonnegative": r"(\+?(\d+\.?\d*|\.\d+)|-(0+\.?0*|\.0+))",  # minus only on zero
    "positive": r"\+?(\d*[1-9]\d*\.?\d*|\d*\.\d*[1-9]\d*)",  # a digit other than 0
}


def _numeric(kind: str) -> Schema:
    """A number of *kind* (number, positive, nonnegative), as TOML number or SPICE string."""
    number: Schema = {"type": "number"}
    if kind == "positive":
        number["exclusiveMinimum"] = 0
    elif kind == "nonnegative":
        number["minimum"] = 0
    pattern = rf"^\s*{_MANTISSA.get(kind, _MANTISSA['number'])}{_EXPONENT_AND_SUFFIX}"
    return {"anyOf": [number, {"type": "string", "pattern": pattern}]}


def _pairs(positive: bool) -> Schema:
    item = _numeric("positive" if positive else "number")
    return {
        "type": "array",
        "minItems": 1,
        "items": {"type": "array", "prefixItems": [item, item], "minItems": 2, "maxItems": 2},
    }


def _field(spec: Field) -> Schema:
    if spec.kind == "integer":
        out: Schema = {"type": "integer"}
    elif spec.kind in ("number", "positive", "nonnegative"):
        out = _numeric(spec.kind)
        if spec.tolerance:
            # The nominal value keeps the key's range (a tolerance of rth is still positive).
            within = {"$ref": "#/$defs/tolerance", "properties": {"nominal": _numeric(spec.kind)}}
            out = {"anyOf": [out, within]}
    elif spec.kind == "choice":
        out = {"enum": list(spec.choices)}
    elif spec.kind == "string":
        out = {"type": "string"}
    elif spec.kind == "pair":
        out = {"type": "array", "items": {"type": "string"}, "minItems": 2, "maxItems": 2}
    else:
        out = _pairs(spec.kind == "stages")
    unit = f" [{spec.unit}]" if spec.unit and not spec.unit.startswith("[") else ""
    out["description"] = f"{spec.meaning}{unit}"
    if spec.default is not None:
        out["default"] = spec.default
    return out


def _table(fields: tuple[Field, ...], closed: bool = True) -> Schema:
    out: Schema = {"type": "object", "properties": {f.key: _field(f) for f in fields}}
    required = [f.key for f in fields if f.required]
    if required:
        out["required"] = required
    if closed:
        out["additionalProperties"] = False
    return out


def _part() -> Schema:
    part = _table(PART_FIELDS, closed=False)
    branches = []
    for name, cls in sorted(REGISTRY.items()):
        fields = model_fields(cls.params)
        then = _table(fields, closed=False)
        then.pop("required", None)
        groups: dict[str, list[str]] = {}
        for spec in cls.params:
            if spec.required:
                groups.setdefault(spec.group_name, []).append(spec.key)
        needs = [{"oneOf": [{"required": [k]} for k in keys]} for keys in groups.values()]
        if needs:
            then["allOf"] = needs
        branches.append(
            {"if": {"properties": {"model": {"const": name}}, "required": ["model"]}, "then": then}
        )
    part["allOf"] = [
        *branches,
        {"oneOf": [{"required": [k]} for k in ("rth", "foster", "cauer")]},
    ]
    part["dependentRequired"] = {"cth": ["rth"]}
    part["unevaluatedProperties"] = False
    return part


def schema() -> Schema:
    """The JSON Schema of an annotation file as a plain dict (JSON-serialisable)."""
    top = _table(TOP_FIELDS)
    top["properties"]["schema"] = {"const": SCHEMA_VERSION, "description": "layout version"}
    ambient = _table(AMBIENT_FIELDS)
    ambient["not"] = {"required": ["temperature", "profile"]}
    named: Schema = {"type": "object"}
    top["properties"].update(
        {
            "ambient": ambient,
            "node": {
                **named,
                "propertyNames": {"not": {"const": AMBIENT}},  # the surroundings' own name
                "additionalProperties": {"$ref": "#/$defs/node"},
            },
            "part": {**named, "additionalProperties": {"$ref": "#/$defs/part"}},
            "path": {"type": "array", "items": _table(PATH_FIELDS)},
            "limit": {
                **named,
                "additionalProperties": {**_table(LIMIT_FIELDS), "minProperties": 1},
            },
            "review": _table(REVIEW_FIELDS),
        }
    )
    return {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "$id": SCHEMA_ID,
        "title": "heatweave annotation file",
        "description": "Temperature models and thermal paths for the parts of a SPICE deck.",
        **top,
        "$defs": {
            "node": _table(NODE_FIELDS),
            "part": _part(),
            "tolerance": {
                "type": "object",
                "description": "Monte Carlo tolerance: normal (sigma) or uniform (min..max)",
                "properties": {
                    "nominal": _numeric("number"),
                    "sigma": _numeric("nonnegative"),
                    "min": _numeric("number"),
                    "max": _numeric("number"),
                },
                "required": ["nominal"],
                "additionalProperties": False,
                "oneOf": [{"required": ["sigma"]}, {"required": ["min", "max"]}],
            },
        },
    }
