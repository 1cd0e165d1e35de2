"""No two calcsheaf modules import each other, directly or round a loop, counting
imports placed inside functions (a cycle held together by a late import breaks as soon
as someone hoists it)."""

from __future__ import annotations

import ast
from pathlib import Path

import calcsheaf

ROOT = Path(calcsheaf.__file__).parent


def _modules() -> dict[str, Path]:
    out = {}
    for path in sorted(ROOT.rglob("*.py")):
        parts = ["calcsheaf", *path.relative_to(ROOT).with_suffix("").parts]
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


def _imports(name: str, path: Path, known: set[str]) -> set[str]:
    package = name.split(".") if path.name == "__init__.py" else name.split(".")[:-1]
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            targets = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = package[:len(package) - node.level + 1] if node.level else []
            module = ".".join(base + ([node.module] if node.module else []))
            targets = [module, *(f"{module}.{a.name}" for a in node.names)]
        else:
            continue
        found |= {t for t in targets if t in known and t != name}
    return found


def _cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components of more than one module (Tarjan)."""
    index, low, stack, on, out = {}, {}, [], set(), []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            component = []
            while True:
                w = stack.pop()
                on.discard(w)
                component.append(w)
                if w == v:
                    break
            if len(component) > 1:
                out.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def test_the_cycle_finder_sees_a_two_module_loop():
    assert _cycles({"a": {"b"}, "b": {"a"}, "c": {"a"}}) == [["a", "b"]]


def test_no_module_imports_itself_round_a_loop():
    modules = _modules()
    graph = {name: _imports(name, path, set(modules)) for name, path in modules.items()}
    assert _cycles(graph) == []
