"""Read tunelab's package graph from its import statements (function-level ones included).

Run ``.venv/bin/python tests/package_graph.py`` to print it: one line per package with the packages
it imports, then any rule it breaks (see ``tests/test_package_graph.py``).
"""

from __future__ import annotations

import ast
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1] / "tunelab"
# Where optuna does real work: storage, sampler and pruners; fANOVA and PED-ANOVA; the spec's sampling calls.
OPTUNA_ALLOWED = ("tunelab.store.", "tunelab.engine.", "tunelab.insight._importance_methods", "tunelab.space._spec")


def _modules() -> dict[str, Path]:
    out = {}
    for path in sorted(ROOT.rglob("*.py")):
        parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
        if parts[-1] == "__init__":
            parts = parts[:-1]
        out[".".join(parts)] = path
    return out


def _imports(module: str, path: Path) -> list[tuple[str, int]]:
    """Every module name an import statement in ``path`` names, with its line (relative imports resolved)."""
    tree = ast.parse(path.read_text(encoding="utf-8"), str(path))
    package = module if path.name == "__init__.py" else module.rpartition(".")[0]
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            found += [(alias.name, node.lineno) for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            base = node.module or ""
            if node.level:
                anchor = package.split(".")
                anchor = anchor[: len(anchor) - node.level + 1]
                base = ".".join(anchor + ([base] if base else []))
            found.append((base, node.lineno))
            found += [(f"{base}.{alias.name}", node.lineno) for alias in node.names]  # `from pkg import _mod`
    return found


def package_of(module: str) -> str:
    """``tunelab.engine._search`` -> ``engine``; top-level modules are their own package (``cli``)."""
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else parts[0]


def optuna_importers() -> list[tuple[str, int]]:
    return sorted({(module, line) for module, path in _modules().items() for name, line in _imports(module, path)
                   if name == "optuna" or name.startswith("optuna.")})


def _private_module(name: str, modules: dict[str, Path]) -> bool:
    """Whether ``name`` is a package's private module, ``tunelab.X._y``."""
    parts = name.split(".")
    return (parts[0] == "tunelab" and len(parts) >= 3 and name in modules and parts[2].startswith("_")
            and not parts[2].startswith("__"))


def private_crossings() -> list[tuple[str, str, int]]:
    """Imports of another package's private module: ``tunelab.X._y`` from outside ``tunelab.X``."""
    modules = _modules()
    out = []
    for module, path in modules.items():
        for name, line in _imports(module, path):
            if _private_module(name, modules) and package_of(module) != name.split(".")[1]:
                out.append((module, name, line))
    return sorted(set(out))


def private_imports_from(folder: Path) -> list[tuple[str, str, int]]:
    """Imports of any tunelab package's private module (``tunelab.X._y``) by the scripts in ``folder``
    (benchmarks, studies): they use tunelab as its users do, through the packages' public names."""
    modules = _modules()
    out = []
    for path in sorted(folder.rglob("*.py")):
        for name, line in _imports(path.stem, path):
            if _private_module(name, modules):
                out.append((str(path.relative_to(folder.parent)), name, line))
    return sorted(set(out))


def import_edges(detail: bool = False) -> set[tuple]:
    """Package -> package edges (with ``detail``: module -> imported package, and the line)."""
    modules = _modules()
    edges: set[tuple] = set()
    for module, path in modules.items():
        for name, line in _imports(module, path):
            parts = name.split(".")
            if parts[0] != "tunelab" or len(parts) < 2:
                continue
            target = parts[1]
            if f"tunelab.{target}" not in modules or target == package_of(module):
                continue
            edges.add((module, f"tunelab.{target}", line) if detail else (package_of(module), target))
    return edges


def cycles(edges: set[tuple]) -> list[list[str]]:
    """Strongly connected groups of more than one package (Tarjan's algorithm), each sorted."""
    graph: dict[str, set[str]] = {}
    for a, b in edges:
        graph.setdefault(a, set()).add(b)
        graph.setdefault(b, set())
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    stack: list[str] = []
    on: set[str] = set()
    out: list[list[str]] = []

    def visit(v: str) -> None:
        index[v] = low[v] = len(index)
        stack.append(v)
        on.add(v)
        for w in sorted(graph[v]):
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            group = []
            while True:
                w = stack.pop()
                on.discard(w)
                group.append(w)
                if w == v:
                    break
            if len(group) > 1:
                out.append(sorted(group))

    for v in sorted(graph):
        if v not in index:
            visit(v)
    return sorted(out)


def main() -> int:
    edges = import_edges()
    for package in sorted({a for a, _ in edges} | {b for _, b in edges}):
        targets = sorted(b for a, b in edges if a == package)
        print(f"{package:8} -> {', '.join(targets) if targets else '(nothing)'}")
    problems = [f"cycle: {' -> '.join(loop)}" for loop in cycles(edges)]
    problems += [f"private import: {m} imports {t} (line {n})" for m, t, n in private_crossings()]
    problems += [f"optuna import: {m} (line {n})" for m, n in optuna_importers() if not m.startswith(OPTUNA_ALLOWED)]
    for line in problems:
        print(line)
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
