"""Every named warning class has a row in docs/warnings.md saying when it fires and what to do.

The classes are found two ways, so that a new one cannot slip past: every class defined in the
package's source whose name ends in ``Warning`` and which derives from a warning, and every
warning class the public subpackages export. A row is a table line of docs/warnings.md whose
first cell starts with the class name in backticks and which has a non-empty "when" and "what
to do" cell; where the first cell names a module, that module must export the class.
"""

from __future__ import annotations

import ast
import importlib
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
PAGE = ROOT / "docs" / "warnings.md"
PUBLIC = ("probwrap.calibration", "probwrap.decision", "probwrap.shift", "probwrap.metrics",
          "probwrap.scale")


def _defined_warning_classes() -> set[str]:
    """Names of classes in probwrap/ ending in ``Warning`` with a base whose name does too."""
    names = set()
    for path in (ROOT / "probwrap").rglob("*.py"):
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.ClassDef) and node.name.endswith("Warning"):
                bases = [ast.unparse(b) for b in node.bases]
                if any(b.split(".")[-1].endswith("Warning") for b in bases):
                    names.add(node.name)
    return names


def _exported_warning_classes() -> dict[str, type]:
    found = {}
    for module_name in PUBLIC:
        module = importlib.import_module(module_name)
        for name in getattr(module, "__all__", dir(module)):
            obj = getattr(module, name, None)
            if isinstance(obj, type) and issubclass(obj, Warning):
                found[name] = obj
    return found


def warning_rows(text: str) -> dict[str, list[str]]:
    """First-cell class name -> the row's cells, for table lines starting with a backticked name."""
    rows = {}
    for line in text.splitlines():
        match = re.match(r"^\|\s*`(\w+Warning)`", line)
        if match:
            cells = [c.strip() for c in line.strip().strip("|").split(" | ")]
            rows.setdefault(match.group(1), cells)
    return rows


def _problems(text: str, names: set[str]) -> list[str]:
    rows = warning_rows(text)
    problems = []
    for name in sorted(names):
        cells = rows.get(name)
        if cells is None:
            problems.append(f"{name}: no row")
        elif len(cells) < 3 or min(len(cells[1]), len(cells[-1])) < 20:
            problems.append(f"{name}: the row lacks a 'when' or a 'what to do' cell: {cells}")
    return problems


def test_the_search_finds_the_known_classes():
    # a floor, so that a broken search (no files, a renamed folder) cannot pass quietly
    defined = _defined_warning_classes()
    assert {"UnverifiedSharpeningWarning", "WeightScaleWarning", "RepeatedRowsWarning",
            "ClassMixtureMisfitWarning", "UnsortedLabelsWarning"} <= defined
    assert set(_exported_warning_classes()) <= defined | {"UserWarning", "Warning"}


def test_every_warning_class_has_a_row():
    names = _defined_warning_classes() | set(_exported_warning_classes())
    assert _problems(PAGE.read_text(encoding="utf-8"), names) == []


def test_the_module_a_row_names_exports_the_class():
    exported = _exported_warning_classes()
    for name, cells in warning_rows(PAGE.read_text(encoding="utf-8")).items():
        module = re.search(r"\(`(probwrap[\w.]*)`\)", cells[0])
        if module is None:
            continue
        assert getattr(importlib.import_module(module.group(1)), name, None) is exported.get(
            name, object()), f"{name}: docs/warnings.md names {module.group(1)}"


def test_every_warning_class_has_a_docstring():
    for name, cls in _exported_warning_classes().items():
        assert cls.__doc__ and len(cls.__doc__.split()) >= 10, name


@pytest.mark.parametrize("name", ["RepeatedRowsWarning", "WeightScaleWarning"])
def test_a_removed_row_is_caught(name):
    text = PAGE.read_text(encoding="utf-8")
    kept = "\n".join(line for line in text.splitlines()
                     if not line.startswith(f"| `{name}`"))
    assert _problems(kept, {name}) == [f"{name}: no row"]
