"""The harm of a move on rows whose class shares did not move: a first-order term.

``null_harm_scale`` bounds the harm of moving the prior *in expectation over the population*.
On a given set of unlabelled rows whose label shares equal the source's (the "no shift" cells
of the benchmarks), the log loss's gradient in the prior is the rows' mean score, the same
noise the estimate reads, so a move toward the estimate costs a term linear in the move
(``null_move_ratio``). Checked here against scikit-learn's ``log_loss`` differentiated
numerically (SciPy), on scikit-learn's bundled breast-cancer data.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.optimize import approx_fprime
from scipy.stats import chi2
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.shift._shift_tests import (
    draw_capped_weight,
    draw_cutoff,
    draw_harm,
    null_move_ratio,
)


def _rows():
    """Posteriors of a logistic regression (two features, fitted on a third of the rows) on
    the other rows, and their labels."""
    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    fit, rest = idx[:190], idx[190:]
    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(X[fit][:, :2], y[fit])
    return model.predict_proba(X[rest][:, :2]), y[rest]


def test_gradient_is_the_mean_score_and_ratio_is_j_over_k():
    p, y = _rows()
    src = np.array([np.mean(y == 0), np.mean(y == 1)])  # the rows' own label shares

    def loss(t):
        q = p * (np.array([1 - t[0], t[0]]) / src)
        return log_loss(y, q / q.sum(axis=1, keepdims=True), labels=[0, 1])

    u = p[:, 1] / src[1] - p[:, 0] / src[0]
    grad = approx_fprime(np.array([src[1]]), loss, 1e-7)[0]
    # the gradient of the labelled log loss in the prior is the unlabelled rows' mean score
    assert np.isclose(grad, u.mean(), rtol=1e-4, atol=1e-6)
    h = 1e-4
    curv = (loss([src[1] + h]) - 2 * loss([src[1]]) + loss([src[1] - h])) / h**2
    j = np.mean(u**2)
    assert np.isclose(curv, 1 / (src[0] * src[1]) - j, rtol=1e-3)
    # two classes: mu / lambda = J / K, K = E[p0] / pi0^2 + E[p1] / pi1^2 - J (any covariance)
    mp = p.mean(axis=0)
    k = mp[0] / src[0] ** 2 + mp[1] / src[1] ** 2 - j
    for v in (1e-4, 3e-2):
        assert np.isclose(null_move_ratio(mp, np.array([[j]]), src, np.array([[v]])), j / k,
                          rtol=1e-10)


def test_draw_cutoff_holds_the_quantile_draw_to_the_limit():
    for scale, ratio, df in ((0.034, 0.85, 1), (0.2, 0.1, 2), (0.01, 2.0, 3)):
        c = draw_cutoff(scale, ratio, df, 0.02, 1.0)
        q, a = chi2.ppf(0.95, df), c * df
        if c > 1.0:
            harm = scale * ((q - a) ** 2 / q + 2 * ratio * (q - a))
            assert np.isclose(harm, 0.02, rtol=1e-9)
    # harmless enough at the floor: the floor stays
    assert draw_cutoff(1e-4, 0.5, 1, 0.02, 1.0) == 1.0


def test_draw_capped_weight_is_the_root_of_the_draw_harm():
    """The closed form against SciPy's root finder on ``draw_harm(w) = limit``."""
    from scipy.optimize import brentq

    for scale, ratio, stat, weight, limit in [(0.034, 0.85, 2.18, 0.47, 0.02),
                                              (0.11, 0.36, 1.9, 0.5, 0.02),
                                              (0.01, 3.0, 2.5, 0.6, 0.03),
                                              (0.05, 0.0, 2.0, 0.5, 0.01)]:
        w = draw_capped_weight(scale, ratio, stat, weight, limit)
        root = brentq(lambda v, s=scale, r=ratio, t=stat, h=limit: draw_harm(s, r, t, v) - h,
                      1e-12, weight, xtol=1e-14)
        assert w == pytest.approx(root, rel=1e-9) and 0 < w < weight
    # within the limit already, or a part missing: the weight as it is
    assert draw_capped_weight(0.001, 0.5, 2.0, 0.3) == 0.3
    assert draw_capped_weight(0.034, None, 2.18, 0.47) == 0.47
    assert draw_capped_weight(0.034, 0.85, float("nan"), 0.47) == 0.47
    assert draw_capped_weight(0.034, 0.85, 2.18, 0.0) == 0.0
