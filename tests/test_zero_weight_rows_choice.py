"""Rows of weight 0 take part in nothing fitted (docs/weights.md): ``method="auto"``'s choice
around a frozen model is the choice on the same rows dropped.

Before, the stratified folds that score the candidate maps were drawn over all rows, the
zero rows included, so the weighted rows fell into other folds than with those rows dropped and
the chosen map and its probabilities moved: on the old code 2 of these 8 cells fail (breast
cancer, 160 held-out rows, 16 at weight 0, seeds 0 and 3: binning chosen where the rows dropped
choose temperature scaling; benchmarks/weight_scale_hunt.py). The reference is the wrapper
fitted on the subset of rows of positive weight, with no weights (all equal).
"""
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper


def _data(loader, seed):
    X, y = loader(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    rng = np.random.default_rng(seed)
    p = rng.permutation(len(y))
    X, y = X[p], y[p]
    n = min(len(y) // 3, 160)
    model = FrozenEstimator(LogisticRegression(C=0.3, max_iter=3000).fit(X[n:2 * n], y[n:2 * n]))
    zero = np.zeros(n, bool)
    zero[rng.choice(n, n // 10, replace=False)] = True
    return model, X[:n], y[:n], zero, X[2 * n:]


@pytest.mark.parametrize("loader", [load_breast_cancer, load_wine])
@pytest.mark.parametrize("seed", [0, 1, 2, 3])
def test_auto_zero_rows_as_rows_dropped(loader, seed):
    model, X, y, zero, X_new = _data(loader, seed)
    w = np.where(zero, 0.0, 1.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        zeros = CalibrationWrapper(model, method="auto", cv=3, random_state=0).fit(
            X, y, sample_weight=w)
        dropped = CalibrationWrapper(model, method="auto", cv=3, random_state=0).fit(
            X[~zero], y[~zero])
    assert zeros.method_ == dropped.method_
    np.testing.assert_allclose(zeros.predict_proba(X_new), dropped.predict_proba(X_new),
                               atol=1e-9)


def _fit_all(kind, X, y, w, X_new):
    from sklearn.naive_bayes import GaussianNB

    from probwrap import CostPolicyWrapper, PriorShiftWrapper

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        if kind == "calibration":
            m = CalibrationWrapper(GaussianNB(), method="auto", cv=3, random_state=0).fit(
                X, y, sample_weight=w)
            return m.method_, m.predict_proba(X_new)
        if kind == "cost":
            m = CostPolicyWrapper(GaussianNB(), costs={"fp": 1, "fn": 4}, strategy="tuned",
                                  cv=3, random_state=0, n_resamples=20).fit(
                X, y, sample_weight=w)
            return m.cutoff_, m.predict(X_new)
        m = PriorShiftWrapper(GaussianNB(), cv=3, random_state=0, n_resamples=20).fit(
            X, y, sample_weight=w).adapt(X_new)
        return m.target_prior_, m.predict_proba(X_new)


@pytest.mark.parametrize("kind", ["calibration", "cost", "prior"])
@pytest.mark.parametrize("seed", [0, 1])
def test_crossfit_zero_rows_as_rows_dropped(kind, seed):
    """A cross-fitted model: the folds of the weighted rows, the fold models and every output
    are those of the rows dropped (old code: the zero rows took places in the fold draw)."""
    _, X, y, zero, X_new = _data(load_breast_cancer, seed)
    w = np.where(zero, 0.0, 1.0)
    choice_z, out_z = _fit_all(kind, X, y, w, X_new)
    choice_d, out_d = _fit_all(kind, X[~zero], y[~zero], None, X_new)
    if isinstance(choice_z, str):
        assert choice_z == choice_d
    else:
        np.testing.assert_allclose(choice_z, choice_d, atol=1e-9)
    np.testing.assert_allclose(out_z, out_d, atol=1e-9)
