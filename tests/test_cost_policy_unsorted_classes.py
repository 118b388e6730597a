"""The binary cost shorthand on a frozen model whose ``classes_`` are not sorted.

The shorthand ``{"fp", "fn"}`` and a single cutoff act on ``classes_[1]`` (scikit-learn's
convention: the column ``predict_proba[:, 1]``). scikit-learn's classifiers sort their labels; a
model from elsewhere may not, and then the positive class is not the larger label. The wrapper
says which label it treats as positive. Consistency tests (the same model, columns reordered).
"""

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper
from probwrap.decision import ImpliedPositiveClassWarning


class _Reordered:
    """A fitted classifier whose ``classes_`` and probability columns are in reverse order."""

    _estimator_type = "classifier"

    def __init__(self, model):
        self.model = model
        self.classes_ = np.asarray(model.classes_)[::-1]
        self.n_features_in_ = model.n_features_in_

    def fit(self, X, y):
        return self

    def predict_proba(self, X):
        return self.model.predict_proba(X)[:, ::-1]

    def predict(self, X):
        return self.classes_[np.argmax(self.predict_proba(X), 1)]

    def __sklearn_tags__(self):
        return self.model.__sklearn_tags__()

    def get_params(self, deep=True):
        return {"model": self.model}


@pytest.fixture(scope="module")
def models():
    X, y = load_breast_cancer(return_X_y=True)  # scikit-learn's bundled data
    labels = np.where(y == 0, "malignant", "benign")
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(
        X[:300], labels[:300])
    return X[300:], labels[300:], model


@pytest.mark.parametrize("kw", [dict(costs={"fp": 1.0, "fn": 5.0}),
                                dict(strategy="fixed", cutoff=0.3)])
def test_unsorted_classes_name_the_positive_class(models, kw):
    X, y, model = models
    flipped = FrozenEstimator(_Reordered(model))
    assert list(flipped.classes_) == ["malignant", "benign"]
    with pytest.warns(UserWarning, match=r"positive class: 'benign'.*not in sorted order"):
        w = CostPolicyWrapper(flipped, **kw).fit(X, y)
    # the rule acts on classes_[1] = "benign" of the reordered model: on the same rows it
    # flags exactly those whose "benign" probability is above the cutoff
    p_benign = model.predict_proba(X)[:, list(model.classes_).index("benign")]
    assert np.array_equal(w.predict(X) == "benign", p_benign > w.cutoff_)
    # scikit-learn's sorted order gives no unsorted-order warning (positive class "malignant");
    # text labels name no positive class, so ImpliedPositiveClassWarning says which it is
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        s = CostPolicyWrapper(FrozenEstimator(model), **kw).fit(X, y)
    assert [type(c.message) for c in caught] == [ImpliedPositiveClassWarning]
    assert "treats 'malignant' as the positive class" in str(caught[0].message)
    p_malignant = model.predict_proba(X)[:, list(model.classes_).index("malignant")]
    assert np.array_equal(s.predict(X) == "malignant", p_malignant > s.cutoff_)


def test_a_cost_matrix_on_unsorted_classes_needs_no_warning(models):
    X, y, model = models
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        CostPolicyWrapper(FrozenEstimator(_Reordered(model)),
                          costs=[[0.0, 1.0], [5.0, 0.0]]).fit(X, y)
