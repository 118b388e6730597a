"""``labels=`` of the metrics names the class of each column of 2-d ``y_prob``; scikit-learn's
``labels=`` (``sklearn.metrics.log_loss``) is the label set, read in sorted order. A
scikit-learn user passing the labels unsorted got another number without a word (iris, labels
(virginica, setosa, versicolor) with a model's predict_proba: log loss 5.84 against 0.120).
Now an ``UnsortedLabelsWarning`` says which reading was used where the rows fit the sorted
reading better; the number is unchanged, and class names listed in column order stay quiet.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_iris
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss as sk_log_loss

from probwrap.metrics import UnsortedLabelsWarning, brier_score, log_loss
from probwrap.plot import ReliabilityDiagram

UNSORTED = ["virginica", "setosa", "versicolor"]


@pytest.fixture(scope="module")
def iris():
    X, t = load_iris(return_X_y=True)
    y = np.array(["setosa", "versicolor", "virginica"])[t]
    model = LogisticRegression(max_iter=1000).fit(X, y)
    return X, y, model, model.predict_proba(X)


def test_unsorted_labels_warn_and_keep_the_column_reading(iris):
    _, y, model, P = iris
    with pytest.warns(UnsortedLabelsWarning, match="column 0 is 'virginica'"):
        got = log_loss(y, P, labels=UNSORTED)
    # the documented reading: column j is UNSORTED[j]; by NumPy
    col = np.array([UNSORTED.index(v) for v in y])
    assert got == pytest.approx(-np.mean(np.log(np.clip(P[np.arange(len(y)), col],
                                                        2.220446049250313e-16, 1))))
    # scikit-learn reads the same call in sorted order: another number
    assert sk_log_loss(y, P) == pytest.approx(0.1196, abs=1e-3)
    assert got > 1.0
    with pytest.warns(UnsortedLabelsWarning):
        brier_score(y, P, labels=UNSORTED)


def test_sorted_labels_or_order_that_cannot_matter_stay_quiet(iris):
    X, y, model, P = iris
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        assert log_loss(y, P, labels=model.classes_) == pytest.approx(sk_log_loss(y, P))
        # only classes absent from y_true out of sorted order: the same number either way
        setosa = y == "setosa"
        order = ["setosa", "virginica", "versicolor"]
        got = log_loss(y[setosa], P[setosa][:, [0, 2, 1]], labels=order)
        assert got == pytest.approx(sk_log_loss(y[setosa], P[setosa], labels=model.classes_))
        # class names listed in the order of the columns (documented use): the columns fit
        # that order, so no warning; the number is scikit-learn's on the sorted columns
        cols = [list(model.classes_).index(c) for c in UNSORTED]
        assert log_loss(y, P[:, cols], labels=UNSORTED) == pytest.approx(sk_log_loss(y, P))
        # columns that tell the classes apart poorly: no warning by chance (with this seed
        # the sorted reading fits better by 0.00097 per row, within two standard errors,
        # 0.0022)
        rng = np.random.default_rng(1)
        flat = np.exp(0.01 * rng.normal(size=P.shape))
        log_loss(y, flat / flat.sum(axis=1, keepdims=True), labels=UNSORTED)
        # a display built from the model reads the model's own classes_
        ReliabilityDiagram.from_estimator(model, X, y)
    import matplotlib.pyplot as plt

    plt.close("all")
