"""The README's key tables ("`run --json` keys") and the keys ``run``, ``settle`` and
``sweep`` really write agree both ways: no key a user sees is missing from the tables, and
no key in the tables is one no command writes (issue 12 section 3: one meaning for every
result, documented).

The README's notation (its own words): a dotted path names a key inside an object, ``NAME``
an entry named by the deck or the annotation, ``[]`` each item of a list, ``{a,b}`` several
keys side by side.  Each table is found by the sentence that introduces it.
"""

from __future__ import annotations

import itertools
import json
import re
from pathlib import Path
from typing import Any

import pytest
from click.testing import CliRunner

from heatweave.cli import main

README = Path(__file__).resolve().parent.parent / "README.md"

#: The sentence before each table, and the command whose keys it lists.
TABLES = {
    "run": "Top level of `run --json`",
    "part": "Part keys, the same in `run`, `settle` and every `sweep` corner",
    "settle": "Top level of `settle --json`",
    "sweep": "Top level of `sweep --json`",
}
#: Objects whose keys are names from the deck or the annotation (``NAME`` in the tables).
NAMED = {"parts", "nodes", "voltages", "currents", "probes", "node_extremes", "params"}
#: Objects documented whole: ``drawn`` is keyed by part pattern, then by annotation key.
WHOLE = {"drawn"}

DECK = """a square wave into a load through a sense resistor on a board node
.param rl=40
V1 a 0 PULSE(0 8 0 1u 1u 0.5m 1m)
R1 a b {rl}
R2 b 0 10
.tran 5u 5m
.end
"""
ANNOTATION = """schema = 1
[ambient]
temperature = 25.0
[node.board]
rth = 20.0
cth = 0.01
to = "ambient"
[part.R1]
model = "linear"
tc1 = 0.0
rth = 60.0
cth = 0.001
power_rating = 1.0
tmax = 155.0
[part.R2]
model = "linear"
tc1 = 0.001
rth = {nominal = 80.0, sigma = 4.0}
cth = 0.0005
to = "board"
power_rating = 0.5
tmax = 125.0
"""


def expand(text: str) -> list[str]:
    """``a.{b,c}.d`` -> ``a.b.d``, ``a.c.d`` (every brace group, shell fashion)."""
    parts = re.split(r"\{([^{}]*)\}", text)
    choices = [[p] if k % 2 == 0 else p.split(",") for k, p in enumerate(parts)]
    return ["".join(combo) for combo in itertools.product(*choices)]


def readme_keys(name: str) -> set[str]:
    """Every key the README's table *name* lists (first column, each backticked path)."""
    lines = README.read_text(encoding="utf-8").splitlines()
    start = next(k for k, line in enumerate(lines) if line.startswith(TABLES[name]))
    first = next(k for k in range(start, len(lines)) if lines[k].startswith("|"))
    table = list(itertools.takewhile(lambda line: line.startswith("|"), lines[first:]))
    assert table[:2] == ["| key | meaning |", "| --- | --- |"], table[:2]
    keys: set[str] = set()
    for row in table[2:]:
        first = row.split("|")[1]
        for path in re.findall(r"`([^`]+)`", first):
            keys.update(expand(path))
    return keys


def flat(value: Any, path: str = "") -> set[str]:
    """The paths of *value*'s leaves in the README's notation."""
    if isinstance(value, list) and value and all(isinstance(v, dict) for v in value):
        return set().union(*(flat(item, f"{path}[]") for item in value))
    if not isinstance(value, dict) or path.rsplit(".", 1)[-1] in WHOLE:
        return {path}
    last = path.rsplit(".", 1)[-1].removesuffix("[]")
    if last in NAMED:
        if not value:
            return {f"{path}.NAME"}
        return set().union(*(flat(item, f"{path}.NAME") for item in value.values()))
    return set().union(
        *(flat(item, f"{path}.{key}" if path else key) for key, item in value.items())
    )


def documented(paths: set[str], keys: set[str]) -> set[str]:
    """*paths* the README does not list: a ``null`` object or list stands for the keys it
    holds elsewhere (``limits`` without ``--check``)."""
    return {
        p
        for p in paths
        if p not in keys and not any(k.startswith((f"{p}.", f"{p}[]")) for k in keys)
    }


@pytest.fixture(scope="module")
def written(tmp_path_factory: pytest.TempPathFactory) -> dict[str, list[dict[str, Any]]]:
    folder = tmp_path_factory.mktemp("readmekeys")
    deck = folder / "square.cir"
    deck.write_text(DECK)
    (folder / "square.thermal.toml").write_text(ANNOTATION)
    probes = ["--probe", "I(v1)", "--probe", "b"]
    commands = {
        "run": [["run", str(deck), *probes]],
        "settle": [["settle", str(deck), "--check", "--warmup", "50m"]],
        "sweep": [
            ["sweep", str(deck), "--ambient", "25:45:20", "--param", "rl=40:50:10", "--check",
             "--tran", "5u", "5m", *probes],
            ["sweep", str(deck), "--monte-carlo", "2", "--seed", "1", *probes],
        ],
    }  # fmt: skip
    out: dict[str, list[dict[str, Any]]] = {}
    for name, runs in commands.items():
        out[name] = []
        for args in runs:
            done = CliRunner().invoke(main, [*args, "--json", "-", "-q"])
            assert done.exit_code == 0, done.output
            out[name].append(json.loads(done.stdout))
    return out


def part_keys(data: dict[str, Any], prefix: str = "parts.NAME.") -> set[str]:
    return {p.removeprefix(prefix) for p in flat(data) if p.startswith(prefix)}


@pytest.mark.ngspice
@pytest.mark.parametrize("command", ["run", "settle", "sweep"])
def test_readme_lists_every_key_written(
    written: dict[str, list[dict[str, Any]]], command: str
) -> None:
    top = readme_keys(command)
    part = readme_keys("part")
    run_only = {k for k in part if k not in ("valley_temperature", "ripple")}
    if command == "sweep":  # each corner's parts as run writes them
        top |= {f"corners[].parts.NAME.{k}" for k in run_only}
    else:
        top |= {f"parts.NAME.{k}" for k in (part if command == "settle" else run_only)}
    seen: set[str] = set()
    for data in written[command]:
        paths = flat(data)
        assert not documented(paths, top), f"{command} writes keys the README lacks"
        seen |= paths
    # Every key the README lists is written (a table row of a key no command writes is stale).
    container = {p for p in top if p.endswith("parts.NAME")}
    assert top - container - seen == set(), f"README lists keys {command} never writes"


@pytest.mark.ngspice
def test_settle_parts_carry_every_part_key(written: dict[str, list[dict[str, Any]]]) -> None:
    part = readme_keys("part")
    assert part_keys(written["settle"][0]) == part
    assert part_keys(written["run"][0]) == part - {"valley_temperature", "ripple"}
    for data in written["sweep"]:
        assert part_keys(data, "corners[].parts.NAME.") == part - {"valley_temperature", "ripple"}


def test_brace_expansion() -> None:
    assert expand("a.{b,c}.{d,e}") == ["a.b.d", "a.b.e", "a.c.d", "a.c.e"]
    assert expand("plain") == ["plain"]
