"""The package's shape (DESIGN §2, DEVELOPERS.md "Architecture"): modules of a readable size,
functions of a readable length, and layers without import circles — imports inside functions
counted, since a deferred import is still a dependency. Common practice, no published source."""

from __future__ import annotations

import ast
import pathlib

import pytest

import sensormodel

PACKAGE = pathlib.Path(sensormodel.__file__).parent
#: Longest module [lines] and function [lines] of the package (DEVELOPERS.md).
MAX_MODULE_LINES = 1200
MAX_FUNCTION_LINES = 120


def _modules() -> dict[str, pathlib.Path]:
    out = {}
    for path in sorted(PACKAGE.rglob("*.py")):
        parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


MODULES = _modules()


def _imports(name: str, path: pathlib.Path) -> set[str]:
    """The package modules ``name`` imports, at any depth of its code."""
    is_package = path.name == "__init__.py"
    found: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = name.split(".") if is_package else name.split(".")[:-1]
                base = base[: len(base) - (node.level - 1)]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            subs = [f"{module}.{a.name}" for a in node.names]
            # "from . import x" depends on x; "from .m import f" on m
            targets = [t for t in subs if t in MODULES] or [module]
        else:
            continue
        found.update(t for t in targets if t in MODULES and t != name)
    return found


def _cycles(edges: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    out: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(edges[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in sorted(edges):
        if v not in index:
            visit(v)
    return out


def test_no_import_circles():
    edges = {name: _imports(name, path) for name, path in MODULES.items()}
    assert _cycles(edges) == []


def test_the_cycle_finder_finds_a_cycle():
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


@pytest.mark.parametrize("name", sorted(MODULES))
def test_module_size(name):
    lines = MODULES[name].read_text(encoding="utf-8").count("\n")
    assert lines <= MAX_MODULE_LINES, f"{name}: {lines} lines"


def test_function_length():
    long = []
    for name, path in MODULES.items():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                length = node.end_lineno - node.lineno + 1
                if length > MAX_FUNCTION_LINES:
                    long.append(f"{name}.{node.name}: {length} lines")
    assert long == []
