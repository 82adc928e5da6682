"""The layer rules of DEVELOPERS.md hold for every module of src/speciakin.

Read from the source with :mod:`ast` (imports inside functions count too):
a module imports only from its own layer and the layers before it, nothing
below ``pipeline/`` imports it, and the module import graph has no cycle.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

SRC = Path(__file__).resolve().parents[2] / "src"
#: Layers in order; a module may import its own layer and those before it.
LAYERS = ("base", "chemistry", "simulation", "data", "estimation", "decision", "pipeline", "report", "web", "cli")
#: Top-level modules and the layer they belong to.
TOP_LEVEL = {"errors": "base", "_io": "base", "_json": "base", "_cells": "base", "units": "base", "palette": "base",
             "demo": "base", "__init__": "base", "workflow": "pipeline"}


def module_name(path: Path) -> str:
    parts = list(path.relative_to(SRC).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def layer_of(module: str) -> str:
    parts = module.split(".")
    if len(parts) == 1:
        return "base"
    if parts[1] in LAYERS:
        return parts[1]
    return TOP_LEVEL[parts[1]]


def imports() -> dict[str, set[str]]:
    """speciakin module -> the speciakin modules it imports (as modules, not names)."""
    files = {module_name(p): p for p in (SRC / "speciakin").rglob("*.py")}
    graph: dict[str, set[str]] = {}
    for name, path in files.items():
        found: set[str] = set()
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                found |= {a.name for a in node.names if a.name.startswith("speciakin")}
            elif isinstance(node, ast.ImportFrom):
                base = node.module or ""
                if node.level:
                    base = ".".join(package.split(".")[:len(package.split(".")) - node.level + 1]
                                    + ([base] if base else []))
                if not base.startswith("speciakin"):
                    continue
                for alias in node.names:
                    candidate = f"{base}.{alias.name}"
                    found.add(candidate if candidate in files else base)
        graph[name] = {m for m in found if m in files and m != name}
    return graph


def test_the_graph_is_read():
    graph = imports()
    assert "speciakin.pipeline.steps" in graph and "speciakin.pipeline.outputs" in graph["speciakin.pipeline.steps"]


def test_no_module_imports_a_later_layer():
    wrong = [f"{m} ({layer_of(m)}) imports {d} ({layer_of(d)})"
             for m, deps in imports().items() for d in deps
             if LAYERS.index(layer_of(d)) > LAYERS.index(layer_of(m))]
    assert not wrong, "\n".join(sorted(wrong))


def test_nothing_below_the_pipeline_imports_it():
    below = {"base", "chemistry", "simulation", "data", "estimation", "decision"}
    wrong = [m for m, deps in imports().items() if layer_of(m) in below
             and any(layer_of(d) == "pipeline" for d in deps)]
    assert not wrong


def cycles(graph: dict[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan's algorithm)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on_stack: set[str] = set()
    found: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on_stack.add(v)
        for w in graph.get(v, ()):
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

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return found


def test_cycle_finder_finds_a_cycle():
    assert cycles({"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}) == [["a", "b", "c"]]


def package_parents(module: str) -> set[str]:
    parts = module.split(".")
    return {".".join(parts[:i]) for i in range(1, len(parts))}


def test_no_import_cycle():
    graph = imports()
    # a package's __init__ re-exporting its own modules is not a cycle of logic: drop the edges
    # from a module to the packages that contain it
    graph = {m: {d for d in deps if d not in package_parents(m)} for m, deps in graph.items()}
    assert cycles(graph) == []


def test_the_report_only_renders():
    """No report module reads the objective's arrays or runs the model (they come as predictions)."""
    forbidden = {"h_run", "h_t", "h_cens", "h_obs", "h_loq", "h_compound", "t_run", "t_t", "t_obs",
                 "output_times", "curves_batch", "predict_batch", "residuals", "residuals_batch",
                 "log_likelihood_batch", "simulate", "simulate_batch"}
    found = []
    for path in (SRC / "speciakin" / "report").rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Attribute) and node.attr in forbidden:
                found.append(f"{path.name}:{node.lineno} .{node.attr}")
    assert not found, "\n".join(found)


#: Longest module DEVELOPERS.md allows (its style rules: one concern per module).
MAX_MODULE_LINES = 500


def test_no_module_is_over_the_line_limit():
    long = {module_name(p): n for p in (SRC / "speciakin").rglob("*.py")
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_MODULE_LINES}
    assert long == {}
