"""A wrapped model whose predict_proba or decision_function has the wrong number of columns
for its classes is refused, naming the model, the shape and what was expected.

Found in the session-27 edge pass: a binary model whose ``predict_proba`` returned only the
positive class's column, shape (n, 1), stopped ``CalibrationWrapper`` and
``CostPolicyWrapper`` with a bare ``IndexError`` and ``PriorShiftWrapper`` with "Each row of
`proba` must sum to one" (an argument the user never passed); a three-class
``decision_function`` of one or two columns was blamed on the folds ("Cross-fitting failed on
the training part of a fold") or on the labels ("a binary map needs exactly two").
"""

from __future__ import annotations

import re

import numpy as np
import pytest
from sklearn.base import BaseEstimator, ClassifierMixin
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper


def _data(name: str):
    X, y = (load_breast_cancer if name == "cancer" else load_iris)(return_X_y=True)
    if name == "cancer":
        X, y = X[:200], y[:200]
    return StandardScaler().fit_transform(X), y


class PositiveColumnOnly(ClassifierMixin, BaseEstimator):
    """A logistic regression whose predict_proba keeps only the last column (``drop`` True)."""

    def __init__(self, drop: bool = True):
        self.drop = drop

    def fit(self, X, y):
        self.model_ = LogisticRegression(max_iter=5000).fit(X, y)
        self.classes_ = self.model_.classes_
        return self

    def predict_proba(self, X):
        p = self.model_.predict_proba(X)
        return p[:, -1:] if self.drop else p

    def predict(self, X):
        return self.model_.predict(X)


class ScoreColumns(ClassifierMixin, BaseEstimator):
    """A logistic regression with only a decision_function, cut to ``n_columns`` columns
    (1: the first column as a flat (n,) array)."""

    def __init__(self, n_columns: int = 3):
        self.n_columns = n_columns

    def fit(self, X, y):
        self.model_ = LogisticRegression(max_iter=5000).fit(X, y)
        self.classes_ = self.model_.classes_
        return self

    def decision_function(self, X):
        d = self.model_.decision_function(X)
        if d.ndim == 1:  # binary: scikit-learn's own (n,)
            return d
        return d[:, 0] if self.n_columns == 1 else d[:, : self.n_columns]

    def predict(self, X):
        return self.model_.predict(X)


WRAPPERS = [
    lambda m: CalibrationWrapper(m, method="platt"),
    lambda m: CalibrationWrapper(m, method="auto"),
    lambda m: CostPolicyWrapper(m, costs={"tp": 0, "fp": 1, "fn": 3, "tn": 0}, strategy="tuned"),
    lambda m: PriorShiftWrapper(m),
]


@pytest.mark.parametrize("make", WRAPPERS)
@pytest.mark.parametrize("frozen", [False, True])
def test_one_probability_column_is_refused_by_name(make, frozen):
    X, y = _data("cancer")
    model = PositiveColumnOnly()
    if frozen:
        model = FrozenEstimator(model.fit(X, y))
    with pytest.raises(ValueError, match=re.escape("returned shape")) as info:
        make(model).fit(X, y)
    text = str(info.value)
    assert "predict_proba" in text and "(n, 2): one column per class" in text
    assert "1)" in text  # the shape returned, (rows, 1)
    assert not isinstance(info.value, IndexError)


@pytest.mark.parametrize("make", WRAPPERS)
def test_one_probability_column_at_prediction_is_refused(make):
    # fitted on a model giving both columns, which then gives one: the predicting model's
    # output is checked too
    X, y = _data("cancer")
    wrapper = make(PositiveColumnOnly(drop=False)).fit(X, y)
    wrapper.estimator_.drop = True
    with pytest.raises(ValueError, match=r"The wrapped estimator \(PositiveColumnOnly\) returned "
                       r"shape \(5, 1\) from predict_proba for `X`; expected \(n, 2\)"):
        wrapper.predict_proba(X[:5])


@pytest.mark.parametrize("n_columns", [1, 2])
@pytest.mark.parametrize("frozen", [False, True])
@pytest.mark.parametrize("method", ["platt", "auto", "temperature"])
def test_multiclass_scores_of_too_few_columns_are_refused(n_columns, frozen, method):
    X, y = _data("iris")
    model = ScoreColumns(n_columns)
    if frozen:
        model = FrozenEstimator(model.fit(X, y))
    with pytest.raises(ValueError, match=r"from decision_function .*expected \(n, 3\): one "
                       r"column per class \(the model has 3 classes\)"):
        CalibrationWrapper(model, method=method).fit(X, y)


def test_well_formed_outputs_are_accepted():
    # the check refuses nothing scikit-learn's own conventions produce: full probability
    # columns, a binary decision_function of shape (n,) and a multiclass one of (n, k)
    X, y = _data("cancer")
    for model in (PositiveColumnOnly(drop=False), ScoreColumns(1)):
        p = CalibrationWrapper(model, method="platt").fit(X, y).predict_proba(X)
        assert p.shape == (200, 2) and np.all((p > 0) & (p < 1))
        np.testing.assert_allclose(p.sum(axis=1), 1.0)
    Xi, yi = _data("iris")
    p = CalibrationWrapper(ScoreColumns(3), method="temperature").fit(Xi, yi).predict_proba(Xi)
    assert p.shape == (150, 3) and np.all(np.isfinite(p))
