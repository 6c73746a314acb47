"""Reading one TOML table against its declared fields, with positions for every error."""

from __future__ import annotations

import re
from collections.abc import Mapping
from dataclasses import dataclass, field

from heatweave.annotation.fields import (
    Distribution,
    Field,
    check_number,
    check_pairs,
    check_string,
    check_tolerance,
    closest,
    shown,
)
from heatweave.errors import AnnotationError, Finding, Location
from heatweave.tomlspots import KeyPath, Locator

_BARE = re.compile(r"[A-Za-z0-9_-]+\Z")


def header(path: KeyPath) -> str:
    """A table path as its TOML header, e.g. ``[part."X2.R4"]`` or ``[[path]]`` (1-based)."""
    if path and isinstance(path[-1], int):
        return f"[[{'.'.join(str(p) for p in path[:-1])}]] number {path[-1] + 1}"
    names = [p if _BARE.match(str(p)) else f'"{p}"' for p in map(str, path)]
    return f"[{'.'.join(names)}]" if names else "the top level"


@dataclass(slots=True)
class TableResult:
    """A table's values converted by kind, and the tolerances written for some of them."""

    values: dict[str, object] = field(default_factory=dict)
    tolerances: dict[str, Distribution] = field(default_factory=dict)

    def number(self, key: str) -> float | None:
        value = self.values.get(key)
        return float(value) if isinstance(value, int | float) else None


@dataclass(slots=True)
class TableReader:
    """Checks tables against fields; collects warnings; builds located errors."""

    locator: Locator
    warnings: list[Finding] = field(default_factory=list)

    def key_location(self, path: KeyPath) -> Location:
        return self.locator.key(path)

    def value_location(self, path: KeyPath) -> Location:
        return self.locator.value(path)

    def table_location(self, path: KeyPath) -> Location:
        return self.locator.table(path)

    def warn(self, path: KeyPath, message: str, hint: str | None) -> None:
        self.warnings.append(Finding("warning", message, self.locator.key(path), hint))

    def read(
        self,
        table: Mapping[str, object],
        fields: tuple[Field, ...],
        path: KeyPath,
        extra: tuple[str, ...] = (),
        foreign: Mapping[str, str] | None = None,
    ) -> TableResult:
        """Check *table* at *path*; *extra* keys are left to the caller, *foreign* keys (which
        belong elsewhere) get the hint given for them."""
        by_key = {f.key: f for f in fields}
        for key in table:
            if key in by_key or key in extra:
                continue
            known = [*by_key, *extra]
            if foreign and key in foreign:
                hint = foreign[key]
            else:
                near = closest(key, known)
                hint = f'did you mean "{near}"?' if near else f"known keys: {', '.join(known)}"
            raise AnnotationError(
                f'unknown key "{key}" in {header(path)}', self.key_location((*path, key)), hint
            )
        result = TableResult()
        for spec in fields:
            if spec.key not in table:
                if spec.required:
                    raise AnnotationError(
                        f"{header(path)} needs {spec.key}"
                        + (f" ({spec.unit})" if spec.unit else ""),
                        self.table_location(path),
                        f"add {spec.key} = {spec.example}",
                    )
                continue
            value = table[spec.key]
            at = (*path, spec.key)
            result.values[spec.key] = self.value(spec, value, at, result)
        return result

    def value(self, spec: Field, value: object, at: KeyPath, result: TableResult) -> object:
        """One value converted by its field's kind."""

        def where() -> Location:
            return self.value_location(at)

        if spec.tolerance and isinstance(value, dict):
            dist = check_tolerance(spec, value, where)
            result.tolerances[spec.key] = dist
            return dist.nominal
        if spec.kind in ("integer", "number", "positive", "nonnegative"):
            return check_number(spec, value, where)
        if spec.kind in ("string", "choice"):
            return check_string(spec, value, where)
        if spec.kind in ("points", "stages"):
            return check_pairs(spec, value, where)
        # "pair": two distinct strings
        if (
            not isinstance(value, list)
            or len(value) != 2
            or not all(isinstance(v, str) for v in value)
        ):
            raise AnnotationError(
                f"{spec.key} must be two node names, not {shown(value)}",
                where(),
                f"for example {spec.key} = {spec.example}",
            )
        return (str(value[0]), str(value[1]))

    def tables(self, raw: Mapping[str, object], name: str) -> dict[str, dict[str, object]]:
        """``[name.X]`` sub-tables of the top level (empty if none)."""
        group = raw.get(name, {})
        if not isinstance(group, dict):
            raise AnnotationError(
                f"{name} must be a table of [{name}.NAME] tables, not {shown(group)}",
                self.key_location((name,)),
                f'write [{name}."NAME"] headers',
            )
        for key, value in group.items():
            if not isinstance(value, dict):
                raise AnnotationError(
                    f"{header((name, key))} must be a table, not {shown(value)}",
                    self.key_location((name, key)),
                    f'write a [{name}."{key}"] header with its keys below it',
                )
        return group

    def array(self, raw: Mapping[str, object], name: str) -> list[dict[str, object]]:
        """``[[name]]`` tables of the top level (empty if none)."""
        items = raw.get(name, [])
        if not isinstance(items, list) or not all(isinstance(i, dict) for i in items):
            raise AnnotationError(
                f"{name} must be an array of [[{name}]] tables, not {shown(items)}",
                self.key_location((name,)),
                f"write each one under a [[{name}]] header",
            )
        return items
