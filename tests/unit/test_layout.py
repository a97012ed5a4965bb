"""The package's shape, read from the source with ``ast``: no import cycle anywhere in
edge/ (imports under TYPE_CHECKING and inside functions count), and the functional core
imports no I/O library, not even through another module."""

from __future__ import annotations

import ast
from functools import cache
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2] / "edge"

# The functional core: values in, values out (DEVELOPERS.md, "Layout").
CORE = (
    "edge.units",
    "edge.steam",
    "edge.barometer",
    "edge.backoff",
    "edge.derive",
    "edge.sources.decode",
    "edge.sources.plan",
    "edge.sources.condition",
    "edge.alarms.engine",
    "edge.flow",
)
# The shell's libraries: event loop, storage, HTTP, logging, the protocols.
SHELL_LIBRARIES = frozenset(
    {"asyncio", "sqlite3", "aiohttp", "structlog", "pymodbus", "asyncua", "aiomqtt", "serial"}
)


def _name(path: Path) -> str:
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {_name(p): p for p in sorted(ROOT.rglob("*.py"))}


def _owner(name: str) -> str | None:
    """The module of edge that ``name`` (a module or a name inside one) lives in."""
    while name and name not in MODULES:
        name = name.rpartition(".")[0]
    return name or None


@cache
def _imports(module: str) -> tuple[frozenset[str], frozenset[str]]:
    """(modules of edge, top-level outside packages) that ``module`` imports anywhere in
    its source: at the top, under TYPE_CHECKING, inside functions."""
    path = MODULES[module]
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    inside: set[str] = set()
    outside: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        names: list[str] = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                up = package.split(".")[: len(package.split(".")) - (node.level - 1)]
                base = ".".join([*up, *([node.module] if node.module else [])])
            names = [base, *(f"{base}.{a.name}" for a in node.names)]
        for n in names:
            if n.split(".")[0] == "edge":
                owner = _owner(n)
                if owner is not None and owner != module:
                    inside.add(owner)
            else:
                outside.add(n.split(".")[0])
    return frozenset(inside), frozenset(outside)


def _edges(module: str) -> set[str]:
    """Edges of the cycle check: a package's face importing its own submodules is fine."""
    inside, _ = _imports(module)
    if MODULES[module].name == "__init__.py":
        return {m for m in inside if not m.startswith(module + ".")}
    return set(inside)


def _cycles() -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan), each sorted."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(_edges(v)):
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

    for module in MODULES:
        if module not in index:
            visit(module)
    return found


def _reach(module: str) -> set[str]:
    """Every module of edge that importing ``module`` may run: what it imports, their
    imports, and each one's parent packages (Python runs a package's face first)."""
    seen: set[str] = set()
    todo = [module]
    while todo:
        m = todo.pop()
        if m in seen:
            continue
        seen.add(m)
        parents = [".".join(m.split(".")[:i]) for i in range(1, m.count(".") + 1)]
        todo += [p for p in parents if p in MODULES]
        todo += _imports(m)[0]
        if MODULES[m].name == "__init__.py":  # a face of the core: all of its package
            todo += [n for n in MODULES if n.startswith(m + ".") and m in CORE]
    return seen


def test_the_walk_sees_the_whole_package():
    """The walk finds every module, the service's imports among them."""
    assert len(MODULES) > 80
    assert "edge.service.monitor" in MODULES
    assert {"edge.config", "edge.evaluation"} <= _imports("edge.service.monitor")[0]


def test_no_import_cycle_in_edge():
    """No two modules of edge import each other, directly or round a loop."""
    assert _cycles() == []


@pytest.mark.parametrize("module", CORE)
def test_core_module_imports_no_shell_library(module):
    """A core module, and everything it brings in, imports no asyncio, sqlite3, aiohttp,
    structlog or protocol library."""
    assert module in MODULES
    used = {(m, lib) for m in sorted(_reach(module)) for lib in _imports(m)[1] & SHELL_LIBRARIES}
    assert used == set()


def test_every_public_exception_is_in_the_one_drawn_tree():
    """Every public exception class of edge/ lives in edge/errors.py, derives from
    EdgeError and is drawn in that module's docstring."""
    import inspect

    import edge.errors

    outside = sorted(
        f"{module}.{node.name}"
        for module, path in MODULES.items()
        if module != "edge.errors"
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8")))
        if isinstance(node, ast.ClassDef)
        and not node.name.startswith("_")
        and node.name.endswith(("Error", "Exception", "Failed", "Timeout"))
    )
    assert outside == []
    drawn = edge.errors.__doc__ or ""
    tree = [
        name
        for name, obj in vars(edge.errors).items()
        if inspect.isclass(obj) and issubclass(obj, Exception) and obj.__module__ == "edge.errors"
    ]
    assert all(issubclass(getattr(edge.errors, n), edge.errors.EdgeError) for n in tree)
    assert [n for n in tree if n not in drawn] == []
