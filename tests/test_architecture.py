"""The house rules of the layout, read from the source: who may import whom, and no cycles.

Every import of the three rooms is read with :mod:`ast`, those inside functions included, and
resolved to a module of the package. The rules (DESIGN.md, "Layout"): algebra/ imports numpy
and scipy (and numba, the compiler of its own kernels), never the application or the reports;
reports/ imports nothing of simulate/ and of the algebra only its types (the exceptions);
simulate/ may import both; no module imports itself back through others, whether at module
level or inside a function. The strongly connected components of the import graph are
computed with networkx (the reference library for graph algorithms here).
"""

from __future__ import annotations

import ast
import importlib.util
import sys
from pathlib import Path

import networkx as nx
import pytest

ROOT = Path(__file__).resolve().parents[1]
ROOMS = ("algebra", "simulate", "reports")
PACKAGE = "cyclecheck"


def _modules() -> dict[str, Path]:
    found = {}
    for room in ROOMS:
        for path in sorted((ROOT / room).glob("*.py")):
            name = f"{PACKAGE}.{room}" if path.stem == "__init__" else \
                f"{PACKAGE}.{room}.{path.stem}"
            found[name] = path
    return found


MODULES = _modules()


def _imports(name: str, path: Path) -> list[tuple[str, int]]:
    """Every module imported by ``name`` (absolute names), with the line of the import."""
    package = name if path.stem == "__init__" else name.rsplit(".", 1)[0]
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    out: list[tuple[str, int]] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            out += [(alias.name, node.lineno) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[: len(base) - (node.level - 1)]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            # `from . import api` imports the submodule api: count it as such
            for alias in node.names:
                candidate = f"{module}.{alias.name}"
                out.append((candidate if candidate in MODULES else module, node.lineno))
        elif (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
              and node.func.attr == "import_module" and node.args
              and isinstance(node.args[0], ast.Constant)):
            # importlib.import_module(".api", __name__): the lazy names of a package
            target = str(node.args[0].value)
            out.append((importlib.util.resolve_name(target, package), node.lineno))
    return out


def _graph() -> nx.DiGraph:
    graph = nx.DiGraph()
    graph.add_nodes_from(MODULES)
    for name, path in MODULES.items():
        for target, _ in _imports(name, path):
            if target in MODULES and target != name:
                graph.add_edge(name, target)
    return graph


def _top(module: str) -> str:
    return module.split(".")[0]


STDLIB = set(sys.stdlib_module_names)


@pytest.mark.parametrize("name", sorted(m for m in MODULES if ".algebra" in m))
def test_algebra_imports_only_numpy_scipy_and_itself(name: str) -> None:
    """algebra/ imports the standard library, numpy, scipy, numba and itself, nothing else."""
    for target, line in _imports(name, MODULES[name]):
        if target.startswith(f"{PACKAGE}."):
            assert target.startswith(f"{PACKAGE}.algebra"), f"{name}:{line} imports {target}"
        else:
            assert _top(target) in STDLIB | {"numpy", "scipy", "numba", "__future__"}, \
                f"{name}:{line} imports {target}"


@pytest.mark.parametrize("name", sorted(m for m in MODULES if ".reports" in m))
def test_reports_never_import_the_application(name: str) -> None:
    """reports/ imports nothing of simulate/, and of the algebra only its exception types."""
    for target, line in _imports(name, MODULES[name]):
        assert not target.startswith(f"{PACKAGE}.simulate"), f"{name}:{line} imports {target}"
        if target.startswith(f"{PACKAGE}.algebra"):
            assert target == f"{PACKAGE}.algebra.exceptions", f"{name}:{line} imports {target}"
        assert _top(target) not in {"click", "simpy"}, f"{name}:{line} imports {target}"


def test_no_module_imports_itself_back() -> None:
    """The import graph of the package, function-level imports included, has no cycle."""
    graph = _graph()
    cycles = [sorted(c) for c in nx.strongly_connected_components(graph) if len(c) > 1]
    assert cycles == []


def test_the_reader_sees_imports_inside_functions() -> None:
    """The check is not vacuous: function-level and lazy imports are in the graph."""
    graph = _graph()
    # api imports compare inside a function; the package's lazy names point at api
    assert graph.has_edge(f"{PACKAGE}.simulate.api", f"{PACKAGE}.simulate.compare")
    assert graph.has_edge(f"{PACKAGE}.simulate", f"{PACKAGE}.simulate.api")
    assert graph.has_edge(f"{PACKAGE}.simulate", f"{PACKAGE}.algebra.exceptions")
    assert graph.number_of_edges() > 60
