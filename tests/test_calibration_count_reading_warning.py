"""CalibrationWrapper says when weights that are not counts are counted as rows.

Weights that sum to at least the rows are row frequencies for the calibration maps
(docs/weights.md), so multiplying them by 1,000 means a thousand copies of each row and moves
the map. For weights that are not whole numbers (survey, importance weights) that reading is
doubtful; PriorShiftWrapper.fit warned about it, CalibrationWrapper did not: on scikit-learn's
wine set (frozen logistic regression, 150 rows, weights drawn from 0.2-3) x1,000 moved a Platt
map's probabilities by 0.37 against x1e-3 without a word (x1e-3 itself warned).
"""

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper
from probwrap.calibration import WeightScaleWarning


@pytest.fixture(scope="module")
def wine():
    X, y = load_wine(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    model = LogisticRegression(C=0.3, max_iter=2000).fit(X[::2], y[::2])
    return FrozenEstimator(model), X[1::2], y[1::2]


def _messages(model, X, y, w, method):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        CalibrationWrapper(model, method=method).fit(X, y, sample_weight=w)
    return [str(c.message) for c in caught if issubclass(c.category, WeightScaleWarning)]


@pytest.mark.parametrize("method", ["platt", "auto"])
def test_fractional_weights_counted_as_rows_warn(wine, method):
    model, X, y = wine
    w = np.random.default_rng(28).uniform(0.2, 3.0, size=y.shape[0]) * 1000
    found = _messages(model, X, y, w, method)
    assert any("read as row counts" in m and "CalibrationWrapper" in m for m in found), found


def test_counts_and_unit_weights_stay_quiet(wine):
    model, X, y = wine
    counts = np.random.default_rng(28).integers(1, 4, size=y.shape[0]).astype(float)
    for w in (counts, np.ones(y.shape[0])):
        assert not [m for m in _messages(model, X, y, w, "platt") if "read as row counts" in m]
