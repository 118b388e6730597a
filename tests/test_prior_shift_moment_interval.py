"""The default multiclass interval of the class priors: the labelled rows' class-conditional
mean scores re-weighted to the shares (``probwrap.shift._analytic.moment_prior_interval``)."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.optimize import approx_fprime
from sklearn.datasets import load_wine
from sklearn.linear_model import LogisticRegression

from probwrap.shift import PriorEstimator
from probwrap.shift._analytic import (
    analytic_prior_interval,
    class_score_moments,
    class_score_sums,
    moment_prior_interval,
)
from probwrap.shift._shift_tests import _mean_cov, _score_rows

SOURCE, TARGET = np.array([0.5, 0.3, 0.2]), np.array([0.3, 0.5, 0.2])


@pytest.fixture(scope="module")
def wine_pool():
    # scikit-learn's bundled wine data: a logistic regression on two features (alcohol, colour
    # intensity) fitted on a third of the rows; its probabilities on the other rows are the
    # pool that labelled and unlabelled rows are resampled from by class, so the class shares
    # are known exactly and the shift is a pure prior shift. The bias-corrected temperature
    # map cannot fit this pool's class probabilities (docs/evidence/prior_shift_log.md, "(b) Wine").
    X, y = load_wine(return_X_y=True)
    X = X[:, [0, 9]]
    order = np.random.default_rng(0).permutation(y.shape[0])
    train, rest = order[:59], order[59:]
    model = LogisticRegression(max_iter=1000).fit(X[train], y[train])
    return model.predict_proba(X[rest]), y[rest]


def _draw(pool, n, prior, rng):
    proba, y = pool
    yy = rng.choice(3, size=n, p=prior)
    idx = np.array([rng.choice(np.flatnonzero(y == c)) for c in yy])
    return proba[idx], yy


def _parts(est, p_t):
    m_t, c_t, n_t = _mean_cov(_score_rows(est.calibrate(p_t), est.source_prior_),
                              np.ones(p_t.shape[0]))
    return (m_t, c_t, n_t), est._class_score_moments()


def test_covariance_is_the_delta_method_of_scipy_finite_differences(wine_pool):
    # The estimate solves sum_y pi_y mean_y = mean_t (the labelled class means of the score
    # re-weighted to the shares reproduce the unlabelled mean); its covariance is the delta
    # method over the k + 1 independent means. Reference: SciPy's finite-difference Jacobian
    # of the solve (approx_fprime) times the block-diagonal covariance of the means, each the
    # per-row covariance over (rows - 1).
    rng = np.random.default_rng(1)
    p_s, y_s = _draw(wine_pool, 400, SOURCE, rng)
    p_t, _ = _draw(wine_pool, 1500, TARGET, rng)
    est = PriorEstimator(random_state=0).fit(p_s, y_s)
    target, moments = _parts(est, p_t)
    interval, centre, cov, df = moment_prior_interval(target, moments, 0.95)
    means, covs, n_c = moments
    k = 3
    np.testing.assert_allclose(centre @ means, target[0], atol=1e-12)
    assert np.all(centre > 0)  # inside the simplex, so the centre is the solve itself

    def solve(theta):
        m_t = theta[: k - 1]
        mu = theta[k - 1:].reshape(k, k - 1)
        free = np.linalg.solve((mu[1:] - mu[:1]).T, m_t - mu[0])
        return np.concatenate([[1 - free.sum()], free])

    theta = np.concatenate([target[0], means.ravel()])
    jac = np.array([approx_fprime(theta, lambda t, i=i: solve(t)[i], 1e-7) for i in range(k)])
    blocks = [target[1] / (target[2] - 1)] + [covs[y] / (n_c[y] - 1) for y in range(k)]
    sigma = np.zeros((theta.shape[0],) * 2)
    at = 0
    for b in blocks:
        sigma[at:at + k - 1, at:at + k - 1] = b
        at += k - 1
    np.testing.assert_allclose(cov, jac @ sigma @ jac.T, rtol=1e-5, atol=1e-10)
    # the estimator reports this interval, widened to contain EM's estimate
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(p_t)
    lo = np.minimum(interval[:, 0], res.ml_prior)
    hi = np.maximum(interval[:, 1], res.ml_prior)
    if res.shift_pvalue > 0.05:  # PriorIntervalConflictWarning's widening
        lo, hi = np.minimum(lo, est.source_prior_), np.maximum(hi, est.source_prior_)
    assert np.all(res.ml_interval[:, 0] <= lo + 1e-12)
    assert np.all(res.ml_interval[:, 1] >= hi - 1e-12)


def test_class_sums_add_over_blocks_and_give_kish_counts():
    # The labelled side is kept as sums (a Dask fit adds them over blocks): two halves add up
    # to the whole, and each class's effective rows are Kish's (sum w)^2 / sum w^2.
    rng = np.random.default_rng(2)
    p = rng.dirichlet(np.ones(3), size=60)
    y = np.arange(60) % 3
    w = rng.uniform(0.5, 2.0, size=60)
    src = np.bincount(y, weights=w, minlength=3) / w.sum()
    whole = class_score_sums(p, y, w, src)
    halves = [class_score_sums(p[s], y[s], w[s], src) for s in (slice(0, 25), slice(25, 60))]
    for a, b, c in zip(whole, *halves, strict=True):
        np.testing.assert_allclose(a, b + c, rtol=1e-12)
    _, _, n_c = class_score_moments(whole)
    for c in range(3):
        wc = w[y == c]
        assert n_c[c] == pytest.approx(wc.sum() ** 2 / (wc**2).sum(), rel=1e-12)


def test_misfitting_calibration_wine_interval_covers_where_the_delta_method_missed(wine_pool):
    # Many rows (2,000 labelled, 10,000 unlabelled) resampled from the wine pool with the
    # shares moved from (0.5, 0.3, 0.2) to (0.3, 0.5, 0.2): the calibration map misfits the
    # pool, so EM's estimate is off by more than the delta-method interval on its fixed point
    # allows (that interval excludes the true share of class 0), while the class-moment
    # interval, which holds for any calibration map under a prior shift, contains all three
    # true shares, at 1.1-1.4 times the width.
    rng = np.random.default_rng(100)
    p_s, y_s = _draw(wine_pool, 2000, SOURCE, rng)
    p_t, _ = _draw(wine_pool, 10000, TARGET, rng)
    est = PriorEstimator(random_state=0).fit(p_s, y_s)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(p_t)
    old = analytic_prior_interval(est.calibrator_, p_t, np.ones(10000), 10000.0,
                                  est.source_prior_, res.ml_prior, est._eta_cov(), 0.95,
                                  n_source=est.n_source_effective_)[0]
    assert not old[0, 0] <= TARGET[0] <= old[0, 1]
    new = res.ml_interval
    assert np.all((new[:, 0] <= TARGET) & (TARGET <= new[:, 1]))
    assert np.all(new[:, 1] - new[:, 0] < 1.5 * (old[:, 1] - old[:, 0]))


def test_unidentified_shares_give_the_whole_range():
    # Posteriors that do not depend on the class (every labelled class has the same mean
    # score): no share is identified, and the interval is [0, 1] for each, not a number.
    rng = np.random.default_rng(3)
    p = rng.dirichlet(np.full(3, 50.0), size=300)
    y = np.arange(300) % 3
    means = np.tile(np.zeros(2), (3, 1))
    moments = (means, np.tile(np.eye(2), (3, 1, 1)), np.full(3, 100.0))
    assert moment_prior_interval((np.zeros(2), np.eye(2), 500.0), moments, 0.95) is None
    est = PriorEstimator(random_state=0).fit(np.full((300, 3), 1 / 3), y)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        res = est.estimate(p)
    np.testing.assert_allclose(res.ml_interval, np.column_stack([np.zeros(3), np.ones(3)]))
