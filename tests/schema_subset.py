"""A validator of the JSON Schema keywords heatweave's schema uses, for the tests.

The ``jsonschema`` package is not installed, so this follows the draft 2020-12 text
(json-schema.org, "JSON Schema Validation" and "Core", sections on applicators and
``unevaluatedProperties``) for exactly the keywords the schema holds; any other keyword
is an error, so the schema cannot grow past what is checked here.
"""

from __future__ import annotations

import re
from typing import Any

KEYWORDS = frozenset({
    "$schema", "title", "description", "$defs", "$ref", "type", "properties", "required",
    "additionalProperties", "unevaluatedProperties", "propertyNames", "minProperties",
    "dependentRequired", "anyOf", "oneOf", "allOf", "not", "if", "then", "pattern", "enum",
    "const", "exclusiveMinimum", "minimum", "items", "prefixItems", "minItems", "maxItems",
})  # fmt: skip


def _number(value: object) -> bool:
    return isinstance(value, int | float) and not isinstance(value, bool)


def _type(value: object, name: str) -> bool:
    if name == "integer":
        return _number(value) and float(value).is_integer()  # type: ignore[arg-type]
    kinds = {"object": dict, "array": list, "string": str}
    return _number(value) if name == "number" else isinstance(value, kinds[name])


def _equal(a: object, b: object) -> bool:
    return a == b if _number(a) and _number(b) else type(a) is type(b) and a == b


class Validator:
    """``valid(instance)``; evaluated property names are tracked for unevaluatedProperties."""

    def __init__(self, root: dict[str, Any]) -> None:
        self.root = root

    def valid(self, instance: object) -> bool:
        return self._check(self.root, instance)[0]

    def _check(self, schema: dict[str, Any] | bool, x: object) -> tuple[bool, set[str]]:
        if isinstance(schema, bool):
            return schema, set()
        unknown = set(schema) - KEYWORDS
        if unknown:
            raise ValueError(f"keywords this validator does not know: {sorted(unknown)}")
        seen: set[str] = set()
        ok = True

        def sub(branch: dict[str, Any]) -> bool:
            good, names = self._check(branch, x)
            if good:
                seen.update(names)
            return good

        if "$ref" in schema:
            node: Any = self.root
            for part in schema["$ref"].removeprefix("#/").split("/"):
                node = node[part]
            ok &= sub(node)
        if "type" in schema and not _type(x, schema["type"]):
            return False, seen
        ok &= all(sub(branch) for branch in schema.get("allOf", []))
        if "anyOf" in schema:
            ok &= sum(sub(branch) for branch in schema["anyOf"]) >= 1
        if "oneOf" in schema:
            ok &= sum(sub(branch) for branch in schema["oneOf"]) == 1
        if "not" in schema:
            ok &= not self._check(schema["not"], x)[0]
        if "if" in schema and sub(schema["if"]):
            ok &= sub(schema.get("then", {}))
        if "enum" in schema:
            ok &= any(_equal(x, option) for option in schema["enum"])
        if "const" in schema:
            ok &= _equal(x, schema["const"])
        if _number(x):
            ok &= x > schema.get("exclusiveMinimum", float("-inf"))
            ok &= x >= schema.get("minimum", float("-inf"))
        if isinstance(x, str) and "pattern" in schema:
            ok &= re.search(schema["pattern"], x) is not None
        if isinstance(x, list):
            ok &= self._array(schema, x)
        if isinstance(x, dict):
            good, names = self._object(schema, x, seen)
            ok &= good
            seen |= names
        return bool(ok), seen

    def _array(self, schema: dict[str, Any], x: list[object]) -> bool:
        prefix = schema.get("prefixItems", [])
        ok: bool = schema.get("minItems", 0) <= len(x) <= schema.get("maxItems", len(x))
        for index, item in enumerate(x):
            branch = prefix[index] if index < len(prefix) else schema.get("items")
            if branch is not None:
                ok &= self._check(branch, item)[0]
        return ok

    def _object(
        self, schema: dict[str, Any], x: dict[str, object], seen: set[str]
    ) -> tuple[bool, set[str]]:
        props = schema.get("properties", {})
        names: set[str] = set()
        ok = len(x) >= schema.get("minProperties", 0)
        ok &= all(key in x for key in schema.get("required", []))
        for key, needs in schema.get("dependentRequired", {}).items():
            ok &= key not in x or all(need in x for need in needs)
        for key, value in x.items():
            if "propertyNames" in schema:
                ok &= self._check(schema["propertyNames"], key)[0]
            branch = props.get(key, schema.get("additionalProperties"))
            if branch is not None:
                ok &= self._check(branch, value)[0]
                names.add(key)
        if "unevaluatedProperties" in schema:
            rest = schema["unevaluatedProperties"]
            for key, value in x.items():
                if key not in names | seen:
                    ok &= self._check(rest, value)[0]
        return ok, names
