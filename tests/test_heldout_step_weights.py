"""Weights for a Pipeline's final step, passed by name beside ``sample_weight``.

A Pipeline's ``fit`` takes no ``sample_weight`` of its own, so the wrappers warn that the model
is fitted without weights. The warning now says how to weight it too (pass the weights to the
final step by name), and passing them that way no longer draws the warning that the model is
fitted without weights, which was then wrong: the weights did reach the model (session 25; both
asserted below fail on the code before).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, PriorShiftWrapper


def _data():
    X, y = load_breast_cancer(return_X_y=True)
    w = np.random.default_rng(0).integers(1, 4, y.shape[0]).astype(float)
    return X, y, w


def _model():
    return make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))


def test_the_warning_names_the_step_to_weight():
    X, y, w = _data()
    with pytest.warns(UserWarning, match=r"logisticregression__sample_weight=w"):
        CalibrationWrapper(_model(), method="platt", random_state=0).fit(X, y, sample_weight=w)


@pytest.mark.parametrize("wrapper", [CalibrationWrapper, PriorShiftWrapper])
def test_weights_given_to_the_step_reach_it_without_the_warning(wrapper):
    X, y, w = _data()
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        model = wrapper(_model(), random_state=0).fit(
            X, y, sample_weight=w, logisticregression__sample_weight=w)
    assert not [c for c in caught if "does not accept" in str(c.message)]
    # the refit model is scikit-learn's Pipeline fitted with the step's weights
    reference = _model().fit(X, y, logisticregression__sample_weight=w)
    unweighted = _model().fit(X, y)
    coef = model.estimator_[-1].coef_
    np.testing.assert_allclose(coef, reference[-1].coef_, rtol=1e-6, atol=1e-8)
    assert np.max(np.abs(coef - unweighted[-1].coef_)) > 1e-3
