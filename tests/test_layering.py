"""The architecture holds: no import cycle between rmkit's modules (lazy imports included), and
no library module imports the command line."""

from __future__ import annotations

import ast
from pathlib import Path

from tests.conftest import ROOT

PACKAGE = ROOT / "rmkit"


def _modules() -> dict[str, Path]:
    out = {}
    for p in PACKAGE.rglob("*.py"):
        parts = p.relative_to(ROOT).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = p
    return out


def _imports(modules: dict[str, Path]) -> dict[str, set[str]]:
    """Module -> the rmkit modules it imports anywhere (top level or inside functions)."""

    def resolve(name: str) -> str:
        while name and name not in modules:
            name = name.rpartition(".")[0]
        return name

    graph: dict[str, set[str]] = {m: set() for m in modules}
    for m, path in modules.items():
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                targets = [f"{node.module}.{a.name}" if f"{node.module}.{a.name}" in modules
                           else node.module for a in node.names]
            for target in targets:
                if target.startswith("rmkit"):
                    found = resolve(target)
                    if found and found != m:
                        graph[m].add(found)
    return graph


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph[v]:
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

    for v in graph:
        if v not in index:
            visit(v)
    return found


def test_no_import_cycle():
    graph = _imports(_modules())
    assert _cycles(graph) == []
    # the checker itself finds a cycle when there is one
    assert _cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": set()}) == [["a", "b", "c"]]


def test_library_never_imports_the_command_line():
    graph = _imports(_modules())
    offenders = {m: sorted(t for t in targets if t == "rmkit.cli" or t.startswith("rmkit.cli."))
                 for m, targets in graph.items()
                 if not (m == "rmkit.cli" or m.startswith("rmkit.cli.") or m == "rmkit.__main__")}
    assert {m: t for m, t in offenders.items() if t} == {}
