"""The tuned cost rule says when it reads `sample_weight` as relative weights.

Found on scikit-learn's bundled breast cancer data with a frozen 7-nearest-neighbour model and
150 held-out rows carrying whole-number weights 1-3: the tuned cutoff was 0.643 with the weights
as given and 0.357 with the same weights divided by their sum, and nothing said why. Weights
that sum to less than the rows cannot be row counts; the settling test then counts the rows as
Kish's effective sample size (docs/weights.md). ``CalibrationWrapper`` warned about that
reading for its map; the cost wrapper now warns too.
"""

import re
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper
from probwrap.calibration import WeightScaleWarning


def _frozen_knn():
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :5]
    model = KNeighborsClassifier(7).fit(X[300:], y[300:])
    w = np.random.default_rng(0).integers(1, 4, size=150).astype(float)
    return model, X[:150], y[:150], w


def _fit(model, X, y, w):
    return CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": 5},
                             strategy="tuned", random_state=0).fit(X, y, sample_weight=w)


def test_normalised_weights_warn_with_kish_size():
    model, X, y, w = _frozen_knn()
    with warnings.catch_warnings():
        warnings.simplefilter("error", WeightScaleWarning)
        counts = _fit(model, X, y, w)  # whole numbers summing to more than the rows: no warning
    with pytest.warns(WeightScaleWarning, match="Kish's effective sample size") as rec:
        rel = _fit(model, X, y, w / w.sum())
    # Kish (1965), effective sample size (sum w)^2 / sum w^2, computed here directly
    kish = w.sum() ** 2 / (w @ w)
    shown = float(re.search(r"size \(([0-9.]+)\)", str(rec[0].message)).group(1))
    assert shown == pytest.approx(kish, rel=1e-3)
    # the two readings settle differently on these rows (0.643 and 0.357 measured): this is
    # what the warning explains
    assert counts.cutoff_ != rel.cutoff_
    # relative weights: any scale below the row count gives the same cutoff
    with pytest.warns(WeightScaleWarning):
        assert _fit(model, X, y, w * 1e-3).cutoff_ == pytest.approx(rel.cutoff_)


def test_multiclass_tuned_offsets_warn_too():
    X, y = load_wine(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(X[::2], y[::2])
    Xh, yh = X[1::2], y[1::2]
    w = np.random.default_rng(1).uniform(0.5, 2.0, yh.shape[0])
    costs = np.array([[0, 1, 2], [1, 0, 1], [2, 1, 0]], dtype=float)
    with pytest.warns(WeightScaleWarning, match="settles the tuned rule"):
        CostPolicyWrapper(FrozenEstimator(model), costs=costs, strategy="tuned").fit(
            Xh, yh, sample_weight=w / w.sum())
