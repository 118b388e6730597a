"""Consistency tests: the prior-shift functions with weights far from 1.

Weights whose largest entry lies beyond about 1e+-77 overflow or underflow the sums of squares
behind the estimates (NumPy's "SVD did not converge", an EM prior of exactly (1, 0), a
ZeroDivisionError, an OverflowError were seen). The functions whose results do not change when
all weights are scaled divide such weights by a power of two, exactly and with one
``WeightScaleWarning`` naming the function: weights of 2**+-1000 then give bit for bit the
result of unit weights. Data: scikit-learn's bundled breast-cancer set.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import PriorShiftWrapper
from probwrap.calibration import WeightScaleWarning
from probwrap.shift import (
    PriorEstimator,
    acc_prior,
    bbse_prior,
    em_prior,
    expected_cost_by_batch,
    heldout_confusion,
    prior_by_batch,
    shift_score_test,
    shift_test,
)

SRC = np.array([0.4, 0.6])


@pytest.fixture(scope="module")
def data():
    X, y = load_breast_cancer(return_X_y=True)
    model = LogisticRegression(max_iter=5000).fit(X[:200, :5], y[:200])
    return model, X[:, :5], y, model.predict_proba(X[:, :5])


def _calls(data):
    model, X, y, P = data
    Pl, yl, Pu = P[200:400], y[200:400], P[400:]

    def wrapper_monitor(s):
        m = PriorShiftWrapper(FrozenEstimator(model)).fit(X[200:400], yl)
        return m.monitor(X[400:], batch_size=60, sample_weight=np.full(169, s))["prior"]

    return {
        "em_prior": lambda s: em_prior(Pu, SRC, sample_weight=np.full(169, s)).prior,
        "shift_test": lambda s: shift_test(Pu, SRC, sample_weight=np.full(169, s)).pvalue,
        "shift_score_test": lambda s: shift_score_test(
            Pu, SRC, sample_weight=np.full(169, s), source_proba=Pl,
            source_sample_weight=np.full(200, s)).pvalue,
        "acc_prior": lambda s: acc_prior(Pu, heldout_confusion(Pl, yl),
                                         sample_weight=np.full(169, s)).prior,
        "bbse_prior": lambda s: bbse_prior(Pu, heldout_confusion(Pl, yl), SRC,
                                           sample_weight=np.full(169, s)).prior,
        "PriorEstimator": lambda s: PriorEstimator(random_state=0).fit(
            Pl, yl, sample_weight=np.full(200, s)).estimate(Pu, np.full(169, s)).interval,
        "prior_by_batch": lambda s: prior_by_batch(
            PriorEstimator(random_state=0).fit(Pl, yl), Pu, batch_size=60,
            sample_weight=np.full(169, s))["upper"],
        "PriorShiftWrapper.monitor": wrapper_monitor,
        "expected_cost_by_batch": lambda s: expected_cost_by_batch(
            Pu, np.array([[0.0, 1.0], [5.0, 0.0]]), batch_size=60,
            sample_weight=np.full(169, s))["upper"],
    }


NAMES = ["em_prior", "shift_test", "shift_score_test", "acc_prior", "bbse_prior",
         "PriorEstimator", "prior_by_batch", "PriorShiftWrapper.monitor",
         "expected_cost_by_batch"]


@pytest.mark.parametrize("name", NAMES)
@pytest.mark.parametrize("scale", [2.0**1000, 2.0**-1000])
def test_extreme_weights_give_the_unit_weight_result(data, name, scale):
    call = _calls(data)[name]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        ref = np.asarray(call(1.0), dtype=float)
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        got = np.asarray(call(scale), dtype=float)
    scale_warnings = [r for r in rec if issubclass(r.category, WeightScaleWarning)]
    # one warning per weight argument rescaled (fit and estimate each have theirs)
    assert 1 <= len(scale_warnings) <= 2
    assert name.split(".")[-1] in str(scale_warnings[0].message)
    # 2**+-1000 divided by its power of two is exactly 1: the same arithmetic as unit weights
    np.testing.assert_array_equal(got, ref)


@pytest.mark.parametrize("name", NAMES)
def test_weights_of_1e300_are_finite_and_equal_their_rescaled_form(data, name):
    # 1e300 / 2**996 (its power of two) is about 1.47: the result equals that of weights 1.47
    call = _calls(data)[name]
    unit = 2.0 ** (np.frexp(1e300)[1] - 1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        got = np.asarray(call(1e300), dtype=float)
        ref = np.asarray(call(1e300 / unit), dtype=float)
    assert np.all(np.isfinite(got))
    np.testing.assert_array_equal(got, ref)
