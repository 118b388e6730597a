"""PriorShiftWrapper's choice between the refit and the fold models (``predict_with="auto"``)
weighs the labelled rows by ``sample_weight`` as CalibrationWrapper's check does
(docs/weights.md): a row of weight 2 counts as the row twice, and scaling every weight changes
nothing. Until the evening of 5 December 2026 it read rows of unequal weights as single rows
(only count tables and rows of weight 0 were handled).

Copies of rows change the folds, so the reference is the statistic recomputed by hand, with
NumPy's frequency weights (``np.cov(..., fweights=...)``) and with the rows repeated
(``np.repeat``), from the very fold-model scores the wrapper read (recorded by wrapping the
shared ``fold_disagreement``). Data: scikit-learn's bundled breast cancer set.
"""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

import probwrap._prior_shift as prior_shift_module
from probwrap import PriorShiftWrapper
from probwrap._calibration_wrapper import fold_disagreement


def _data():
    """150 breast cancer rows, 50 of them at weight 2."""
    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(1)
    p = rng.permutation(len(y))
    X, y = X[p][:150], y[p][:150]
    w = np.ones(150)
    w[rng.choice(150, 50, replace=False)] = 2.0
    return X, y, w


def _model(name):
    if name == "naive_bayes":
        return GaussianNB()
    if name == "logistic":
        return LogisticRegression(C=0.1, max_iter=5000)
    return make_pipeline(StandardScaler(), LogisticRegression(C=0.1))


def _fit(monkeypatch, model, X, y, w):
    """The fitted wrapper and the (fold scores, weights) its check was given."""
    seen = []

    def spy(fold_scores, sample_weight=None):
        seen.append(([np.array(s, dtype=float) for s in fold_scores],
                     None if sample_weight is None else np.array(sample_weight, dtype=float)))
        return fold_disagreement(fold_scores, sample_weight)

    monkeypatch.setattr(prior_shift_module, "fold_disagreement", spy)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        m = PriorShiftWrapper(model, cv=3, random_state=0, n_resamples=20).fit(
            X, y, sample_weight=w)
    monkeypatch.undo()
    assert len(seen) == 1
    return m, seen[0]


def _by_hand_fweights(scores, counts):
    """The statistic with integer frequency weights, from NumPy's weighted covariance: the
    mean over columns of the fold models' variance about each row (ddof 1, over models),
    weighted by the counts, over the between-row variance of the models' mean score (NumPy,
    ``np.cov`` with ``fweights`` and ``ddof=0``)."""
    s = np.stack(scores)  # (models, rows, columns)
    mean = s.mean(axis=0)
    within = np.mean([np.average(s[:, :, j].var(axis=0, ddof=1), weights=counts)
                      for j in range(s.shape[2])])
    between = np.mean([np.cov(mean[:, j], fweights=counts, ddof=0)
                       for j in range(s.shape[2])])
    return within / between


def _by_hand_repeated(scores, counts):
    """The same statistic, unweighted, on the rows repeated as many times as their counts."""
    s = np.repeat(np.stack(scores), counts, axis=1)
    mean = s.mean(axis=0)
    return float(np.mean(s.var(axis=0, ddof=1))) / float(np.mean(mean.var(axis=0)))


CASES = [
    # (model, scale of the weights): 1 and 2 are whole counts, which a model taking
    # ``sample_weight`` cross-fits as a count table by its cases (weighted before too); 0.5 and
    # 1 (the same weights halved) keep the rows as the folds' units, the reading that counted
    # every row once; so does a Pipeline, whose ``fit`` takes no ``sample_weight`` by that name
    ("naive_bayes", 1.0),
    ("naive_bayes", 0.5),
    ("logistic", 0.5),
    ("pipeline", 1.0),
]


@pytest.mark.parametrize("name, scale", CASES)
def test_weight_two_counts_as_the_row_twice(monkeypatch, name, scale):
    X, y, w = _data()
    m, (scores, seen_w) = _fit(monkeypatch, _model(name), X, y, scale * w)
    counts = w.astype(int)
    assert seen_w is not None and np.allclose(seen_w / seen_w.min(), counts, rtol=0, atol=0)
    repeated = _by_hand_repeated(scores, counts)
    np.testing.assert_allclose(_by_hand_fweights(scores, counts), repeated, rtol=1e-10)
    np.testing.assert_allclose(m.fold_disagreement_, repeated, rtol=1e-10)
    # the rows counted once each (the old reading) is a different number here
    once = _by_hand_repeated(scores, np.ones(150, dtype=int))
    assert abs(once - repeated) > 1e-3 * repeated


@pytest.mark.parametrize("name", ["naive_bayes", "pipeline"])
def test_scaling_every_weight_changes_nothing(monkeypatch, name):
    """Weights 0.5 and 1 against the same times 7.3 (3.65 and 7.3: neither whole counts, so the folds are the
    same): the fold models agree to rounding (naive Bayes' fit, and a Pipeline given no
    weights, do not move with the weights' scale), and so must the check's statistic and
    choice."""
    X, y, w = _data()
    a, (sa, _) = _fit(monkeypatch, _model(name), X, y, 0.5 * w)
    b, (sb, _) = _fit(monkeypatch, _model(name), X, y, 3.65 * w)
    for fa, fb in zip(sa, sb, strict=True):
        np.testing.assert_allclose(fa, fb, rtol=0, atol=1e-8)
    np.testing.assert_allclose(a.fold_disagreement_, b.fold_disagreement_, rtol=1e-8)
    assert a.predicted_with_ == b.predicted_with_
    # given the same scores, the statistic is exactly scale-free
    np.testing.assert_allclose(fold_disagreement(sa, 7.3 * w), fold_disagreement(sa, w),
                               rtol=1e-12)


@pytest.mark.parametrize("same", [None, 1.0, 3.0])
def test_equal_weights_read_as_no_weights(monkeypatch, same):
    """Absent or equal weights: the check is given no weights at all, so its statistic is
    the unweighted one (the benchmarks without weights are unaffected). Bit for bit without
    weights and with weights of 1; with weights of 3 the naive Bayes models themselves are fitted
    with those weights, which under scikit-learn 1.6.1 moves their scores in the last bits, so
    there the statistic is compared to 1e-12."""
    X, y, _ = _data()
    w = None if same is None else np.full(150, same)
    m, (scores, seen_w) = _fit(monkeypatch, _model("naive_bayes"), X, y, w)
    assert seen_w is None
    ref, _ = _fit(monkeypatch, _model("naive_bayes"), X, y, None)
    if same in (None, 1.0):
        assert m.fold_disagreement_ == ref.fold_disagreement_
    else:
        np.testing.assert_allclose(m.fold_disagreement_, ref.fold_disagreement_, rtol=1e-12)
    np.testing.assert_allclose(m.fold_disagreement_,
                               _by_hand_repeated(scores, np.ones(150, dtype=int)), rtol=1e-10)
