"""The import graph of the package runs one way (DEVELOPERS.md, "Map of the package").

Read statically from the source (imports inside functions count too: a lazy import is
still a dependency), so the test needs no import of the package to fail.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "reagentplan"

#: Modules that import no other module of the package (the bottom layer).
LEAVES = ("reagentplan.schema", "reagentplan.errors", "reagentplan.units", "reagentplan.chemistry")


def _module(path: Path) -> str:
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


def _is_module(name: str) -> bool:
    rel = Path(*name.split("."))
    return (ROOT.parent / rel).with_suffix(".py").is_file() or (ROOT.parent / rel / "__init__.py").is_file()


def import_graph() -> dict[str, set[str]]:
    """Module -> the package's modules it imports (``from .x import name`` counts
    ``x.name`` when that is a module, else ``x``)."""
    graph: dict[str, set[str]] = {}
    for path in sorted(ROOT.rglob("*.py")):
        mod = _module(path)
        package = mod if path.name == "__init__.py" else mod.rsplit(".", 1)[0]
        found = graph.setdefault(mod, set())
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package.split(".")[: len(package.split(".")) - node.level + 1]
                    target = ".".join(base + ([node.module] if node.module else []))
                else:
                    target = node.module or ""
                names = [f"{target}.{a.name}" for a in node.names]
                targets = [n for n in names if _is_module(n)] or [target]
            elif isinstance(node, ast.Import):
                targets = [a.name for a in node.names]
            else:
                continue
            found.update(t for t in targets if t.startswith("reagentplan.") and _is_module(t))
    return graph


def _top(mod: str) -> str:
    return ".".join(mod.split(".")[:2])


def _reach(graph: dict[str, set[str]], start: str) -> set[str]:
    seen: set[str] = set()
    todo = [start]
    while todo:
        for nxt in graph.get(todo.pop(), ()):
            if nxt not in seen:
                seen.add(nxt)
                todo.append(nxt)
    return seen


def test_top_level_modules_import_one_way():
    """No circle between the package's top-level modules and subpackages."""
    graph = import_graph()
    top: dict[str, set[str]] = {}
    for mod, targets in graph.items():
        top.setdefault(_top(mod), set()).update(_top(t) for t in targets if _top(t) != _top(mod))
    circles = sorted({tuple(sorted((a, b))) for a in top for b in _reach(top, a)
                      if a != b and a in _reach(top, b)})
    assert circles == []


def test_leaf_modules_import_nothing_of_the_package():
    graph = import_graph()
    for leaf in LEAVES:
        assert graph[leaf] == set(), leaf


def test_balance_does_not_reach_the_forecast():
    """The deterministic balance sits below the forecast: it takes the median generation
    from `reagentplan.timeseries`, and the forecast takes the physics from it."""
    graph = import_graph()
    below = _reach(graph, "reagentplan.balance") | _reach(graph, "reagentplan.timeseries")
    assert not {m for m in below if m.startswith("reagentplan.forecast")}
    assert "reagentplan.balance" in _reach(graph, "reagentplan.forecast.futures")


def test_scenario_is_below_the_planning_stages():
    graph = import_graph()
    below = {_top(m) for m in _reach(graph, "reagentplan.scenario")}
    assert below <= {"reagentplan.scenario", "reagentplan.schema", "reagentplan.errors",
                     "reagentplan.units", "reagentplan.chemistry", "reagentplan.workbook"}


def test_importing_the_balance_loads_no_forecast():
    code = ("import sys, reagentplan.balance; "
            "print(sorted(m for m in sys.modules if m.startswith('reagentplan.forecast')))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120,
                         cwd=ROOT.parent, check=True)
    assert out.stdout.strip() == "[]"
