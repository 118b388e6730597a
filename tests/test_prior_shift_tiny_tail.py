"""The prior-shift calibration's choice of the score tail beyond the row bound (flat floor, or
the order kept and compressed logarithmically) on 20-200 labelled rows, checked against
statsmodels and on scikit-learn's bundled breast cancer with naive Bayes."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import chi2
from sklearn.frozen import FrozenEstimator
from sklearn.metrics import log_loss

from probwrap import PriorShiftWrapper
from probwrap.calibration._logodds import proba_to_log_proba
from probwrap.shift import BiasCorrectedScaling
from probwrap.shift._calibration import (
    TAIL_CHOICE_MAX_ROWS,
    choose_tail,
    compress_tail,
    heldout_clip,
    tail_log_scores,
)


def test_compress_tail_is_the_stated_formula_in_order_and_flat_at_width_zero():
    # z -> l - D log(1 + (l - z) / D) below l = log(start): values, order and the slope 1 at l
    z = np.array([[-0.1, -3.0], [-50.0, -1e-9], [-6.0, -4.0]])
    start = np.exp(-4.0)
    out = compress_tail(z, start, 4.0)
    expected = np.where(z < -4.0, -4.0 - 4.0 * np.log1p((-4.0 - z) / 4.0), z)
    np.testing.assert_allclose(out, expected, rtol=1e-14)
    assert out[1, 0] == pytest.approx(-4.0 - 4.0 * np.log(1.0 + 46.0 / 4.0))
    grid = np.linspace(-60.0, -0.01, 500)
    c = compress_tail(grid[:, None], start, 4.0)[:, 0]
    assert np.all(np.diff(c) > 0)  # the order of the scores is kept
    h = 1e-6  # slope 1 on both sides of the start: continuous first derivative
    left = (compress_tail(np.array([[-4.0]]), start, 4.0) -
            compress_tail(np.array([[-4.0 - h]]), start, 4.0))[0, 0] / h
    assert left == pytest.approx(1.0, rel=1e-5)
    np.testing.assert_array_equal(compress_tail(z, start, 0.0), np.maximum(z, -4.0))
    np.testing.assert_array_equal(z, [[-0.1, -3.0], [-50.0, -1e-9], [-6.0, -4.0]])  # not in place


def test_binary_map_on_compressed_log_odds_matches_statsmodels_logit(cancer_nb):
    # With shrinkage=0 the two-class map softmax(a z + b) on the compressed features is a
    # logistic regression of the label on z1 - z0 with an intercept: statsmodels' Logit is an
    # outside reference for the scale, the bias and the likelihood-ratio test (Wilks 1938).
    sm = pytest.importorskip("statsmodels.api")
    X, y, model, _, pool = cancer_nb
    rows = pool[:100]
    p = model.predict_proba(X[rows])
    start = heldout_clip(p)
    tail = (1e-12, start, abs(np.log(start)))
    z = tail_log_scores(p, *tail)
    assert np.ptp(z[:, 1] - z[:, 0]) > 2 * 2 * abs(np.log(start))  # the order beyond is kept
    cal = BiasCorrectedScaling(shrinkage=0).fit_log_proba(z, y[rows], tail=tail)
    design = np.column_stack([np.ones(rows.shape[0]), z[:, 1] - z[:, 0]])
    fit = sm.Logit(y[rows], design).fit(disp=0, tol=1e-12, maxiter=200)
    assert cal.scale_[0] == pytest.approx(fit.params[1], rel=1e-6)
    assert cal.bias_[1] == pytest.approx(fit.params[0], rel=1e-6, abs=1e-8)
    stat = 2.0 * (fit.llf - fit.model.loglike(np.array([0.0, 1.0])))
    assert cal.identity_pvalue_ == pytest.approx(chi2.sf(stat, 2), rel=1e-5)
    # and the fitted map applies the same features to new rows
    new = model.predict_proba(X[pool[100:130]])
    zn = tail_log_scores(new, *tail)
    np.testing.assert_allclose(cal.log_scores(new), zn, rtol=1e-14)
    np.testing.assert_allclose(cal.predict(new)[:, 1],
                               fit.predict(np.column_stack([np.ones(30), zn[:, 1] - zn[:, 0]])),
                               rtol=1e-6, atol=1e-12)


def test_naive_bayes_100_rows_keeps_the_order_and_gains(cancer_nb):
    # Ten 100-row draws of breast cancer with naive Bayes (scores to 1e-200): the cross-validated
    # choice keeps the order beyond the row bound in 9 of them, and there the wrapper's test log
    # loss is below the flat floor's (measured 0.75-0.87x; geometric mean 0.82x;
    # over 17 bundled tasks, docs/evidence/prior_shift_log.md, the naive Bayes gap to CalibrationWrapper's
    # "auto" at 100 rows 1.053 -> 1.041).
    X, y, model, test, pool = cancer_nb
    pt = model.predict_proba(X[test])
    rng = np.random.default_rng(1)
    ratios, kept = [], 0
    for _ in range(10):
        rows = rng.choice(pool, 100, replace=False)
        ps = PriorShiftWrapper(FrozenEstimator(model), n_resamples=0).fit(X[rows], y[rows])
        width = ps.calibrator_.tail_width_
        if width == 0.0:
            continue  # the flat floor: the map before this choice, on the same features
        kept += 1
        assert width == pytest.approx(abs(np.log(ps.calibrator_.clip_)))
        p = model.predict_proba(X[rows])
        clip = heldout_clip(p)
        flat = BiasCorrectedScaling().fit_log_proba(proba_to_log_proba(p, clip=clip), y[rows],
                                                    clip=clip)
        ratios.append(log_loss(y[test], ps.predict_proba(X[test]))
                      / log_loss(y[test], flat.predict_output(pt)))
    assert kept >= 8
    assert max(ratios) < 0.95
    assert np.exp(np.mean(np.log(ratios))) < 0.9


def test_tail_choice_falls_back_to_the_flat_floor(cancer_nb):
    X, y, model, _, pool = cancer_nb
    # more rows than the choice runs on (weights are row frequencies: 101 rows of weight 2 are
    # 202 rows): the flat floor (the rule measured before); the same rows once each: a choice
    rows = pool[:101]
    p = model.predict_proba(X[rows])
    two = np.full(101, 2.0)
    assert 2 * 101 > TAIL_CHOICE_MAX_ROWS
    assert choose_tail(p, y[rows], two) == (1e-12, heldout_clip(p, two), 0.0)
    assert choose_tail(p, y[rows], np.ones(101))[2] > 0.0
    # a class with one row cannot be left out fairly: the flat floor
    rows = np.concatenate([pool[y[pool] == 1][:30], pool[y[pool] == 0][:1]])
    p = model.predict_proba(X[rows])
    assert choose_tail(p, y[rows], np.ones(rows.shape[0]))[2] == 0.0
    # weights that cannot be row frequencies (summing to fewer than the rows) count as Kish's
    # effective size: scaling them does not change the choice
    rows = pool[:60]
    p = model.predict_proba(X[rows])
    w = np.random.default_rng(2).uniform(0.5, 2.0, size=60)
    w = w / w.sum()
    a, b = choose_tail(p, y[rows], w), choose_tail(p, y[rows], 1e-3 * w)
    assert a[2] > 0.0
    assert a == pytest.approx(b, rel=1e-9)


def test_bootstrap_refits_keep_the_chosen_tail(cancer_nb):
    # refits from the fitted map (bootstrap resampling) keep its features: the same tail
    X, y, model, _, pool = cancer_nb
    rows = pool[:100]
    ps = PriorShiftWrapper(FrozenEstimator(model), n_resamples=0).fit(X[rows], y[rows])
    assert ps.calibrator_.tail_width_ > 0
    p = model.predict_proba(X[rows])
    half = np.arange(0, 100, 2)
    refit = ps.prior_estimator_._summarise(p[half], y[rows][half], np.ones(50), warm_start=ps.calibrator_)[0]
    assert (refit.tail_floor_, refit.clip_, refit.tail_width_) == (
        ps.calibrator_.tail_floor_, ps.calibrator_.clip_, ps.calibrator_.tail_width_)
