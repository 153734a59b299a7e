"""The import rules of the contributor guide: forward <- inverse <- data_io, no upward import,
and no circle between modules (imports inside functions count too)."""

import ast
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
LAYERS = ("forward", "inverse", "data_io")


def _imports() -> dict:
    """module 'layer.name' -> set of modules of the package it imports (relative imports)."""
    graph = {}
    for layer in LAYERS:
        for f in sorted((ROOT / layer).glob("*.py")):
            deps = set()
            for node in ast.walk(ast.parse(f.read_text(encoding="utf-8"))):
                if not (isinstance(node, ast.ImportFrom) and node.level):
                    continue
                base = [layer] if node.level == 1 else []
                if node.module is None:             # from . import x / from .. import inverse
                    deps |= {".".join(base + [a.name]) for a in node.names}
                else:
                    deps.add(".".join(base + node.module.split(".")[:2 - len(base)]))
            graph[f"{layer}.{f.stem}"] = deps
    return graph


def test_no_upward_imports():
    for mod, deps in _imports().items():
        rank = LAYERS.index(mod.split(".")[0])
        for dep in deps:
            assert LAYERS.index(dep.split(".")[0]) <= rank, f"{mod} imports {dep} from a higher layer"


def test_no_import_circles():
    graph = _imports()

    def reach(start):
        seen, todo = set(), [start]
        while todo:
            for nxt in graph.get(todo.pop(), ()):
                if nxt not in seen:
                    seen.add(nxt)
                    todo.append(nxt)
        return seen

    circles = sorted((a, b) for a in graph for b in graph[a] if b in graph and b != a and a in reach(b))
    assert circles == [], circles


def test_the_graph_is_read():
    graph = _imports()     # the checks above see real edges
    assert "inverse.steady" in graph["data_io.logs"] or "inverse.steady" in graph["data_io.trend_run"]
    assert "data_io.arguments" in graph["data_io.cli"] and "data_io.arguments" in graph["data_io.trend_command"]
