"""The class-offset tuners read booleans, whole-number floats and one label column as class
indices, as the binary cutoff search reads 0/1 labels; half-precision probabilities are
refused with the reason.

Found in the session-27 edge pass: ``tune_class_offsets`` refused ``y.astype(bool)`` and
``y.astype(float)`` (0./1.) with "`y` must hold class indices 0 .. n_classes - 1 (integers)",
while ``search_cutoff`` took both; ``search_cutoff`` refused ``y.reshape(-1, 1)``, which every
metric reads. A float16 probability array was refused by every array function with "row 13
sums to 0.999756" and no word on why.
"""

from __future__ import annotations

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.decision import search_cutoff, settle_class_offsets, tune_class_offsets
from probwrap.shift import em_prior


def _held_out(loader):
    X, y = loader(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))
    return cross_val_predict(model, X, y, cv=5, method="predict_proba"), y


BINARY_COSTS = np.array([[0.0, 1.0], [5.0, 0.0]])


@pytest.mark.parametrize("recode", [lambda y: y.astype(bool), lambda y: y.astype(float),
                                    lambda y: y.reshape(-1, 1)])
def test_offsets_read_booleans_floats_and_a_column(recode):
    P, y = _held_out(load_breast_cancer)
    base = tune_class_offsets(P, y, BINARY_COSTS)
    other = tune_class_offsets(P, recode(y), BINARY_COSTS)
    np.testing.assert_array_equal(other.offsets, base.offsets)
    assert other.cost == base.cost
    settled = settle_class_offsets(P, recode(y), BINARY_COSTS, base.offsets)
    np.testing.assert_array_equal(
        settled.offsets, settle_class_offsets(P, y, BINARY_COSTS, base.offsets).offsets)


def test_offsets_three_classes_whole_floats():
    P, y = _held_out(load_wine)
    costs = 1.0 - np.eye(3)
    base = tune_class_offsets(P, y, costs)
    np.testing.assert_array_equal(tune_class_offsets(P, y.astype(float), costs).offsets,
                                  base.offsets)
    # the tuned offsets cost no more on these rows than none (their search starts there),
    # counted with NumPy: cost of the most probable class
    plain = costs[y, P.argmax(axis=1)].mean()
    assert base.cost <= plain + 1e-12


@pytest.mark.parametrize("y_bad, expected", [
    (lambda y: np.where(y == 1, "b", "m"), r"got labels 'b', 'm'\. Code them as the column"),
    (lambda y: y + 0.5, r"\(whole numbers\); got \[0\.5"),
    (lambda y: np.where(y == 1, 7, 2), r"labels \[2, 7\] that are not among the known classes"),
])
def test_offsets_refuse_other_labels_by_name(y_bad, expected):
    P, y = _held_out(load_breast_cancer)
    with pytest.raises(ValueError, match=expected):
        tune_class_offsets(P, y_bad(y), BINARY_COSTS)


def test_cutoff_search_reads_one_label_column():
    P, y = _held_out(load_breast_cancer)
    a = search_cutoff(P[:, 1], y, BINARY_COSTS)
    b = search_cutoff(P[:, 1], y.reshape(-1, 1), BINARY_COSTS)
    assert a.cutoff == b.cutoff and a.cost == b.cost


def test_half_precision_probabilities_are_refused_with_the_reason():
    P, y = _held_out(load_breast_cancer)
    prior = np.bincount(y) / y.shape[0]
    with pytest.raises(ValueError, match=r"`proba` is float16, whose rows sum to one only "
                       r"within about 1e-3; pass float64"):
        em_prior(P.astype(np.float16), prior)
    # the same values as float64, each row divided by its sum, are accepted
    P16 = P.astype(np.float16).astype(float)
    est = em_prior(P16 / P16.sum(axis=1, keepdims=True), prior)
    assert np.all(np.isfinite(est.prior))
