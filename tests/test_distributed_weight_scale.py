"""``PriorShiftWrapper.fit`` on Dask rows read from their tally warns about the scale of
``sample_weight`` as the in-memory fit does.

In memory the calibration inside the wrapper reads the labelled weights by the maps' rule (row
counts when they sum to at least the rows, else relative weights counted as Kish's size), and a
``WeightScaleWarning`` says when that reading moves with their scale
(tests/test_prior_shift_weight_scale.py). Before 4 December 2026 a Dask or Spark fit of more
than 20,000 rows, read from the bins of their tally, never warned: on 30,000 breast-cancer rows
(resampled with 2 % noise) with weights 0.5-2, the same times 0.001 or 0.5, and whole weights
times 3, the in-memory fit warned 4 times and the Dask fit 0 times; now 4 and 4, and neither
warns for whole weights nor for weights summing to their Kish's size. The tally now keeps the
weights' shared whole factor (``weight_factor``), checked here against ``numpy.gcd``. The tally
path is forced on fewer rows (``tally_path``). Data: scikit-learn's bundled breast cancer.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.calibration import WeightScaleWarning
from probwrap.scale import merge_tallies, tally_scores

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X[:200],
                                                                                  y[:200])
    w = np.random.default_rng(0).uniform(0.5, 2.0, 369)
    return FrozenEstimator(model), X[200:], y[200:], w


def _scale_messages(fn):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        fn()
    return [str(c.message) for c in caught if issubclass(c.category, WeightScaleWarning)]


@pytest.mark.parametrize("kind", ["fractional", "tiny", "whole", "whole times 3"])
def test_tally_fit_warns_as_the_in_memory_fit(cancer, tally_path, kind):
    model, X, y, w = cancer
    weights = {"fractional": w, "tiny": w * 1e-3, "whole": np.rint(2 * w),
               "whole times 3": 3 * np.rint(2 * w)}[kind]
    mem = _scale_messages(lambda: PriorShiftWrapper(model).fit(X, y, sample_weight=weights))
    dist = _scale_messages(lambda: PriorShiftWrapper(model).fit(
        da.from_array(X, chunks=(100, 30)), da.from_array(y, chunks=100),
        sample_weight=da.from_array(weights, chunks=100)))
    assert len(dist) == len(mem) == (0 if kind == "whole" else 1)
    if kind == "fractional":
        assert "not all whole numbers" in dist[0] and "tally" in dist[0]
    elif kind == "whole times 3":
        assert "multiple of 3" in dist[0]
    elif kind == "tiny":
        assert "sums to less than the number of rows" in dist[0]


def test_tally_keeps_the_shared_whole_factor():
    w = np.array([6.0, 12.0, 18.0, 30.0, 0.0, 42.0])
    parts = [tally_scores([0.1, 0.2, 0.3], [0, 1, 1], sample_weight=w[:3]),
             tally_scores([0.4, 0.5, 0.6], [1, 0, 1], sample_weight=w[3:])]
    assert merge_tallies(parts).weight_factor == int(np.gcd.reduce(w[w > 0].astype(int))) == 6
    half = tally_scores([0.1, 0.2], [0, 1], sample_weight=[1.5, 2.0])
    assert (parts[0] + half).weight_factor == -1
    assert tally_scores([0.1, 0.2], [0, 1]).weight_factor == 1
