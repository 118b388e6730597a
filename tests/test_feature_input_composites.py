"""A 1-d ``X`` or repeated column names through a composite model: one short error before any
fold is fitted, naming ``X``, what was expected and the step that refuses it.

Before (session 29, scikit-learn 1.9.1, breast cancer's first column as a flat array, wrapped in
``CalibrationWrapper(method="platt")``): a pipeline of a ``FeatureUnion`` of two scalers gave the
3,894-character "Cross-fitting `estimator` (Pipeline) failed ..." message with a printout of the
array, a ``VotingClassifier`` 3,902, a ``StackingClassifier`` 3,904, a ``OneVsRestClassifier``
3,905 characters, and a pipeline starting with a ``ColumnTransformer`` scikit-learn's bare
``IndexError: tuple index out of range`` (24 characters, naming nothing); two columns named
``a`` gave the 567-578-character cross-fitting message around narwhals' "Expected unique column
names". Text models over a list of strings (a union, vote, stack or one-vs-rest of vectorising
pipelines, also inside ``GridSearchCV``) must keep working (probwrap/_feature_input.py).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.compose import make_column_transformer
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import StackingClassifier, VotingClassifier
from sklearn.feature_extraction.text import CountVectorizer, TfidfVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import GridSearchCV
from sklearn.multiclass import OneVsRestClassifier
from sklearn.pipeline import make_pipeline, make_union
from sklearn.preprocessing import FunctionTransformer, StandardScaler
from sklearn.tree import DecisionTreeClassifier

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper

WRAPPERS = {
    "calibration": lambda m: CalibrationWrapper(m, method="platt", random_state=0),
    "cost": lambda m: CostPolicyWrapper(m, costs={"fp": 1.0, "fn": 5.0}),
    "prior shift": lambda m: PriorShiftWrapper(m, n_resamples=0, random_state=0),
}


def _lr():
    return LogisticRegression(max_iter=1000)


#: composite models over numbers, and the step the error names
COMPOSITES = {
    "union": (lambda: make_pipeline(make_union(StandardScaler(), FunctionTransformer()), _lr()),
              "StandardScaler in FeatureUnion"),
    "columns": (lambda: make_pipeline(make_column_transformer((StandardScaler(), [0])), _lr()),
                "ColumnTransformer"),
    "voting": (lambda: VotingClassifier([("lr", _lr()), ("tree", DecisionTreeClassifier())],
                                        voting="soft"),
               "LogisticRegression in VotingClassifier"),
    "stacking": (lambda: StackingClassifier(
                     [("tree", DecisionTreeClassifier(max_depth=2)), ("lr", _lr())],
                     final_estimator=_lr(), cv=3),
                 "DecisionTreeClassifier in StackingClassifier"),
    "one-vs-rest": (lambda: OneVsRestClassifier(_lr()), "LogisticRegression"),
    "search over a union": (lambda: GridSearchCV(
                                make_pipeline(make_union(StandardScaler(), StandardScaler()),
                                              _lr()),
                                {"logisticregression__C": [0.1, 1.0]}, cv=3),
                            "StandardScaler in FeatureUnion"),
    "pipeline inside a union": (lambda: make_pipeline(
                                make_union(FunctionTransformer(),
                                           make_pipeline(StandardScaler())), _lr()),
                            "StandardScaler in FeatureUnion"),
}


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X[:, :3], y


@pytest.mark.parametrize("wrapper", list(WRAPPERS))
@pytest.mark.parametrize("composite", list(COMPOSITES))
def test_one_dimensional_X_into_a_composite_is_one_short_error(cancer, composite, wrapper):
    X, y = cancer
    make, named = COMPOSITES[composite]
    with pytest.raises((ValueError, IndexError)):
        make().fit(X[:, 0], y)  # scikit-learn itself refuses it
    with pytest.raises(ValueError) as got:
        WRAPPERS[wrapper](make()).fit(X[:, 0], y)
    message = str(got.value)
    assert message.startswith(f"`X` must be 2-d, shape (n_samples, n_features), for {named} "
                              "(scikit-learn refuses 1-d input); got a 1-d ndarray of 569 values.")
    assert "Cross-fitting" not in message and len(message) < 300  # was 3,894-3,905 characters


@pytest.mark.parametrize("composite", list(COMPOSITES))
def test_repeated_column_names_into_a_composite(cancer, composite):
    X, y = cancer
    make, named = COMPOSITES[composite]
    frame = pd.DataFrame(X, columns=["a", "b", "a"])
    try:
        fitted_alone = make().fit(frame, y)
        refused = False
    except ValueError as exc:  # scikit-learn 1.9.1 (narwhals' DuplicateError is a ValueError)
        assert "unique column names" in str(exc)
        refused = True
    if refused:
        with pytest.raises(ValueError) as got:
            CalibrationWrapper(make(), method="platt", random_state=0).fit(frame, y)
        assert str(got.value) == (
            f"`X` must have distinct column names for {named} (this scikit-learn refuses "
            "repeated ones); got 1 name(s) used more than once: 'a'. Rename or drop the "
            "repeated columns.")
    else:  # scikit-learn 1.6.1 accepts them: the wrapper fits as before
        try:
            fitted_alone.predict_proba(frame)
        except ValueError:
            # scikit-learn 1.6.1's ColumnTransformer fits repeated names but refuses them at
            # predict ("feature names should match"): one short error before the folds (it was
            # the 671-character cross-fitting message about rare categories)
            with pytest.raises(ValueError) as got:
                CalibrationWrapper(make(), method="platt", random_state=0).fit(frame, y)
            assert str(got.value) == (
                f"`X` must have distinct column names for {named} (this scikit-learn's "
                "ColumnTransformer selects a DataFrame's columns by name, so a repeated name "
                "brings all its columns and the model fails on them); got 1 name(s) used more "
                "than once: 'a'. Rename or drop the repeated columns.")
            return
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            fitted = CalibrationWrapper(make(), method="platt", random_state=0).fit(frame, y)
        assert fitted.predict_proba(frame).shape == (y.shape[0], 2)


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


def _text():
    return make_pipeline(CountVectorizer(), _lr())


TEXT = {
    "voting": lambda: VotingClassifier(
        [("count", _text()), ("tfidf", make_pipeline(TfidfVectorizer(), _lr()))], voting="soft"),
    "stacking": lambda: StackingClassifier(
        [("count", _text()), ("tfidf", make_pipeline(TfidfVectorizer(), _lr()))],
        final_estimator=_lr(), cv=3),
    "one-vs-rest": lambda: OneVsRestClassifier(_text()),
    "search over a union": lambda: GridSearchCV(
        make_pipeline(make_union(CountVectorizer(), TfidfVectorizer()), _lr()),
        {"logisticregression__C": [0.1, 1.0]}, cv=3),
    "union in a vote": lambda: VotingClassifier(
        [("union", make_pipeline(make_union(CountVectorizer(), TfidfVectorizer()), _lr())),
         ("count", _text())], voting="soft"),
}


@pytest.mark.parametrize("text", list(TEXT))
@pytest.mark.parametrize("wrapper", list(WRAPPERS))
def test_text_composites_over_a_list_of_strings_keep_working(wrapper, text):
    notes, y = _notes(300, seed=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        model = WRAPPERS[wrapper](TEXT[text]()).fit(notes, y)
    proba = model.predict_proba(notes[:50])
    assert proba.shape == (50, 2) and np.allclose(proba.sum(axis=1), 1.0)
    # the damaged notes get the higher probability on average (the model did read the words)
    assert proba[y[:50] == 1, 1].mean() > proba[y[:50] == 0, 1].mean()
