"""Memory of two steps of every tuned ``CostPolicyWrapper`` fit, checked without timing.

``choice_weights`` (the relative reading of weights for the anchor map and the settling test)
once made four row-long float temporaries even for unit weights, and the 1-d X check imported
``sklearn.ensemble`` and ``sklearn.calibration`` at every first fit: together they raised the
fit's traced peak from 3.8x to 5.9x the scores at 1e6 rows (``benchmarks/performance.py``;
docs/performance.md, last section). Bounds are generous multiples of the array's size, read by
``tracemalloc`` (the smallest peak of three calls, ``tests/_memory_helpers.py``).
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

import probwrap
from probwrap._validation import loaded_classes
from probwrap._weights import choice_weights

from ._memory_helpers import traced_peak

N = 200_000  # 1.6 MB of float64: far above the interpreter's own small allocations


def _kish_reference(w: np.ndarray) -> np.ndarray:
    """Kish's (1965) effective sample size ``(sum w)**2 / sum w**2`` as the total of the
    rescaled weights, written out with the same operations (docs/weights.md)."""
    u = w / w.max()
    return u * (u.sum() / (u @ u))


@pytest.mark.parametrize("unit", [
    np.broadcast_to(np.float64(1.0), N),  # how a fit without weights passes them (a view)
    np.ones(N),
])
def test_unit_weights_are_returned_without_a_row_long_temporary(unit):
    peak, out = traced_peak(lambda: choice_weights(unit))
    assert out is unit
    # before: w / max, the rescaled copy and np.allclose's temporaries, about 4 x 8N bytes
    assert peak < 0.1 * 8 * N  # (8N bytes: the view's own nbytes counts every row too)


def test_equal_weights_other_than_one_become_exact_ones_with_one_array():
    w = np.full(N, 2.5)
    peak, out = traced_peak(lambda: choice_weights(w))
    assert out.dtype == np.float64 and out.shape == w.shape
    assert np.array_equal(out, np.ones(N))  # Kish's size of equal weights is the rows
    assert np.array_equal(out, _kish_reference(w))
    assert peak < 1.5 * w.nbytes  # the returned array itself is one (before: 4.25x)


def test_unequal_weights_rescaled_with_one_array_and_the_same_values():
    rng = np.random.default_rng(7)
    w = rng.uniform(0.2, 3.0, N)
    peak, out = traced_peak(lambda: choice_weights(w))
    expected = _kish_reference(w)
    assert out.tobytes() == expected.tobytes()  # bit for bit
    assert out.sum() == pytest.approx(w.sum() ** 2 / (w @ w), rel=1e-12)
    # before: 4.25 x 8N bytes; now the rescaled array and the whole-number test of
    # whole_counts (a copy of the positive weights and their rounding, freed before): 2.1x
    assert peak < 2.75 * w.nbytes
    # weights already on Kish's scale (here 0/1) come back as they are, compared in blocks
    w01 = (rng.random(N) < 0.7).astype(float)
    peak, out = traced_peak(lambda: choice_weights(w01))
    assert out is w01 and peak < 2.75 * w01.nbytes  # before: 4.25x; now 1.7x


def test_loaded_classes_reads_only_imported_modules():
    assert loaded_classes("probwrap_no_such_module_anywhere", "Pipeline") == ()
    from sklearn.pipeline import FeatureUnion, Pipeline

    assert loaded_classes("sklearn.pipeline", "Pipeline", "FeatureUnion") == (
        Pipeline, FeatureUnion)
    assert loaded_classes("sklearn.pipeline", "NotAClass") == ()


def test_a_tuned_fit_of_a_linear_model_imports_no_ensemble_module():
    # a fresh interpreter: this test process has imported these modules long ago
    code = textwrap.dedent("""
        import json
        import sys
        import numpy as np
        from sklearn.frozen import FrozenEstimator
        from sklearn.linear_model import LogisticRegression
        from probwrap import CostPolicyWrapper
        rng = np.random.default_rng(0)
        X = rng.normal(size=(3000, 3))
        y = (rng.random(3000) < 1 / (1 + np.exp(-2 * X[:, 0]))).astype(int)
        model = FrozenEstimator(LogisticRegression().fit(X[:500], y[:500]))
        before = set(sys.modules)
        policy = CostPolicyWrapper(model, costs={"fp": 1, "fn": 4}, strategy="tuned",
                                   random_state=0).fit(X, y)
        new = sorted(m for m in set(sys.modules) - before if m.startswith("sklearn."))
        print(json.dumps([new, 0.0 < policy.cutoff_ < 1.0]))
    """)
    env = dict(os.environ)
    env["PYTHONPATH"] = str(Path(probwrap.__file__).parent.parent)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                          check=True, timeout=300, env=env)
    new, ok = json.loads(done.stdout.strip().splitlines()[-1])
    assert ok
    # before: sklearn.ensemble, sklearn.calibration, sklearn.compose, sklearn.multiclass and
    # sklearn.pipeline with their submodules (75 modules)
    assert not any(m.startswith(("sklearn.ensemble", "sklearn.calibration"))
                   for m in new), new
