"""Tiny calibration sets do no harm: a temperature fitted to the level of near-constant fold
scores is not applied to the spread of a refitted model (docs/calibration.md, "A temperature
read off near-constant fold scores").

Data: statsmodels' bundled Nile flows (Cobb 1978, 100 years), a low-flow year (below the median)
from the three years before; half of the 97 rows to fit (48), half to test. The reference is
scikit-learn's ``CalibratedClassifierCV(method="sigmoid", cv=5)`` on the same rows.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.special import logit
from sklearn.base import clone
from sklearn.calibration import CalibratedClassifierCV
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import HistGradientBoostingClassifier
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper
from probwrap.calibration import TemperatureMap


def _log_loss(p: np.ndarray, y: np.ndarray) -> float:
    return float(-np.mean(np.log(np.clip(p[np.arange(len(y)), y], 1e-15, 1.0))))


def _nile():
    v = sm.datasets.nile.load_pandas().data["volume"].to_numpy(float)
    X = np.column_stack([v[2:-1], v[1:-2], v[:-3]])
    later = v[3:]
    y = (later < np.median(later)).astype(int)
    return train_test_split(X, y, test_size=0.5, random_state=0)


def test_temperature_on_constant_scores_is_fitted_to_their_level():
    # The cause: on scores that are all one value s0 a scale without an intercept can only
    # match the base rate, beta * s0 = logit(mean y) (the score equation of the unpenalised
    # fit, sum s0 * (sigmoid(beta s0) - y) = 0), whatever the spread of the scores it will
    # later be applied to.
    y = np.array([1] * 14 + [0] * 34)
    s0 = -0.1
    cal = TemperatureMap(shrinkage=0.0, smooth_targets=False).fit(np.full(48, s0), y)
    assert 1.0 / cal.temperature_ == pytest.approx(logit(14 / 48) / s0, rel=1e-6)


def test_nile_boosting_refit_not_sharpened():
    X_tr, X_te, y_tr, y_te = _nile()
    model = HistGradientBoostingClassifier(max_iter=60, random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pw = CalibrationWrapper(clone(model), random_state=0).fit(X_tr, y_tr)
        sk = CalibratedClassifierCV(clone(model), method="sigmoid", cv=5).fit(X_tr, y_tr)
    # 38-row fold models with min_samples_leaf=20 cannot split: every held-out score is its
    # fold's base rate, while the 48-row refit splits (spread ratio inf)
    assert np.all(pw.refit_spread_ratios_ > 3.0)
    assert pw.predicted_with_ == "refit"
    # before: temperature with T = 0.41 (a 2.5x sharpening), test log loss 0.846
    assert pw.method_ == "temperature"
    assert pw.calibrator_.temperature_ == 1.0
    assert "capped at 1" in pw.method_notes_["temperature"]
    ours = _log_loss(pw.predict_proba(X_te), y_te)
    ref = _log_loss(sk.predict_proba(X_te), y_te)
    assert ref == pytest.approx(0.693, abs=0.005)  # scikit-learn's sigmoid: the base rate
    assert ours <= ref + 0.01
    own = _log_loss(clone(model).fit(X_tr, y_tr).predict_proba(X_te), y_te)
    assert ours <= own + 0.05  # the model's own 0.655


def test_sharpening_kept_where_the_refit_spreads_like_the_folds():
    # breast cancer, 60 rows, scaled logistic regression: the fold models spread their scores
    # as the refit does (ratios near 1), and the sharpening temperature stays (test log loss
    # 0.088 against scikit-learn's sigmoid 0.231; Platt scaling would give 0.100)
    X, y = load_breast_cancer(return_X_y=True)
    idx = np.random.default_rng(0).permutation(len(y))
    tr, te = idx[:60], idx[60:][:2000]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        pw = CalibrationWrapper(model, random_state=0).fit(X[tr], y[tr])
        sk = CalibratedClassifierCV(clone(model), method="sigmoid", cv=5).fit(X[tr], y[tr])
    assert pw.method_ == "temperature" and pw.calibrator_.temperature_ < 1.0
    assert np.all(pw.refit_spread_ratios_ < 3.0)
    assert _log_loss(pw.predict_proba(X[te]), y[te]) < _log_loss(sk.predict_proba(X[te]), y[te])


def test_prior_shift_refit_forest_not_kept_unchecked():
    # PriorShiftWrapper cross-fits its forest; the likelihood-ratio test judges the fold
    # models' held-out probabilities, while predict_proba would return the refit forest's
    # (never tested). statsmodels' nile, 48 rows, a forest: the map predicts now, the test's
    # p-value is still reported, and the output is the fitted map's.
    from sklearn.ensemble import RandomForestClassifier

    from probwrap import PriorShiftWrapper

    # (The refit predicts with predict_with="refit"; since session 27 "auto" predicts with the
    # fold forests here, which disagree about the rows: fold_disagreement_ 0.22, test log loss
    # 0.667 against the refit's 0.680, checked below.)
    X_tr, X_te, y_tr, y_te = _nile()
    forest = RandomForestClassifier(random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(clone(forest), random_state=0, predict_with="refit").fit(X_tr, y_tr)
        auto = PriorShiftWrapper(clone(forest), random_state=0).fit(X_tr, y_tr)
        sk = CalibratedClassifierCV(clone(forest), method="sigmoid", cv=5).fit(X_tr, y_tr)
    assert psw.predicted_with_ == "refit" and auto.predicted_with_ == "fold_models"
    assert _log_loss(auto.predict_proba(X_te), y_te) < _log_loss(psw.predict_proba(X_te), y_te)
    cal = psw.calibrator_
    assert not cal.identity_kept_
    assert 0.0 <= cal.identity_pvalue_ <= 1.0
    own = psw.estimator_.predict_proba(X_te)
    np.testing.assert_allclose(psw.predict_proba(X_te), cal.predict(own), atol=1e-12)
    ours = _log_loss(psw.predict_proba(X_te), y_te)
    ref = _log_loss(sk.predict_proba(X_te), y_te)  # scikit-learn's sigmoid on the same rows
    floored = np.clip(own, cal.floor_, 1.0)
    kept = _log_loss(floored / floored.sum(axis=1, keepdims=True), y_te)
    assert ours < kept  # the forest's own (floored) probabilities do worse
    assert ours <= ref + 0.05


def test_prior_shift_frozen_model_keeps_the_test():
    # A frozen model: the test judged the very probabilities predict_proba returns, and its
    # choice stands (breast cancer, logistic regression fitted on other rows, 60 labelled rows).
    from sklearn.frozen import FrozenEstimator

    from probwrap import PriorShiftWrapper

    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X[:200], y[:200])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(FrozenEstimator(model)).fit(X[200:260], y[200:260])
    cal = psw.calibrator_
    assert cal.identity_kept_ == (cal.identity_pvalue_ > 0.05)
