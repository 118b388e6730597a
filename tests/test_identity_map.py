"""IdentityMap: the model's own probabilities, floored at what the calibration rows support.

Reference: SciPy's ``expit`` and ``softmax`` and scikit-learn's own ``predict_proba`` (a
logistic regression on scikit-learn's bundled iris and breast cancer sets); the floor is
Krichevsky & Trofimov's (1981) add-one-half estimate, as for temperature scaling.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.special import expit
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper
from probwrap.calibration import IdentityMap, TemperatureMap, WeightScaleWarning


def test_binary_identity_is_the_logistic_function_inside_the_floor():
    s = np.linspace(-3.0, 3.0, 13)
    y = (s > 0).astype(int)
    m = IdentityMap().fit(s, y)
    floor = 1 / (2 * (13 + 1))  # Krichevsky-Trofimov, one other class
    assert m.floor_ == pytest.approx(floor)
    # SciPy's expit is the reference; inside [floor, 1 - floor] nothing changes (to rounding)
    np.testing.assert_allclose(m.predict(s), np.clip(expit(s), floor, 1 - floor), rtol=1e-15)
    far = m.predict(np.array([-1e3, 1e3]))
    assert far[0] == pytest.approx(floor) and far[1] == pytest.approx(1 - floor) and far[1] < 1


def test_multiclass_identity_returns_scikit_learns_own_probabilities():
    X, y = load_iris(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=5000)).fit(X, y)
    proba = model.predict_proba(X)
    assert proba.min() > 1 / (2 * 151 * 2)  # a soft model: the floor never binds here
    wrapped = CalibrationWrapper(FrozenEstimator(model), method="identity").fit(X, y)
    # log-probabilities in, softmax out: scikit-learn's predict_proba to rounding
    np.testing.assert_allclose(wrapped.predict_proba(X), proba, rtol=1e-12)
    # the same map as temperature scaling with T = 1 and the same floor
    t = TemperatureMap().fit(np.log(proba), y)
    t.temperature_ = 1.0
    np.testing.assert_allclose(wrapped.calibrator_.predict(np.log(proba)), t.predict(np.log(proba)))


def test_identity_is_scored_only_when_listed_and_only_for_probabilities():
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000)).fit(X[::2], y[::2])
    X_cal, y_cal = X[1::2][:200], y[1::2][:200]
    auto = CalibrationWrapper(FrozenEstimator(model), random_state=0).fit(X_cal, y_cal)
    assert "identity" not in auto.method_scores_ and "identity" not in auto.method_notes_
    listed = CalibrationWrapper(
        FrozenEstimator(model), random_state=0, candidates=["identity", "platt"]
    ).fit(X_cal, y_cal)
    assert "identity" in listed.method_scores_
    # the identity's held-out loss is the model's own log loss (no fit), floored
    p = np.clip(model.predict_proba(X_cal)[:, 1], 1 / 402, 1 - 1 / 402)
    own = -np.mean(np.where(y_cal == 1, np.log(p), np.log1p(-p)))
    # per fold the floor is 1 / (2 (N_train + 1)), slightly above 1 / 402: a loose tolerance
    assert listed.method_scores_["identity"][0] == pytest.approx(own, rel=0.02)


def test_identity_floor_uses_frequencies_or_kish_size():
    s = np.linspace(-2.0, 2.0, 10)
    y = (s > 0).astype(int)
    w = np.full(10, 2.0)  # frequencies: 20 rows
    assert IdentityMap().fit(s, y, sample_weight=w).floor_ == pytest.approx(1 / 42)
    with pytest.warns(WeightScaleWarning):
        m = IdentityMap().fit(s, y, sample_weight=np.full(10, 1e-3))
    assert m.floor_ == pytest.approx(1 / 22)  # Kish's effective size: 10 rows
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        IdentityMap().fit(s, y)
