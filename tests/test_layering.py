"""The layering of ``piezo/``, checked by reading the source (no import is executed).

Every import statement counts, at module level and inside functions alike (an import
inside a function that only dodges a cycle is still a cycle), and so does
``importlib.import_module`` with a literal name or prefix. Three rules:

1. no import cycle between piezo modules;
2. the report and batch layers never import the command line (``piezo.cli``);
3. the analysis core (every package except ``cli``, ``report``, ``batch``, ``plots``)
   imports no command-line, terminal, plotting or templating library.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

from tests.paths import REPO

PACKAGE = REPO / "piezo"

#: Layers allowed to touch the terminal, files and figures; the rest is the core.
EDGES = ("piezo.cli", "piezo.report", "piezo.batch", "piezo.plots", "piezo.__main__")

#: Libraries the core must not import (the CLI, terminal output, figures, templates).
EDGE_LIBRARIES = ("typer", "click", "rich", "matplotlib", "jinja2")


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(REPO).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


MODULES = {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _is_package(name: str) -> bool:
    return MODULES[name].name == "__init__.py"


def _resolve(name: str, level: int, importer: str) -> str:
    """Absolute name of a (possibly relative) import inside ``importer``."""
    if level == 0:
        return name
    base = importer.split(".")
    if not _is_package(importer):
        base.pop()
    base = base[: len(base) - (level - 1)]
    return ".".join([*base, name] if name else base)


def imports_of(name: str) -> list[tuple[str, int]]:
    """Every module ``name`` imports, with its line: piezo modules and libraries alike.

    ``from piezo.x import y`` counts as an import of ``piezo.x.y`` when that is a module,
    else of ``piezo.x``.
    """
    tree = ast.parse(MODULES[name].read_text(encoding="utf-8"))
    found: list[tuple[str, int]] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found.extend((alias.name, node.lineno) for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            target = _resolve(node.module or "", node.level, name)
            for alias in node.names:
                sub = f"{target}.{alias.name}"
                found.append((sub if sub in MODULES else target, node.lineno))
        elif isinstance(node, ast.Call) and _is_import_module(node.func) and node.args:
            found.extend((m, node.lineno) for m in _dynamic_targets(node.args[0]))
    return found


def _is_import_module(func: ast.expr) -> bool:
    return (isinstance(func, ast.Attribute) and func.attr == "import_module") or (
        isinstance(func, ast.Name) and func.id == "import_module"
    )


def _dynamic_targets(arg: ast.expr) -> list[str]:
    """Modules an ``importlib.import_module`` call may load: the literal name, or every
    module under a literal prefix such as ``f"piezo.cli.{name}"``."""
    if isinstance(arg, ast.Constant) and isinstance(arg.value, str):
        return [arg.value]
    if isinstance(arg, ast.JoinedStr) and arg.values:
        head = arg.values[0]
        if isinstance(head, ast.Constant) and isinstance(head.value, str):
            prefix = head.value
            if prefix.startswith("piezo.") and prefix.endswith("."):
                return [m for m in MODULES if m.startswith(prefix)]
    return []


def _piezo_target(imported: str) -> str | None:
    """The piezo module an import loads (its longest known prefix), or None."""
    parts = imported.split(".")
    while parts:
        candidate = ".".join(parts)
        if candidate in MODULES:
            return candidate
        parts.pop()
    return None


def import_graph() -> dict[str, set[str]]:
    """piezo module -> the piezo modules it imports (anywhere in its source)."""
    graph: dict[str, set[str]] = {}
    for name in MODULES:
        targets = {_piezo_target(imported) for imported, _ in imports_of(name)}
        graph[name] = {t for t in targets if t is not None and t != name}
    return graph


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan 1972)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []
    counter = [0]

    def visit(v: str) -> None:
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph.get(v, ())):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                found.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def _in(name: str, layers: tuple[str, ...]) -> bool:
    return any(name == layer or name.startswith(layer + ".") for layer in layers)


def test_the_scan_sees_every_kind_of_import():
    # The scan must find imports inside functions and relative imports, or it proves
    # nothing: checked on a module of known content.
    names = {n for n, _ in imports_of("piezo.cli.options")}
    assert {"typer", "piezo.chain.open", "piezo.errors"} <= names
    # cli/__init__.py loads the command modules by name (importlib).
    assert "piezo.cli.check" in {n for n, _ in imports_of("piezo.cli")}
    assert cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_no_import_cycles():
    assert cycles(import_graph()) == []


@pytest.mark.parametrize("layer", ["piezo.report", "piezo.batch"])
def test_report_and_batch_never_import_the_cli(layer):
    bad = [
        f"{name}:{line} imports {imported}"
        for name in MODULES
        if _in(name, (layer,))
        for imported, line in imports_of(name)
        if _in(imported, ("piezo.cli",))
    ]
    assert bad == []


def test_the_core_imports_no_cli_terminal_plotting_or_templating_library():
    bad = [
        f"{name}:{line} imports {imported}"
        for name in MODULES
        if not _in(name, EDGES)
        for imported, line in imports_of(name)
        if _in(imported, EDGE_LIBRARIES)
    ]
    assert bad == []
