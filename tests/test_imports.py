"""The package's architecture: data flows one way, so no module imports one that imports it back.

Every import statement counts, including those inside functions (a lazy import still ties two
modules together); imports under ``if TYPE_CHECKING:`` do not (they never run). The walk reads
the source with :mod:`ast`, so it sees modules whether or not optional extras are installed.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "complexity"
#: Above this a module is doing more than one job (common practice: split by concept).
MAX_LINES = 650


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(PACKAGE.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _is_type_checking(node: ast.If) -> bool:
    test = node.test
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING"
    )


def _imports(tree: ast.AST) -> list[ast.Import | ast.ImportFrom]:
    """Every import node that can run, skipping the bodies of ``if TYPE_CHECKING:``."""
    found: list[ast.Import | ast.ImportFrom] = []

    def visit(node: ast.AST) -> None:
        if isinstance(node, ast.If) and _is_type_checking(node):
            for child in node.orelse:
                visit(child)
            return
        if isinstance(node, (ast.Import, ast.ImportFrom)):
            found.append(node)
        for child in ast.iter_child_nodes(node):
            visit(child)

    visit(tree)
    return found


def _targets(name: str, path: Path, known: dict[str, Path]) -> set[str]:
    """The package modules that module ``name`` imports."""
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    out: set[str] = set()
    for node in _imports(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            out.update(a.name for a in node.names if a.name in known)
            continue
        if node.level:
            base = package.split(".")
            base = base[: len(base) - (node.level - 1)]
            origin = ".".join(base + ([node.module] if node.module else []))
        else:
            origin = node.module or ""
        for alias in node.names:
            sub = f"{origin}.{alias.name}"
            if sub in known:
                out.add(sub)
            elif origin in known:
                out.add(origin)
    out.discard(name)
    return out


def _graph() -> dict[str, set[str]]:
    known = _modules()
    return {name: _targets(name, path, known) for name, path in known.items()}


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    out: list[list[str]] = []

    def connect(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                connect(w)
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
                out.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            connect(v)
    return out


def test_the_walk_sees_known_edges():
    # the walker itself must find imports, or the cycle test below could never fail
    graph = _graph()
    assert "complexity._contract" in graph["complexity.sweep"]
    assert "complexity.engine.generic" in graph["complexity._engine_choice"]
    assert "complexity.exceptions" in graph["complexity"]


def test_the_cycle_finder_finds_a_planted_cycle():
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert _cycles(graph) == [["a", "b", "c"]]
    assert _cycles({"a": {"b"}, "b": set()}) == []


def test_no_import_cycles():
    # the root package imports everything for its front door; nothing may import it back
    graph = _graph()
    cycles = _cycles(graph)
    assert not cycles, "modules importing each other: " + "; ".join(" <-> ".join(c) for c in cycles)


@pytest.mark.parametrize("name", sorted(_modules()))
def test_module_size(name):
    path = _modules()[name]
    n = len(path.read_text(encoding="utf-8").splitlines())
    assert n <= MAX_LINES, f"{path.name} has {n} lines; split it by concept (limit {MAX_LINES})"
