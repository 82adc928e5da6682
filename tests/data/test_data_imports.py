"""The data layer's modules import each other without a cycle, counting imports
inside functions too (a cycle hidden that way breaks as soon as the import
moves to the top of the module)."""

from __future__ import annotations

import ast
from pathlib import Path

PACKAGE = Path(__file__).resolve().parents[2] / "src" / "speciakin" / "data"


def _imports(path: Path) -> set[str]:
    found = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.startswith("speciakin.data."):
            found.add(node.module.split(".")[2])
        elif isinstance(node, ast.Import):
            found |= {a.name.split(".")[2] for a in node.names if a.name.startswith("speciakin.data.")}
    return found


def test_no_import_cycle_in_the_data_layer():
    graph = {p.stem: _imports(p) for p in PACKAGE.glob("*.py") if p.stem != "__init__"}
    assert graph["validate"] and "importer" not in graph["validate"]  # the former cycle
    state: dict[str, int] = {}

    def visit(node: str, path: list[str]) -> None:
        state[node] = 1
        for nxt in sorted(graph.get(node, ())):
            assert state.get(nxt) != 1, "import cycle: " + " -> ".join(path + [nxt])
            if nxt not in state:
                visit(nxt, path + [nxt])
        state[node] = 2

    for module in sorted(graph):
        if module not in state:
            visit(module, [module])
