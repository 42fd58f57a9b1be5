"""The house rules of the package, read from its source: who may import whom, no import cycles,
no function too long to read. A wrong layering fails here, not in review."""
from __future__ import annotations

import ast
import sys
from pathlib import Path

import pytest

PACKAGE = Path(__file__).resolve().parents[1] / "sweep"
MAX_FUNCTION_LINES = 120


def _modules() -> dict[str, Path]:
    out = {}
    for f in PACKAGE.rglob("*.py"):
        parts = f.relative_to(PACKAGE.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        out[name] = f
    return out


MODULES = _modules()


def _imports(name: str) -> tuple[set[str], set[str]]:
    """(modules of the package, top-level outside packages) that module `name` imports anywhere
    in its source, function-level imports included."""
    f = MODULES[name]
    is_pkg = f.name == "__init__.py"
    inside, outside = set(), set()
    for node in ast.walk(ast.parse(f.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = name.split(".") if is_pkg else name.split(".")[:-1]
                base = base[:len(base) - (node.level - 1)]
                target = ".".join(base + ([node.module] if node.module else []))
            else:
                target = node.module or ""
            if not target.startswith("sweep"):
                outside.add(target.split(".")[0])
                continue
            subs = [f"{target}.{a.name}" for a in node.names if f"{target}.{a.name}" in MODULES]
            inside.update(subs if subs and len(subs) == len(node.names) else subs + [target])
        elif isinstance(node, ast.Import):
            for a in node.names:
                (inside if a.name.startswith("sweep") else outside).add(
                    a.name if a.name.startswith("sweep") else a.name.split(".")[0])
    inside.discard(name)
    return {m for m in inside if m in MODULES}, outside


GRAPH = {m: _imports(m) for m in MODULES}
STDLIB = set(sys.stdlib_module_names) | {"__future__"}


def _cycle() -> list[str] | None:
    """One import cycle among the package's modules, or None [book: depth-first search]."""
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(m):
        state[m] = 1
        stack.append(m)
        for d in sorted(GRAPH[m][0]):
            if state.get(d) == 1:
                return stack[stack.index(d):] + [d]
            if d not in state:
                found = visit(d)
                if found:
                    return found
        stack.pop()
        state[m] = 2
        return None
    for m in sorted(GRAPH):
        if m not in state:
            found = visit(m)
            if found:
                return found
    return None


def test_the_graph_sees_the_package():
    # a broken reader would pass every rule below with an empty graph
    assert {"sweep.engine", "sweep.physics.model", "sweep.writers.workbook", "sweep.cli"} <= set(MODULES)
    assert "sweep.physics" in GRAPH["sweep.engine"][0]
    assert "numpy" in GRAPH["sweep.engine"][1]


def test_no_import_cycles():
    assert _cycle() is None, " -> ".join(_cycle())


def test_physics_imports_only_numerics():
    for m, (inside, outside) in GRAPH.items():
        if not m.startswith("sweep.physics"):
            continue
        assert all(d.startswith("sweep.physics") for d in inside), (m, inside)
        assert outside - STDLIB <= {"numpy", "scipy", "numba"}, (m, outside - STDLIB)


def test_writers_import_only_the_report_the_registries_and_formatting():
    allowed = {"sweep.report", "sweep.variables", "sweep.values", "sweep.errors"}
    for m, (inside, _outside) in GRAPH.items():
        if m.startswith("sweep.writers"):
            assert all(d in allowed or d.startswith("sweep.writers") for d in inside), (m, inside)


def test_the_cli_calls_the_library_never_the_analysis_or_the_physics():
    for m, (inside, _outside) in GRAPH.items():
        if m.startswith("sweep.cli"):
            bad = {d for d in inside if d.startswith(("sweep.analysis", "sweep.physics", "sweep.engine"))}
            assert not bad, (m, bad)


def _long_functions():
    for m, f in MODULES.items():
        for node in ast.walk(ast.parse(f.read_text(encoding="utf-8"))):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                n = node.end_lineno - node.lineno + 1
                if n > MAX_FUNCTION_LINES:
                    yield f"{m}.{node.name}: {n} lines"


def test_no_function_over_the_limit():
    assert list(_long_functions()) == []


@pytest.mark.parametrize("rule", ["cycle", "layer"])
def test_the_rules_catch_a_planted_violation(rule):
    # the checks must be able to fail: plant a violation in a copy of the graph
    saved = {k: (set(v[0]), set(v[1])) for k, v in GRAPH.items()}
    try:
        if rule == "cycle":
            GRAPH["sweep.physics.model"][0].add("sweep.engine")
            assert _cycle() is not None
        else:
            GRAPH["sweep.physics.nodes"][1].add("pandas")
            with pytest.raises(AssertionError):
                test_physics_imports_only_numerics()
    finally:
        GRAPH.clear()
        GRAPH.update(saved)
