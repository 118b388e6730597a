"""Fit parameters passed with a FrozenEstimator are not used, and the wrappers say so.

A frozen model is not refitted and every row given to fit is held out, so neither the model's
fit parameters nor a splitter's `groups` reach anything. Before session 28 they were dropped
without a word (sklearn's own FrozenEstimator.fit ignores them too).
"""

import warnings

import numpy as np
import pytest
import sklearn
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper


@pytest.fixture(scope="module")
def frozen_and_rows():
    # scikit-learn's bundled breast-cancer set: the model fitted on 100 rows, 100 held out
    X, y = load_breast_cancer(return_X_y=True)
    X, y = X[:200, :5], y[:200]
    model = LogisticRegression(max_iter=2000).fit(X[:100], y[:100])
    return model, X[100:], y[100:]


def _wrappers(model):
    return [CalibrationWrapper(FrozenEstimator(model), method="platt"),
            CostPolicyWrapper(FrozenEstimator(model), costs={"tp": 0, "fp": 1, "fn": 5, "tn": 0},
                              strategy="tuned"),
            PriorShiftWrapper(FrozenEstimator(model))]


@pytest.mark.parametrize("routing", [False, True])
def test_unused_fit_params_warn(frozen_and_rows, routing):
    model, X, y = frozen_and_rows
    groups = np.arange(y.shape[0]) % 5
    with sklearn.config_context(enable_metadata_routing=routing):
        for wrapper in _wrappers(model):
            with pytest.warns(UserWarning, match=r"\['groups'\] are not used.*FrozenEstimator"):
                wrapper.fit(X, y, groups=groups)
            # the weights are the wrapper's own, not a fit parameter: no such warning
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                wrapper.fit(X, y, sample_weight=np.linspace(0.5, 2.0, y.shape[0]))
            assert not [c for c in caught if "are not used" in str(c.message)]
