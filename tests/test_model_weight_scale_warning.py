"""Weights far below one per row handed to a cross-fitted model draw a ``WeightScaleWarning``
naming the model.

The wrappers pass ``sample_weight`` to the model unchanged (docs/weights.md). scikit-learn's
``GaussianNB`` skips a class whose weights sum to about 0 and ``LogisticRegression`` keeps its
penalty fixed, so weights x 1e-12 give fold models that predict one probability for every row;
before, the only warning was the calibration map's Kish rescaling, which does not name the
model (breast cancer, 160 rows; benchmarks/weight_scale_hunt.py). The reference for the harm is
scikit-learn itself: the same model fitted on those weights predicts a constant.
"""
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.calibration import WeightScaleWarning


@pytest.fixture(scope="module")
def data():
    X, y = load_breast_cancer(return_X_y=True)
    X = StandardScaler().fit_transform(X)[:160]
    w = np.random.default_rng(1).uniform(0.2, 3.0, 160)
    return X, y[:160], w


def _messages(make, X, y, w):
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        make().fit(X, y, sample_weight=w)
    return [str(r.message) for r in rec if r.category is WeightScaleWarning]


@pytest.mark.parametrize("model", [GaussianNB, LogisticRegression])
def test_tiny_weights_named(data, model):
    X, y, w = data
    # the harm is real: scikit-learn's own fit on these weights predicts one probability
    ref = model().fit(X, y, sample_weight=w * 1e-12).predict_proba(X)[:, 1]
    assert np.ptp(ref) < 1e-3 < np.ptp(model().fit(X, y, sample_weight=w).predict_proba(X)[:, 1])
    for make in (lambda: CalibrationWrapper(model(), cv=3, random_state=0),
                 lambda: CostPolicyWrapper(model(), costs={"fp": 1, "fn": 4}, cv=3,
                                           random_state=0),
                 lambda: PriorShiftWrapper(model(), cv=3, random_state=0, n_resamples=20)):
        msgs = _messages(make, X, y, w * 1e-12)
        assert any("averages 1.62e-12" in m and model.__name__ in m for m in msgs), msgs


def test_ordinary_scales_quiet(data):
    X, y, w = data
    for scale in (1.0, 1.0 / w.sum(), 1e3):
        msgs = _messages(lambda: CalibrationWrapper(GaussianNB(), cv=3, random_state=0),
                         X, y, w * scale)
        assert not any("averages" in m for m in msgs), msgs
