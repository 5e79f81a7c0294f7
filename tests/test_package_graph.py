"""The package graph holds: read from every import statement in tunelab/, function-level ones included.

Rules (DEVELOPERS.md, "Layout"): optuna is imported only where it does real work; no module imports
another package's private (``_name``) module; no two packages import each other, directly or round
a longer loop.  ``python tests/package_graph.py`` prints the graph these tests read.
"""

from __future__ import annotations

from package_graph import (
    OPTUNA_ALLOWED,
    ROOT,
    cycles,
    import_edges,
    optuna_importers,
    private_crossings,
    private_imports_from,
)


def test_optuna_is_imported_only_by_the_store_the_engine_the_importance_adapter_and_the_space_spec():
    outside = [f"{module} (line {line})" for module, line in optuna_importers()
               if not module.startswith(OPTUNA_ALLOWED)]
    assert outside == [], "optuna imported outside its places: " + ", ".join(outside)


def test_no_module_imports_another_packages_private_module():
    crossings = [f"{module} imports {target} (line {line})" for module, target, line in private_crossings()]
    assert crossings == [], "; ".join(crossings)


def test_benchmarks_and_studies_use_only_the_packages_public_names():
    found = [f"{script} imports {target} (line {line})" for folder in ("benchmarks", "studies")
             for script, target, line in private_imports_from(ROOT.parent / folder)]
    assert found == [], "; ".join(found)


def test_no_import_cycle_between_packages():
    loops = cycles(import_edges())
    assert loops == [], "import cycles between packages: " + "; ".join(" -> ".join(loop) for loop in loops)


def test_the_graph_reader_sees_function_level_imports_and_cycles():
    edges = {("a", "b"), ("b", "c"), ("c", "a"), ("c", "d")}
    assert cycles(edges) == [["a", "b", "c"]]
    assert ("tunelab.ops._run", "tunelab.engine") in {(m, t) for m, t, _ in import_edges(detail=True)}
