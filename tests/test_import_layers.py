"""The import graph of the whole package: no circles, and the layer rule of DESIGN.md.

Invariants of the package's structure, read from the source with ``ast`` (imports inside
functions count too: a lazy import is still a dependency a reader has to follow):

- no module reaches itself through imports (no import circles);
- a module imports only from its own layer or lower ones: shared lower modules
  (``_validation``, ``_predictions``) < array core (layer 1) < scale layer < wrappers (layer 2)
  < surfaces (layer 3);
- the wrappers reach the scale layer through one narrow entry, ``probwrap.scale._entry``;
- nothing below layer 3 imports matplotlib.
"""

from __future__ import annotations

import ast
from pathlib import Path

import probwrap

ROOT = Path(probwrap.__file__).parent

#: rank of each top-level part of the package (a module imports only equal or lower ranks)
LAYERS = {
    "_validation": 0,
    "_predictions": 0,
    "_version": 0,
    "_feature_input": 0,  # 1-d X / repeated column names refused before fitting (wrappers)
    "_row_hash": 0,  # the 64-bit row key (copies kept in one fold; rows also labelled)
    "_packed_sort": 0,  # one-sort score order with the classes (cutoff search, isotonic fit)
    "calibration": 1,
    "decision": 1,
    "shift": 1,
    "metrics": 1,
    "datasets": 1,
    "late_labels": 1,
    "scale": 2,
    "aggregated": 2,
    "_heldout": 3,
    "_calibration_wrapper": 3,
    "_calibration_auto": 3,
    "_calibration_shares": 3,  # the class-shares entry of auto (reads calibration maps)
    "_cost_policy": 3,
    "_cost_policy_summary": 3,
    "_cost_policy_rules": 3,
    "_column_models": 3,  # scores as a fitted model, for the wrappers on computed scores
    "_prior_shift": 3,
    "_prior_shift_tallied": 3,
    "_prior_shift_output_map": 3,  # PriorShiftWrapper's output map on small sets (fits auto)
    "_prior_shift_features": 3,  # PriorShiftWrapper's opt-in feature check (feature_check_rows)
    "_weights": 1,  # the shared warnings about how sample_weight is read (wrappers, PriorEstimator)
    "__init__": 3,  # the package's top level: the wrappers' public face
    "plot": 4,
    "report": 4,
    "cli": 4,
    "__main__": 4,  # python -m probwrap: the command line
}
WRAPPERS = {name for name, rank in LAYERS.items() if rank == 3}
SCALE_ENTRY = "probwrap.scale._entry"


def _module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts = parts[:-1]
    return ".".join(parts)


def _modules() -> dict[str, Path]:
    return {_module_name(p): p for p in ROOT.rglob("*.py")}


def _resolve(name: str, modules: dict[str, Path]) -> str | None:
    """The probwrap module ``name`` refers to (a module, or the package holding a name)."""
    while name and name not in modules:
        name = name.rpartition(".")[0]
    return name or None


def _graph() -> tuple[dict[str, set[str]], dict[str, set[str]]]:
    """probwrap-internal edges per module, and the outside top-level packages each imports."""
    modules = _modules()
    graph: dict[str, set[str]] = {}
    outside: dict[str, set[str]] = {}
    for name, path in modules.items():
        package = name if path.name == "__init__.py" else name.rpartition(".")[0]
        deps: set[str] = set()
        ext: set[str] = set()
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [alias.name for alias in node.names]
            elif isinstance(node, ast.ImportFrom):
                if node.level:
                    base = package.split(".")
                    base = base[: len(base) - (node.level - 1)]
                    stem = ".".join([*base, node.module] if node.module else base)
                    # "from . import x" may name a submodule
                    targets = [f"{stem}.{a.name}" for a in node.names] if not node.module else [
                        stem
                    ]
                else:
                    targets = [node.module or ""]
                    targets += [f"{node.module}.{a.name}" for a in node.names]
            for target in targets:
                if target == "probwrap" or target.startswith("probwrap."):
                    dep = _resolve(target, modules)
                    if dep is not None and dep != name:
                        deps.add(dep)
                elif target:
                    ext.add(target.split(".")[0])
        graph[name] = deps
        outside[name] = ext
    return graph, outside


def _part(module: str) -> str:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else "__init__"


def test_every_part_of_the_package_has_a_layer():
    graph, _ = _graph()
    assert {_part(m) for m in graph} <= set(LAYERS), {_part(m) for m in graph} - set(LAYERS)


def test_no_import_circles_anywhere_in_the_package():
    graph, _ = _graph()
    state: dict[str, str] = {}

    def visit(node: str, stack: list[str]) -> None:
        state[node] = "open"
        for dep in sorted(graph.get(node, ())):
            if state.get(dep) == "open":
                cycle = [*stack, node][[*stack, node].index(dep):]
                raise AssertionError(f"import circle: {' -> '.join([*cycle, dep])}")
            if dep not in state:
                visit(dep, [*stack, node])
        state[node] = "done"

    for node in sorted(graph):
        if node not in state:
            visit(node, [])


def test_the_graph_sees_lazy_and_relative_imports():
    # the checker itself: a function-level relative import is an edge (else the tests above
    # could pass by seeing nothing)
    graph, _ = _graph()
    assert SCALE_ENTRY in graph["probwrap._heldout"]
    assert "probwrap.report._binary_rules" in graph["probwrap.report._content"]


def test_modules_import_only_their_own_layer_or_lower():
    graph, _ = _graph()
    wrong = []
    for module, deps in graph.items():
        for dep in deps:
            if LAYERS[_part(dep)] > LAYERS[_part(module)]:
                wrong.append(f"{module} -> {dep}")
    assert not wrong, "imports up the layers:\n" + "\n".join(sorted(wrong))


def test_wrappers_reach_the_scale_layer_through_one_entry():
    graph, _ = _graph()
    wrong = [f"{m} -> {d}" for m, deps in graph.items() if _part(m) in WRAPPERS
             for d in deps if _part(d) == "scale" and d != SCALE_ENTRY]
    assert not wrong, "\n".join(sorted(wrong))


def test_nothing_below_the_surfaces_imports_matplotlib():
    _, outside = _graph()
    wrong = [m for m, ext in outside.items() if "matplotlib" in ext and LAYERS[_part(m)] < 4]
    assert not wrong, wrong
