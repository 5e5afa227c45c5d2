"""The package's import graph: data flows one way, so no module may import itself back.

A circle (a imports b, b imports a, directly or through other modules, at the top or
inside a function) means two modules share something that belongs in a third; the
test names the modules of every circle it finds.
"""

from __future__ import annotations

import ast
from pathlib import Path

import airtaper

ROOT = Path(airtaper.__file__).parent


def _modules() -> dict[str, Path]:
    mods = {}
    for path in ROOT.rglob("*.py"):
        parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        mods[".".join(parts)] = path
    return mods


def import_graph() -> dict[str, set[str]]:
    """Module -> the project modules it imports (``from pkg import submodule`` counts the submodule only)."""
    mods = _modules()
    graph = {}
    for name, path in mods.items():
        deps = set()
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom) and node.module and node.level == 0:
                subs = {f"{node.module}.{a.name}" for a in node.names} & set(mods)
                deps |= subs
                if node.module in mods and len(subs) < len(node.names):
                    deps.add(node.module)
            elif isinstance(node, ast.Import):
                deps |= {a.name for a in node.names if a.name in mods}
        graph[name] = deps - {name}
    return graph


def circles(graph: dict[str, set[str]]) -> list[list[str]]:
    """The strongly connected components with more than one module (Tarjan's algorithm, iterative)."""
    index, low, on_stack, stack, found = {}, {}, set(), [], []
    counter = 0
    for root in graph:
        if root in index:
            continue
        work = [(root, iter(sorted(graph[root])))]
        index[root] = low[root] = counter
        counter += 1
        stack.append(root)
        on_stack.add(root)
        while work:
            v, children = work[-1]
            for w in children:
                if w not in index:
                    index[w] = low[w] = counter
                    counter += 1
                    stack.append(w)
                    on_stack.add(w)
                    work.append((w, iter(sorted(graph[w]))))
                    break
                if w in on_stack:
                    low[v] = min(low[v], index[w])
            else:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[v])
                if low[v] == index[v]:
                    comp = []
                    while True:
                        w = stack.pop()
                        on_stack.discard(w)
                        comp.append(w)
                        if w == v:
                            break
                    if len(comp) > 1:
                        found.append(sorted(comp))
    return found


def test_circle_finder_finds_a_planted_circle():
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}, "e": set()}
    assert circles(graph) == [["a", "b", "c"]]
    assert circles({"a": {"b"}, "b": set()}) == []


def test_the_package_has_no_import_circle():
    graph = import_graph()
    assert "airtaper.model.train" in graph and "airtaper.model.clarifier" in graph["airtaper.model.train"]
    assert circles(graph) == []


def test_every_package_docstring_maps_its_modules():
    # each package's __init__ names every module of the package (``airtaper.<package>.<module>``)
    missing = []
    for init in sorted(ROOT.glob("*/__init__.py")):
        package = init.parent.name
        doc = ast.get_docstring(ast.parse(init.read_text(encoding="utf-8"))) or ""
        for module in sorted(init.parent.glob("*.py")):
            if module.name != "__init__.py" and f"airtaper.{package}.{module.stem}`" not in doc:
                missing.append(f"airtaper.{package}.{module.stem}")
    assert missing == []
