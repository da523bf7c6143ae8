"""The package import graph has no cycle (imports flow downward only: DEVELOPERS.md, "The pipeline").

The graph is built from the source with ``ast``: one node per module of ``bandgeo``, one edge per
import statement, including imports inside functions (a lazy import is still a dependency) and
excluding those under ``if TYPE_CHECKING:`` (annotations only). ``from pkg import name`` points at the
module ``pkg.name`` when there is one, else at ``pkg``.
"""
from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1] / "bandgeo"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in ROOT.rglob("*.py")}


class _Imports(ast.NodeVisitor):
    def __init__(self, module: str, is_package: bool, known: set):
        self.package = module if is_package else module.rpartition(".")[0]
        self.known = known
        self.targets: set[str] = set()

    def visit_If(self, node: ast.If) -> None:
        test = node.test
        name = test.id if isinstance(test, ast.Name) else getattr(test, "attr", None)
        if name == "TYPE_CHECKING":
            for child in node.orelse:
                self.visit(child)
            return
        self.generic_visit(node)

    def visit_Import(self, node: ast.Import) -> None:
        for alias in node.names:
            self._add(alias.name)

    def visit_ImportFrom(self, node: ast.ImportFrom) -> None:
        if node.level:
            base = self.package.split(".")
            base = base[:len(base) - node.level + 1]
            source = ".".join(base + ([node.module] if node.module else []))
        else:
            source = node.module or ""
        for alias in node.names:
            full = f"{source}.{alias.name}"
            self._add(full if full in self.known else source)

    def _add(self, name: str) -> None:
        while name and name not in self.known:  # "bandgeo.scan.types.Specimen" -> "bandgeo.scan.types"
            name = name.rpartition(".")[0]
        if name:
            self.targets.add(name)


def import_graph() -> dict[str, set]:
    modules = _modules()
    known = set(modules)
    graph = {}
    for name, path in modules.items():
        visitor = _Imports(name, path.name == "__init__.py", known)
        visitor.visit(ast.parse(path.read_text(encoding="utf-8"), filename=str(path)))
        graph[name] = visitor.targets - {name}
    return graph


def cycles(graph: dict[str, set]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan), each sorted."""
    index, low, stack, on_stack, out = {}, {}, [], set(), []
    counter = [0]

    def visit(v):
        work = [(v, iter(sorted(graph.get(v, ()))))]
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        while work:
            node, children = work[-1]
            for w in children:
                if w not in index:
                    index[w] = low[w] = counter[0]
                    counter[0] += 1
                    stack.append(w)
                    on_stack.add(w)
                    work.append((w, iter(sorted(graph.get(w, ())))))
                    break
                if w in on_stack:
                    low[node] = min(low[node], index[w])
            else:
                work.pop()
                if work:
                    low[work[-1][0]] = min(low[work[-1][0]], low[node])
                if low[node] == index[node]:
                    component = []
                    while True:
                        w = stack.pop()
                        on_stack.discard(w)
                        component.append(w)
                        if w == node:
                            break
                    if len(component) > 1:
                        out.append(sorted(component))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return out


def test_the_cycle_finder_finds_a_planted_cycle():
    # analytic check of the checker itself: a -> b -> c -> a is one component, d hangs off it
    graph = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"a"}}
    assert cycles(graph) == [["a", "b", "c"]]
    assert cycles({"a": {"b"}, "b": set()}) == []


def test_the_graph_sees_lazy_imports():
    graph = import_graph()
    # bandgeo.batch.runner imports the pipeline inside a function: still an edge
    assert "bandgeo.pipeline" in graph["bandgeo.batch.runner"]
    assert "bandgeo.results" in graph["bandgeo.pipeline"]


def test_no_import_cycles_in_bandgeo():
    found = cycles(import_graph())
    assert found == [], "import cycles: " + "; ".join(" <-> ".join(c) for c in found)


if __name__ == "__main__":  # print the graph (for DEVELOPERS.md)
    for module, targets in sorted(import_graph().items()):
        print(module, "->", ", ".join(sorted(t for t in targets if t.startswith("bandgeo"))))
    print("cycles:", cycles(import_graph()) or "none")
