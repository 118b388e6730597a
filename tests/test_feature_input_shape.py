"""A 1-d ``X`` or repeated column names: one short error before any fold is fitted, only where
the model's scikit-learn step refuses them itself.

Before (session 28, scikit-learn's breast cancer data, ``LogisticRegression``): one feature as a
flat array gave a 3,900-character "Cross-fitting `estimator` (LogisticRegression) failed on
the training part of a fold ..." message ending in scikit-learn's "Expected 2D array" and a
printout of the array (4,500 characters from ``CostPolicyWrapper``'s fit on all rows); a
DataFrame with two columns named ``a`` gave the same 577-character cross-fitting message
around narwhals' "Expected unique column names" under scikit-learn 1.9.1. scikit-learn 1.6.1
accepts repeated names, and a text pipeline takes a 1-d list of strings: both must keep
working (probwrap/_feature_input.py).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import RandomForestClassifier
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import GridSearchCV
from sklearn.pipeline import make_pipeline, make_union
from sklearn.preprocessing import FunctionTransformer

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

WRAPPERS = {
    "calibration": lambda m: CalibrationWrapper(m, method="platt", random_state=0),
    "cost, fitted once": lambda m: CostPolicyWrapper(m, costs={"fp": 1.0, "fn": 5.0}),
    "cost, tuned": lambda m: CostPolicyWrapper(m, costs={"fp": 1.0, "fn": 5.0},
                                               strategy="tuned", n_resamples=0,
                                               random_state=0),
    "prior shift": lambda m: PriorShiftWrapper(m, n_resamples=0, random_state=0),
}


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X[:, :3], y


def _model():
    return LogisticRegression(max_iter=1000)


def _flat(kind, x):
    return {"ndarray": x, "Series": pd.Series(x, name="radius"), "list": x.tolist()}[kind]


@pytest.mark.parametrize("kind", ["ndarray", "Series", "list"])
@pytest.mark.parametrize("wrapper", list(WRAPPERS))
def test_one_dimensional_X_is_one_short_error(cancer, wrapper, kind):
    X, y = cancer
    with pytest.raises(ValueError, match=r"2D array|2-dimensional"):
        _model().fit(_flat(kind, X[:, 0]), y)  # scikit-learn itself refuses it
    with pytest.raises(ValueError) as got:
        WRAPPERS[wrapper](_model()).fit(_flat(kind, X[:, 0]), y)
    message = str(got.value)
    assert message.startswith("`X` must be 2-d, shape (n_samples, n_features), for "
                              "LogisticRegression")
    assert f"1-d {kind} of {y.shape[0]} values" in message
    assert "Cross-fitting" not in message and len(message) < 300  # was 3,900 characters


@pytest.mark.parametrize("wrapper", ["calibration", "prior shift"])
def test_one_dimensional_X_through_a_frozen_pipeline(cancer, wrapper):
    X, y = cancer
    frozen = FrozenEstimator(make_pipeline(FunctionTransformer(validate=True), _model())
                             .fit(X[:, :1], y))
    with pytest.raises(ValueError, match=r"^`X` must be 2-d.*for FunctionTransformer"):
        WRAPPERS[wrapper](frozen).fit(X[:, 0], y)


def test_a_step_that_takes_one_dimensional_input_still_gets_it(cancer):
    # a FunctionTransformer without validation that makes the column itself: scikit-learn
    # passes the 1-d array on, so the wrapper must too
    X, y = cancer
    column = make_pipeline(FunctionTransformer(lambda v: np.asarray(v).reshape(-1, 1)),
                           _model())
    flat = CalibrationWrapper(column, method="platt", cv=3, random_state=0).fit(X[:, 0], y)
    as_column = CalibrationWrapper(_model(), method="platt", cv=3, random_state=0).fit(X[:, :1], y)
    np.testing.assert_allclose(flat.predict_proba(X[:, 0]), as_column.predict_proba(X[:, :1]),
                               rtol=1e-12)


def _notes(n, seed):
    """Invented parcel-desk notes: 'damaged' notes mention the words of damage more often."""
    rng = np.random.default_rng(seed)
    damage = ["crushed", "wet", "torn", "dented", "leaking"]
    plain_words = ["box", "envelope", "tube", "pallet", "label", "depot", "van", "signed"]
    y = (rng.random(n) < 0.35).astype(int)
    notes = []
    for label in y:
        words = list(rng.choice(plain_words, size=4))
        if rng.random() < (0.8 if label else 0.15):
            words.append(str(rng.choice(damage)))
        notes.append(" ".join(words))
    return notes, y


@pytest.mark.parametrize("make, named", [
    (lambda: GridSearchCV(_model(), {"C": [0.1, 1.0]}, cv=3), "LogisticRegression"),
    (lambda: CalibrationWrapper(_model(), method="platt"), "LogisticRegression"),
    (lambda: RandomForestClassifier(n_estimators=5, random_state=0), "RandomForestClassifier"),
], ids=["search", "nested wrapper", "forest"])
def test_the_step_named_is_the_one_that_refuses(cancer, make, named):
    X, y = cancer
    with pytest.raises(ValueError, match=r"2D array|2-dimensional|^`X` must be 2-d"):
        make().fit(X[:, 0], y)  # scikit-learn refuses it itself (the inner wrapper: ours)
    with pytest.raises(ValueError, match=rf"^`X` must be 2-d, shape \(n_samples, n_features\), "
                                         rf"for {named} "):
        CostPolicyWrapper(make(), costs={"fp": 1.0, "fn": 5.0}).fit(X[:, 0], y)


def _text_models():
    """Models over a list of strings whose outer step's tags say 2-d input (a search and a
    union report the tags of a 2-d model): the check must not judge them."""
    def vectorised():
        return make_pipeline(CountVectorizer(), LogisticRegression(max_iter=1000))

    return {
        "pipeline": vectorised,
        "search": lambda: GridSearchCV(vectorised(), {"logisticregression__C": [0.1, 1.0]},
                                       cv=3),
        "union": lambda: make_pipeline(make_union(CountVectorizer(), TfidfVectorizer()),
                                       LogisticRegression(max_iter=1000)),
    }


@pytest.mark.parametrize("text", list(_text_models()))
@pytest.mark.parametrize("wrapper", list(WRAPPERS))
def test_text_pipeline_over_a_list_of_strings_keeps_working(wrapper, text):
    notes, y = _notes(300, seed=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = WRAPPERS[wrapper](_text_models()[text]()).fit(notes, y)
    proba = model.predict_proba(notes[:50])
    assert proba.shape == (50, 2) and np.allclose(proba.sum(axis=1), 1.0)
    # the damaged notes get the higher probability on average (the model did read the words)
    assert proba[np.asarray(y[:50]) == 1, 1].mean() > proba[np.asarray(y[:50]) == 0, 1].mean()


def _sklearn_refuses_repeated_names(frame, y):
    try:
        _model().fit(frame, y)
    except ValueError as exc:
        assert "unique column names" in str(exc)
        return True
    return False


@pytest.mark.parametrize("wrapper", list(WRAPPERS))
def test_repeated_column_names_only_where_scikit_learn_refuses_them(cancer, wrapper):
    X, y = cancer
    frame = pd.DataFrame(X, columns=["radius", "texture", "radius"])
    if _sklearn_refuses_repeated_names(frame, y):  # scikit-learn 1.9.1
        with pytest.raises(ValueError) as got:
            WRAPPERS[wrapper](_model()).fit(frame, y)
        message = str(got.value)
        assert message == (
            "`X` must have distinct column names for LogisticRegression (this scikit-learn "
            "refuses repeated ones); got 1 name(s) used more than once: 'radius'. Rename or "
            "drop the repeated columns.")
    else:  # scikit-learn 1.6.1: the model accepts them, so the wrapper fits as before
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fitted = WRAPPERS[wrapper](_model()).fit(frame, y)
            renamed = WRAPPERS[wrapper](_model()).fit(frame.set_axis(["a", "b", "c"], axis=1), y)
        np.testing.assert_allclose(fitted.predict_proba(frame),
                                   renamed.predict_proba(frame.set_axis(["a", "b", "c"], axis=1)))


def test_repeated_names_of_a_model_from_elsewhere_are_passed_on(cancer):
    # not a scikit-learn first step: the wrapper does not judge the frame for it
    X, y = cancer

    class Plain:
        """A classifier of its own (invented): reads the first column's values only."""

        def fit(self, X, y):
            self.classes_ = np.unique(y)
            v = np.asarray(X)[:, 0]
            self.cut_ = float(np.median(v))
            return self

        def predict_proba(self, X):
            v = np.asarray(X)[:, 0]
            p = 1.0 / (1.0 + np.exp(-(self.cut_ - v) / 3.0))
            return np.column_stack([1 - p, p])

        def get_params(self, deep=True):
            return {}

        def set_params(self, **params):
            return self

    frame = pd.DataFrame(X, columns=["radius", "texture", "radius"])
    fitted = CalibrationWrapper(Plain(), method="platt", cv=3).fit(frame, y)
    assert fitted.predict_proba(frame).shape == (y.shape[0], 2)
