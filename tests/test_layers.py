"""The house keeps its shape: layers import only downward, no import cycle,
no module over 500 lines and no function over 60 (the project's own rules,
DEVELOPERS.md "Rules of the house").

Every import is read from the source with ``ast`` (imports inside functions
included), resolved to a module of this project, and ranked by its layer:

    errors, version              0  the ground floor: every layer may raise these errors
    dosing.chem                  1  pure chemistry
    dosing.planning              2  the planning layer (pure)
    dosing.io                    3  files in and out
    dosing.report                4  every rendering
    dosing.cli, dosing.commands,
    tui, dosing (the package)    5  the shells and the public face
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PACKAGES = ("dosing", "tui")
#: Layer of each module prefix; the longest prefix that matches wins.
RANKS = {
    "dosing.errors": 0,
    "dosing.version": 0,
    "dosing.chem": 1,
    "dosing.planning": 2,
    "dosing.io": 3,
    "dosing.report": 4,
    "dosing.cli": 5,
    "dosing.commands": 5,
    "dosing": 5,          # the package face (dosing/__init__.py) re-exports the API
    "tui": 5,
}
MAX_MODULE_LINES = 500
MAX_FUNCTION_LINES = 60


def _modules() -> dict[str, Path]:
    out = {}
    for pkg in PACKAGES:
        for path in (ROOT / pkg).rglob("*.py"):
            parts = path.relative_to(ROOT).with_suffix("").parts
            name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
            out[name] = path
    return out


MODULES = _modules()


def _is_package(name: str) -> bool:
    return MODULES[name].name == "__init__.py"


def _resolve(current: str, node: ast.ImportFrom) -> list[str]:
    """The project modules an ``from X import a, b`` names."""
    if node.level:
        base = current.split(".")
        if not _is_package(current):
            base = base[:-1]
        base = base[:len(base) - (node.level - 1)]
        target = ".".join(base + ([node.module] if node.module else []))
    else:
        target = node.module or ""
    found = []
    for alias in node.names:
        sub = f"{target}.{alias.name}"
        if sub in MODULES:
            found.append(sub)
        elif target in MODULES:
            found.append(target)
    return found


def imports_of(name: str) -> set[str]:
    """Every project module that ``name`` imports, anywhere in its code."""
    tree = ast.parse(MODULES[name].read_text(encoding="utf-8"))
    out: set[str] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom):
            out.update(_resolve(name, node))
        elif isinstance(node, ast.Import):
            out.update(a.name for a in node.names if a.name in MODULES)
    out.discard(name)
    return out


def rank(name: str) -> int:
    best = max((p for p in RANKS if name == p or name.startswith(p + ".")), key=len)
    return RANKS[best]


GRAPH = {name: imports_of(name) for name in MODULES}


def test_layers_import_only_downward():
    """A module imports only modules of its own layer or of a lower one;
    dosing.chem imports nothing of the project but the errors."""
    upward = sorted(f"{a} -> {b}" for a, deps in GRAPH.items() for b in deps
                    if rank(b) > rank(a) and a != "dosing")
    assert upward == []


def test_chemistry_imports_only_itself_and_the_errors():
    outside = sorted(f"{a} -> {b}" for a, deps in GRAPH.items() if a.startswith("dosing.chem")
                     for b in deps if not (b.startswith("dosing.chem") or b == "dosing.errors"))
    assert outside == []


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan 1972)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in graph[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                found.append(sorted(comp))

    for v in graph:
        if v not in index:
            visit(v)
    return found


def test_no_import_cycle():
    # The package face imports its modules; they do not import it back
    # (only its version, which is a leaf), so it is left out of the search.
    graph = {a: {b for b in deps if b != "dosing"} for a, deps in GRAPH.items()}
    assert _cycles(graph) == []


def test_the_cycle_finder_finds_a_cycle():
    """The check above can fail: a two-module loop and a three-module loop are found."""
    assert _cycles({"a": {"b"}, "b": {"a"}, "c": set()}) == [["a", "b"]]
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}}) == [["a", "b", "c"]]


@pytest.mark.parametrize("name", sorted(MODULES))
def test_module_size(name):
    lines = MODULES[name].read_text(encoding="utf-8").count("\n")
    assert lines <= MAX_MODULE_LINES, f"{MODULES[name]} has {lines} lines"


def test_function_size():
    long = []
    for name, path in MODULES.items():
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                n = node.end_lineno - node.lineno + 1
                if n > MAX_FUNCTION_LINES:
                    long.append(f"{path.relative_to(ROOT)}:{node.lineno} {node.name} {n}")
    assert long == []
