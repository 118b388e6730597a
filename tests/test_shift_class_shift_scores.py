"""Per-class signed roots of the one-vs-rest shift test (multiclass prevalence charts).

References: the two-class shift test (its signed root, ``signed_shift_scores``) on the problem
collapsed to "class c" against "the rest", computed through the binary code path; the standard
normal (scipy.stats.norm) as the in-control distribution, by simulation on scikit-learn's
bundled digits data (Alpaydin & Kaynak 1998, UCI optical recognition of handwritten digits)
resampled into batches; detection of a known tripling of one digit's share by the CUSUM
(Page 1954).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.stats import norm
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.shift import (
    PriorEstimator,
    class_shift_scores,
    cusum_alarms,
    prior_by_batch,
    signed_shift_scores,
)


def _digits(rep):
    X, y = load_digits(return_X_y=True)
    tr, rest = train_test_split(np.arange(len(y)), train_size=0.3, stratify=y, random_state=rep)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X[tr], y[tr])
    return model.predict_proba(X[rest]), y[rest]


def _quiet(f, *a, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # small-batch notes are not what is tested here
        return f(*a, **kw)


def test_two_classes_give_the_binary_signed_root():
    rng = np.random.default_rng(0)
    p1 = rng.uniform(0.05, 0.95, size=2600)
    y = (rng.uniform(size=2600) < p1).astype(int)
    proba = np.column_stack([1 - p1, p1])
    est = PriorEstimator(n_resamples=0).fit(proba[:600], y[:600])
    table = _quiet(prior_by_batch, est, proba[600:], batch_size=50)
    z = signed_shift_scores(table, float(est.source_prior_[1]))
    assert np.abs(z).max() > 1.0  # not a vacuous comparison
    np.testing.assert_allclose(table["class_shift_score"][:, 1], z, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(table["class_shift_score"][:, 0], -z, rtol=1e-12, atol=1e-12)


def test_each_class_equals_the_collapsed_two_class_test():
    # without the estimator's own calibration the one-vs-rest value of class c is the binary
    # test on [1 - p_c, p_c] with labels (y == c), computed by the two-class code path
    P, y = _digits(0)
    est = PriorEstimator(n_resamples=0, calibration=None).fit(P[:500], y[:500])
    batches = [P[500 + 40 * i: 540 + 40 * i] for i in range(6)]
    # one batch with many 7s, so that some values are far from 0
    batches.append(P[500:][y[500:] == 7][:30])
    mine = np.array([class_shift_scores(est, b) for b in batches])
    for c in range(10):
        two = PriorEstimator(n_resamples=0, calibration=None).fit(
            np.column_stack([1 - P[:500, c], P[:500, c]]), (y[:500] == c).astype(int))
        assert two.source_prior_[1] == pytest.approx(est.source_prior_[c], abs=1e-12)
        stats = np.array([_quiet(two.estimate, np.column_stack([1 - b[:, c], b[:, c]]))
                          .shift_statistic for b in batches])
        np.testing.assert_allclose(np.abs(mine[:, c]), np.sqrt(stats), rtol=1e-9, atol=1e-12)
    assert mine[-1, 7] > 5.0  # a batch of 7s: class 7 far up


def test_in_control_values_spread_like_a_standard_normal():
    # 600 labelled rows against batches of 20 resampled from the rest (rho about 0.03): each
    # class's values should be N(0, 1); 10 splits x 40 batches x 10 classes
    z = []
    for rep in range(10):
        P, y = _digits(rep)
        rng = np.random.default_rng(rep)
        lab = rng.choice(len(y), size=600, replace=False)
        pool = np.setdiff1d(np.arange(len(y)), lab)
        est = PriorEstimator(n_resamples=0).fit(P[lab], y[lab])
        z.extend(class_shift_scores(est, P[rng.choice(pool, 20)]) for _ in range(40))
    z = np.array(z)
    sd = z.std(axis=0)
    assert np.all((sd > 0.85) & (sd < 1.15)), sd.round(3)
    assert 0.93 < z.std() < 1.07 and abs(z.mean()) < 0.08
    tail = float(np.mean(np.abs(z) > 1.96))
    assert abs(tail - 2 * norm.sf(1.96)) < 0.02  # 0.05 for a standard normal


def test_chart_of_one_class_detects_its_share_tripling():
    # digit 3 at its share for 20 batches of 20 rows, then at three times its odds (0.10 ->
    # 0.25): the upward CUSUM (k = 0.5, h = 5) on class 3's values must sound after the change
    detected, delays, false = 0, [], 0
    for rep in range(10):
        P, y = _digits(rep)
        rng = np.random.default_rng(100 + rep)
        lab = rng.choice(len(y), size=600, replace=False)
        pool = np.setdiff1d(np.arange(len(y)), lab)
        est = PriorEstimator(n_resamples=0).fit(P[lab], y[lab])
        odds = np.where(y[pool] == 3, 3.0, 1.0)
        z = np.array([class_shift_scores(est, P[rng.choice(pool, 20)]) for _ in range(20)]
                     + [class_shift_scores(est, P[rng.choice(pool, 20, p=odds / odds.sum())])
                        for _ in range(40)])
        chart = cusum_alarms(z[:, 3], 0.0, 1.0)
        false += int(np.any(chart.alarms < 20))
        up = chart.alarms[(chart.alarms >= 20) & (chart.direction > 0)]
        if up.size:
            detected += 1
            delays.append(int(up[0]) - 19)
        assert z[20:, 3].mean() > 1.0  # the shifted class's values move up
    assert detected >= 9 and np.median(delays) <= 6
    assert false <= 2  # in-control run length of the chart: 465 batches with an exact baseline


def test_signed_shift_scores_reads_a_multiclass_table():
    P, y = _digits(1)
    est = PriorEstimator(n_resamples=0).fit(P[:600], y[:600])
    table = _quiet(prior_by_batch, est, P[600:], batch_size=100)
    for c in (0, 4, 9):
        np.testing.assert_array_equal(signed_shift_scores(table, 0.1, class_index=c),
                                      table["class_shift_score"][:, c])
    with pytest.raises(ValueError, match="class_index"):
        signed_shift_scores(table, 0.1, class_index=10)
    old = table[[n for n in table.dtype.names if n != "class_shift_score"]]
    with pytest.raises(ValueError, match="class_shift_score"):
        signed_shift_scores(old, 0.1, class_index=2)
