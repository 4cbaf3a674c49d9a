"""No import cycle inside the package, lazy imports inside functions included.

A static scan: every ``.py`` file under ``src/switchlaw`` is parsed with :mod:`ast`, every
``import`` / ``from ... import`` statement anywhere in it (module level, functions, methods,
``if TYPE_CHECKING`` blocks) becomes an edge to the module it names (``from pkg import name``
points at ``pkg.name`` when that is a module, else at ``pkg``), and the strongly connected
components of that graph are found with :func:`scipy.sparse.csgraph.connected_components`
(Tarjan's algorithm; Tarjan, R. E. (1972). Depth-first search and linear graph algorithms.
*SIAM J. Comput.* 1:146-160). A component of more than one module is a cycle.
"""

from __future__ import annotations

import ast
from pathlib import Path

import numpy as np
from scipy.sparse import csr_matrix
from scipy.sparse.csgraph import connected_components

PACKAGE = Path(__file__).resolve().parents[1] / "src" / "switchlaw"


def _modules(root: Path) -> dict[str, Path]:
    """Dotted module name -> file, packages named by their ``__init__``."""
    found = {}
    for path in sorted(root.rglob("*.py")):
        parts = list(path.relative_to(root.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts.pop()
        found[".".join(parts)] = path
    return found


def _edges(name: str, path: Path, modules: dict[str, Path]) -> set[str]:
    """Modules of the package that ``name`` imports, anywhere in its file."""
    is_package = path.name == "__init__.py"
    package = name if is_package else name.rpartition(".")[0]
    targets = set()
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"), filename=str(path))):
        if isinstance(node, ast.Import):
            targets.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")
                base = base[:len(base) - (node.level - 1)]
                source = ".".join(base + ([node.module] if node.module else []))
            else:
                source = node.module or ""
            for alias in node.names:
                submodule = f"{source}.{alias.name}"
                targets.add(submodule if submodule in modules else source)
    return {target for target in targets if target in modules and target != name}


def import_cycles(root: Path = PACKAGE) -> list[list[str]]:
    """Each import cycle of the package, as the sorted modules of one strongly connected component."""
    modules = _modules(root)
    names = sorted(modules)
    index = {name: k for k, name in enumerate(names)}
    rows, cols = [], []
    for name in names:
        for target in _edges(name, modules[name], modules):
            rows.append(index[name])
            cols.append(index[target])
    graph = csr_matrix((np.ones(len(rows)), (rows, cols)), shape=(len(names), len(names)))
    count, labels = connected_components(graph, directed=True, connection="strong")
    groups = [[names[k] for k in np.flatnonzero(labels == c)] for c in range(count)]
    return sorted(group for group in groups if len(group) > 1)


def test_scan_finds_a_planted_cycle(tmp_path):
    # The scanner itself, on a tiny package with one cycle made only of a lazy import inside a
    # function (a -> b at module level, b -> a inside a function) and one acyclic module.
    package = tmp_path / "switchlaw"
    (package / "sub").mkdir(parents=True)
    (package / "__init__.py").write_text("")
    (package / "sub" / "__init__.py").write_text("from ._a import f\n")
    (package / "sub" / "_a.py").write_text("from ._b import g\n\ndef f():\n    return g()\n")
    (package / "sub" / "_b.py").write_text("def g():\n    from . import _a\n    return _a\n")
    (package / "_c.py").write_text("from .sub import f\nimport numpy\n")
    assert import_cycles(package) == [["switchlaw.sub._a", "switchlaw.sub._b"]]


def test_no_import_cycles_in_the_package():
    cycles = import_cycles()
    assert cycles == [], "import cycles: " + "; ".join(" <-> ".join(group) for group in cycles)
