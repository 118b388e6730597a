"""A model whose predict_proba returns values outside [0, 1] is refused, naming the range.

Found while sweeping awkward input: the calibration and cost wrappers read such output as
probabilities without a word (the cost wrapper then returned "probabilities" of 1.4 and 3.1);
the prior-shift wrapper refused it under the name of an argument the user never passed.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

WRAPPERS = [CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper]


class StretchedProba(ClassifierMixin, BaseEstimator):
    """A logistic regression whose positive-class probability is stretched by ``scale`` about
    one half (``scale`` > 1 puts values outside [0, 1])."""

    def __init__(self, scale: float = 1.0):
        self.scale = scale

    def fit(self, X, y):
        self.model_ = LogisticRegression(max_iter=5000).fit(X, y)
        self.classes_ = self.model_.classes_
        self.n_features_in_ = X.shape[1]
        return self

    def predict_proba(self, X):
        p = 0.5 + (self.model_.predict_proba(X)[:, 1] - 0.5) * self.scale
        return np.column_stack([1.0 - p, p])

    def predict(self, X):
        return self.model_.predict(X)


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X[:, :5], y


@pytest.mark.parametrize("wrapper", WRAPPERS)
def test_heldout_probabilities_outside_unit_interval_refused(cancer, wrapper):
    X, y = cancer
    inner = StretchedProba(scale=1.5).fit(X[:300], y[:300])
    with pytest.raises(ValueError, match=r"`estimator` returned values from -0\.\d+ to 1\.\d+ "
                                         r"from predict_proba .*must lie in \[0, 1\]"):
        wrapper(FrozenEstimator(inner)).fit(X[300:], y[300:])


@pytest.mark.parametrize("wrapper", WRAPPERS)
def test_prediction_time_probabilities_outside_unit_interval_refused(cancer, wrapper):
    X, y = cancer
    inner = StretchedProba(scale=1.0).fit(X[:300], y[:300])
    fitted = wrapper(FrozenEstimator(inner)).fit(X[300:], y[300:])
    assert np.all((fitted.predict_proba(X[:20]) >= 0) & (fitted.predict_proba(X[:20]) <= 1))
    inner.scale = 1.5  # the same model object, now broken at prediction time
    with pytest.raises(ValueError, match="The wrapped estimator returned values from"):
        fitted.predict_proba(X[:20])


@pytest.mark.parametrize("wrapper", WRAPPERS)
def test_dask_heldout_probabilities_outside_unit_interval_refused(cancer, wrapper):
    # the Dask path checks each block as the in-memory path checks the whole
    import dask.array as da

    X, y = cancer
    inner = StretchedProba(scale=1.5).fit(X[:300], y[:300])
    Xd, yd = da.from_array(X[300:], chunks=100), da.from_array(y[300:], chunks=100)
    with pytest.raises(ValueError, match="`estimator` returned values from .* from predict_proba"):
        wrapper(FrozenEstimator(inner)).fit(Xd, yd)
