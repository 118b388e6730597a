"""Findings of the eighteenth session's prior-shift hunt (docs/small_data.md): no unlabelled rows.

Data: scikit-learn's bundled breast cancer set and statsmodels' bundled fair set; the
reference for the honest held-out accuracy is scikit-learn's own cross-validation.
"""

from __future__ import annotations

import warnings

import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X, 1 - y


def _fitted(X, y):
    model = make_pipeline(StandardScaler(), LogisticRegression())
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return PriorShiftWrapper(model, random_state=0).fit(X[:100], y[:100])


@pytest.mark.parametrize("call", ["adapt", "monitor"])
def test_no_unlabelled_rows_is_a_clear_error(cancer, call):
    # before: the base model's own "Found array with 0 sample(s) ... required by StandardScaler"
    X, y = cancer
    wrapper = _fitted(X, y)
    with pytest.raises(ValueError, match=rf"`X` passed to {call} has no rows"):
        if call == "adapt":
            wrapper.adapt(X[:0])
        else:
            wrapper.monitor(X[:0], batch_size=10)
    frozen = PriorShiftWrapper(FrozenEstimator(wrapper.estimator_)).fit(X[100:200], y[100:200])
    with pytest.raises(ValueError, match="`X` passed to adapt has no rows"):
        frozen.adapt(X[:0])
    frozen.adapt(X[200:201])  # one row is allowed (with its own warnings)
