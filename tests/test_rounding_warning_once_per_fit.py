"""Rows of a model's probabilities that sum to one only within rounding are divided by their
sums with one warning per fit, not one per fold model.

Found in the session-27 edge pass: a model whose ``predict_proba`` is float16 (rows sum to one
within ~2.4e-4) drew five alike warnings from one ``CalibrationWrapper.fit`` (one per fold),
eight from ``PriorShiftWrapper.fit`` and six from ``adapt``, against the rule that a warning is
said once per call (docs/warnings.md).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper


class HalfPrecision(ClassifierMixin, BaseEstimator):
    """A logistic regression whose predict_proba is rounded to float16."""

    def fit(self, X, y):
        self.model_ = LogisticRegression(max_iter=5000).fit(X, y)
        self.classes_ = self.model_.classes_
        return self

    def predict_proba(self, X):
        return self.model_.predict_proba(X).astype(np.float16).astype(float)

    def predict(self, X):
        return self.model_.predict(X)


@pytest.fixture(scope="module")
def data():
    X, y = load_breast_cancer(return_X_y=True)
    return StandardScaler().fit_transform(X[:250]), y[:250]


def _rounding_warnings(caught):
    return [w for w in caught if "divided by their sums" in str(w.message)]


@pytest.mark.parametrize("make", [
    lambda m, j: CalibrationWrapper(m, method="platt", n_jobs=j),
    lambda m, j: CostPolicyWrapper(m, costs={"fp": 1, "fn": 3}, strategy="tuned", n_jobs=j),
])
def test_one_warning_for_the_folds_of_a_fit(data, make):
    X, y = data
    n_jobs = None
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        wrapper = make(HalfPrecision(), n_jobs).fit(X, y)
    found = _rounding_warnings(caught)
    assert len(found) == 1
    assert "in 5 of 5 folds" in str(found[0].message)
    p = wrapper.predict_proba(X)
    assert np.all(np.isfinite(p))
    np.testing.assert_allclose(p.sum(axis=1), 1.0, atol=1e-6)  # (rows within 1e-6 are kept)


def test_prior_shift_fold_models_warn_once(data):
    X, y = data
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        wrapper = PriorShiftWrapper(HalfPrecision()).fit(X[:200], y[:200])
        fit_found = _rounding_warnings(caught)
        caught.clear()
        wrapper.adapt(X[200:])
        adapt_found = _rounding_warnings(caught)
    fold_fit = [w for w in fit_found if "fold models" in str(w.message).lower()]
    fold_adapt = [w for w in adapt_found if "fold models" in str(w.message).lower()]
    # held-out rows (one warning) and the fold models scoring the labelled rows (one)
    assert len(fold_fit) == 2
    assert len(fold_adapt) == 1
    assert "counted over 5 of the 5 fold models" in str(fold_adapt[0].message)
    assert len(fit_found) <= 4 and len(adapt_found) == 2


def test_prior_shift_refit_model_warns_once_per_fit(data):
    """The refit model's probabilities of the labelled rows were read twice at ``fit`` (the
    choice of the predicting models, the repeat counts), each saying its rounding warning:
    two alike warnings from one call. Now X is scored once and the warning said once."""
    X, y = data
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        wrapper = PriorShiftWrapper(HalfPrecision()).fit(X[:200], y[:200])
    refit = [w for w in _rounding_warnings(caught)
             if str(w.message).startswith("The wrapped estimator")]
    assert len(refit) == 1
    assert "returned" in str(refit[0].message)
    assert wrapper._refit_scored is None  # the fitted wrapper keeps no copy of them
    p = wrapper.predict_proba(X[200:])
    np.testing.assert_allclose(p.sum(axis=1), 1.0, atol=1e-6)
