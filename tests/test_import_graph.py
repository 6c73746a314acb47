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


REASON = "# numpy and scipy load here, when the command runs, not for --help"


def _import_runs(body: list[ast.stmt]) -> Iterator[list[ast.Import | ast.ImportFrom]]:
    """Runs of consecutive import statements in one block of statements."""
    run: list[ast.Import | ast.ImportFrom] = []
    for stmt in body:
        if isinstance(stmt, ast.Import | ast.ImportFrom):
            run.append(stmt)
            continue
        if run:
            yield run
        run = []
    if run:
        yield run


def _imported(node: ast.Import | ast.ImportFrom) -> str:
    if isinstance(node, ast.ImportFrom):
        return node.module or ""
    return node.names[0].name


@pytest.mark.parametrize("module", sorted(MODULES))
def test_function_level_imports_have_a_reason(module: str) -> None:
    """An import inside a function is either a third-party one with its reason on the line,
    or, in cli/ only, heatweave modules that pull numpy and scipy in, under the one comment
    that says so; anything else belongs at the top of the module (issue 13)."""
    lines = MODULES[module].read_text(encoding="utf-8").split("\n")
    wrong = []
    for func in ast.walk(ast.parse("\n".join(lines))):
        if not isinstance(func, ast.FunctionDef | ast.AsyncFunctionDef):
            continue
        blocks = [getattr(n, f) for n in ast.walk(func) for f in ("body", "orelse", "finalbody")
                  if isinstance(getattr(n, f, None), list)]  # fmt: skip
        for block in blocks:
            for run in _import_runs(block):
                above = lines[run[0].lineno - 2].strip()
                for node in run:
                    name = _imported(node)
                    if name.startswith("heatweave"):
                        if not module.startswith("heatweave.cli") or above != REASON:
                            wrong.append(f"{node.lineno}: {name}")
                    elif not (
                        "#" in lines[node.lineno - 1] or above.startswith("#") or above == "try:"
                    ):
                        wrong.append(f"{node.lineno}: {name} (no reason given)")
    assert wrong == []
