"""A DataFrame with repeated column names given to a ``ColumnTransformer`` inside a wrapper:
one short error naming the step, under every supported scikit-learn.

scikit-learn 1.9.1 refuses such a frame in any fit ("Expected unique column names"), and the
wrappers said so before any fold (tests/test_feature_input_composites.py). scikit-learn 1.6.1
accepts it in fit, but its ``ColumnTransformer``, given a DataFrame to transform, selects the
columns by name, so a repeated name picked by position brings all its columns. Before (1.6.1,
breast cancer's first three columns named a, b, a): ``CalibrationWrapper`` and
``PriorShiftWrapper`` gave the 671-character "Cross-fitting `estimator` (Pipeline) fitted the
training part of fold 1 of 5 but failed on that fold's held-out rows" message advising on rare
categories, a selection by the repeated name the 571-character "failed on the training part of
a fold" one, and ``CostPolicyWrapper`` (fixed costs: fitted once on all rows) fitted quietly and
failed only in ``predict``. A ``ColumnTransformer`` that reads only unrepeated columns keeps
working, with the probabilities it gives under distinct names.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import make_column_transformer
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline, make_union
from sklearn.preprocessing import FunctionTransformer, StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

WRAPPERS = {
    "calibration": lambda m: CalibrationWrapper(m, method="platt", random_state=0),
    "cost": lambda m: CostPolicyWrapper(m, costs={"fp": 1.0, "fn": 5.0}),
    "prior shift": lambda m: PriorShiftWrapper(m, n_resamples=0, random_state=0),
}


def _lr():
    return LogisticRegression(max_iter=1000)


#: models whose ColumnTransformer reads a repeated name (by position, by name, through the
#: remainder, through a union), and the step the error names
BREAKING = {
    "by position": (lambda: make_pipeline(make_column_transformer((StandardScaler(), [0])),
                                          _lr()), "ColumnTransformer"),
    "by name": (lambda: make_pipeline(make_column_transformer((StandardScaler(), ["a"])),
                                      _lr()), "ColumnTransformer"),
    "remainder": (lambda: make_pipeline(make_column_transformer(
                      (StandardScaler(), ["b"]), remainder="passthrough"), _lr()),
                  "ColumnTransformer"),
    "unchecked step": (lambda: make_pipeline(make_column_transformer((FunctionTransformer(),
                                                                      [2])), _lr()),
                       "ColumnTransformer"),
    "in a union": (lambda: make_pipeline(make_union(
                       make_column_transformer((StandardScaler(), [0])), StandardScaler()),
                       _lr()), "ColumnTransformer in FeatureUnion"),
}


@pytest.fixture(scope="module")
def frame():
    X, y = load_breast_cancer(return_X_y=True)
    return pd.DataFrame(X[:, :3], columns=["a", "b", "a"]), y


def _sklearn_refuses_repeated_names(frame, y):
    try:
        StandardScaler().fit(frame, y)
    except ValueError as exc:  # scikit-learn 1.9.1
        assert "unique column names" in str(exc)
        return True
    return False


def _expected(frame, y, named):
    if _sklearn_refuses_repeated_names(frame, y):
        return (f"`X` must have distinct column names for {named} (this scikit-learn refuses "
                "repeated ones); got 1 name(s) used more than once: 'a'. Rename or drop the "
                "repeated columns.")
    return (f"`X` must have distinct column names for {named} (this scikit-learn's "
            "ColumnTransformer selects a DataFrame's columns by name, so a repeated name brings "
            "all its columns and the model fails on them); got 1 name(s) used more than once: "
            "'a'. Rename or drop the repeated columns.")


@pytest.mark.parametrize("wrapper", list(WRAPPERS))
@pytest.mark.parametrize("model", list(BREAKING))
def test_repeated_names_read_by_a_column_transformer_are_one_short_error(frame, model, wrapper):
    X, y = frame
    make, named = BREAKING[model]
    with pytest.raises(ValueError):  # the model alone fails, in fit or in predict
        make().fit(X, y).predict_proba(X)
    with pytest.raises(ValueError) as got:
        WRAPPERS[wrapper](make()).fit(X, y)
    assert str(got.value) == _expected(X, y, named)  # was 571-671 characters, or no error


def test_a_frozen_model_given_repeated_names_is_one_short_error(frame):
    X, y = frame
    model = BREAKING["by position"][0]().fit(X.set_axis(["a", "b", "c"], axis=1), y)
    with pytest.raises(ValueError) as got:
        CalibrationWrapper(FrozenEstimator(model), method="platt").fit(X, y)
    assert str(got.value) == _expected(X, y, "ColumnTransformer")


def test_a_column_transformer_reading_unrepeated_columns_keeps_working(frame):
    X, y = frame
    renamed = X.set_axis(["a", "b", "c"], axis=1)

    def make():
        return make_pipeline(make_column_transformer((StandardScaler(), [1])), _lr())

    if _sklearn_refuses_repeated_names(X, y):  # scikit-learn 1.9.1 refuses every such frame
        with pytest.raises(ValueError, match="distinct column names"):
            CalibrationWrapper(make(), method="platt", random_state=0).fit(X, y)
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        fitted = CalibrationWrapper(make(), method="platt", random_state=0).fit(X, y)
        reference = CalibrationWrapper(make(), method="platt", random_state=0).fit(renamed, y)
    np.testing.assert_allclose(fitted.predict_proba(X), reference.predict_proba(renamed))
