"""The package has no import circles (DEVELOPERS.md: one direction of flow, no circles).

Every ``import`` inside coderel, at module level or inside a function, is an edge; a strongly
connected group of more than one module is a circle.
"""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[1] / "coderel"

#: Circles known and being removed by a split in progress; none may be added.
KNOWN: set[frozenset[str]] = set()


def _modules() -> dict[str, Path]:
    out = {}
    for path in PACKAGE.rglob("*.py"):
        parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = path
    return out


def _graph(mods: dict[str, Path]) -> dict[str, set[str]]:
    graph: dict[str, set[str]] = {}
    for name, path in mods.items():
        deps: set[str] = set()
        for node in ast.walk(ast.parse(path.read_text("utf-8"))):
            if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                for alias in node.names:
                    full = f"{node.module}.{alias.name}"
                    if full in mods:
                        deps.add(full)
                    elif node.module in mods:
                        deps.add(node.module)
            elif isinstance(node, ast.Import):
                deps.update(a.name for a in node.names if a.name in mods)
        graph[name] = deps - {name}
    return graph


def _circles(graph: dict[str, set[str]]) -> list[frozenset[str]]:
    """Strongly connected components of more than one module (Tarjan, iterative)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[frozenset[str]] = []
    counter = 0
    for start in graph:
        if start in index:
            continue
        work = [(start, iter(sorted(graph[start])))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            v, children = work[-1]
            advanced = False
            for w in children:
                if w not in index:
                    index[w] = low[w] = counter
                    counter += 1
                    stack.append(w)
                    on_stack.add(w)
                    work.append((w, iter(sorted(graph.get(w, ())))))
                    advanced = True
                    break
                if w in on_stack:
                    low[v] = min(low[v], index[w])
            if advanced:
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[v])
            if low[v] == index[v]:
                group = set()
                while True:
                    w = stack.pop()
                    on_stack.discard(w)
                    group.add(w)
                    if w == v:
                        break
                if len(group) > 1:
                    found.append(frozenset(group))
    return found


def test_circle_finder_finds_a_circle() -> None:
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert _circles(graph) == [frozenset({"a", "b", "c"})]


def test_no_new_import_circles() -> None:
    circles = set(_circles(_graph(_modules())))
    assert circles <= KNOWN, sorted(sorted(c) for c in circles - KNOWN)


def test_codebook_modules_import_one_way() -> None:
    graph = _graph(_modules())
    assert "coderel.codebook.load" not in graph["coderel.codebook.frictionless"]
    assert "coderel.codebook.frictionless" in graph["coderel.codebook.load"]
