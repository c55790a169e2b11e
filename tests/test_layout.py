"""The package layout: every module imports on its own, and imports never form a loop.

Reference: the import graph is read with the standard library's ``ast`` (no project
code is trusted to report its own imports) and searched for cycles with networkx's
``simple_cycles``, a general-purpose graph library.
"""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import networkx as nx

PACKAGE = Path(__file__).resolve().parents[1] / "xcheck"


def _module_name(path: Path) -> str:
    parts = path.relative_to(PACKAGE.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {_module_name(p): p for p in sorted(PACKAGE.rglob("*.py"))}


def _imports(path: Path, name: str) -> set[str]:
    """Every xcheck module ``path`` imports, at module level or inside functions."""
    found: set[str] = set()
    package = name if path.name == "__init__.py" else name.rpartition(".")[0]
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:  # relative import
                anchor = package.split(".")[: len(package.split(".")) - node.level + 1]
                base = ".".join(anchor + ([base] if base else []))
            if not base.startswith("xcheck"):
                continue
            for alias in node.names:
                target = f"{base}.{alias.name}"
                found.add(target if target in MODULES else base)
        elif isinstance(node, ast.Import):
            found.update(a.name for a in node.names if a.name in MODULES)
    found.discard(name)
    return {m for m in found if m in MODULES}


def import_graph() -> nx.DiGraph:
    graph = nx.DiGraph()
    graph.add_nodes_from(MODULES)
    for name, path in MODULES.items():
        graph.add_edges_from((name, target) for target in _imports(path, name))
    return graph


def test_the_import_graph_has_no_cycle() -> None:
    cycles = list(nx.simple_cycles(import_graph()))
    assert cycles == [], f"import loops: {cycles}"


def test_the_graph_sees_imports() -> None:
    # The check above must be able to fail: the graph holds the known edges.
    graph = import_graph()
    assert graph.has_edge("xcheck.compare", "xcheck.fitting.fit")
    assert graph.has_edge("xcheck.capture.scope_csv", "xcheck.capture.types")
    assert graph.number_of_edges() > 50


def test_a_cycle_is_detected() -> None:
    graph = import_graph()
    graph.add_edge("xcheck.fitting.fit", "xcheck.compare")  # a hypothetical loop
    assert list(nx.simple_cycles(graph))


def test_no_module_level_getattr_shims() -> None:
    offenders = [
        name for name, path in MODULES.items()
        if any(isinstance(n, ast.FunctionDef) and n.name == "__getattr__"
               for n in ast.parse(path.read_text(encoding="utf-8")).body)
    ]
    assert offenders == []


def test_every_module_imports() -> None:
    # In a fresh interpreter, in reverse name order (a leaf before the package that
    # uses it), so that an import that only works after some other import shows up.
    # ``xcheck.__main__`` is left out: importing it runs the command line.
    names = [n for n in sorted(MODULES, reverse=True) if n != "xcheck.__main__"]
    code = "import importlib\n" + "".join(f"importlib.import_module({n!r})\n" for n in names)
    result = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, timeout=300
    )
    assert result.returncode == 0, result.stderr[-2000:]
