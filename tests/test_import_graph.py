"""The package's import graph: no circles, and a stage never imports a later one (issue 13).

Every ``import`` in every module counts, those inside functions too: a function-level import
still ties the two modules together, it only hides the tie from a reader.
"""

from __future__ import annotations

import ast
from collections.abc import Iterator
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "heatweave"

#: The stages in the order data flows; a module may import its own stage and earlier ones.
#: The top-level modules (errors, quantities, files ...) come first.
STAGES = (
    "",
    "spice",
    "tempmodels",
    "networks",
    "annotation",
    "thermal",
    "emit",
    "simulators",
    "run",
    "cosim",
    "settle",
    "checks",
    "reports",
    "sweep",
    "compare",
    "cli",
)
TOP_LEVEL_LIMIT = 8
MODULE_LINES_LIMIT = 500
#: ``python -m heatweave`` runs this top-level module: the command line's entry point, so it
#: belongs to the last stage (it imports ``cli`` and nothing imports it).
ENTRY_POINT = "heatweave.__main__"


def module_name(path: Path) -> str:
    parts = ["heatweave", *path.relative_to(PACKAGE).with_suffix("").parts]
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def resolve(name: str) -> str:
    """The module an imported dotted name lives in (a name may be an attribute of one)."""
    while name not in MODULES and "." in name:
        name = name.rsplit(".", 1)[0]
    return name


def imports_of(module: str) -> Iterator[str]:
    path = MODULES[module]
    package = module if path.name == "__init__.py" else module.rsplit(".", 1)[0]
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            names = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join([*anchor, *([base] if base else [])])
            names = [f"{base}.{alias.name}" for alias in node.names] or [base]
            names = [n if n in MODULES else base for n in names]
        else:
            continue
        for name in names:
            if name == "heatweave" or name.startswith("heatweave."):
                target = resolve(name)
                if target != module:
                    yield target


GRAPH = {module: sorted(set(imports_of(module))) for module in MODULES}


def stage(module: str) -> int:
    if module == ENTRY_POINT:
        return STAGES.index("cli")
    parts = module.split(".")
    name = parts[1] if len(parts) > 1 and (PACKAGE / parts[1]).is_dir() else ""
    return STAGES.index(name)


def test_every_stage_folder_is_listed() -> None:
    folders = {p.name for p in PACKAGE.iterdir() if (p / "__init__.py").exists()}
    assert folders <= set(STAGES), sorted(folders - set(STAGES))


def test_no_import_circle() -> None:
    """Tarjan's strongly connected components; any component of two or more is a circle."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    circles: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        for w in GRAPH[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                circles.append(sorted(component))

    for v in GRAPH:
        if v not in index:
            visit(v)
    assert circles == []


@pytest.mark.parametrize("module", sorted(MODULES))
def test_no_import_from_a_later_stage(module: str) -> None:
    later = [t for t in GRAPH[module] if stage(t) > stage(module)]
    assert later == [], f"{module} imports a later stage: {later}"


def test_top_level_is_small() -> None:
    top = [p.name for p in PACKAGE.glob("*.py") if p.name != "__init__.py"]
    assert len(top) <= TOP_LEVEL_LIMIT, sorted(top)


@pytest.mark.parametrize("module", sorted(MODULES))
def test_module_size(module: str) -> None:
    lines = MODULES[module].read_text(encoding="utf-8").count("\n")
    assert lines <= MODULE_LINES_LIMIT, f"{module}: {lines} lines"
