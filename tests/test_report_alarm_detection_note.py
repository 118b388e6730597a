"""The report's small-batch note: how fast the chart would catch a move from the baseline.

The note turns a move of half the rarer class's share into standard errors and reads the
chart's average run length (Brook & Evans 1972). The standard error is now that of a batch at
the baseline (the estimator's interval on its labelled rows, counted as a batch's rows), not
the median of the batches' own intervals, which are wider once the prevalence has risen. Checks
on scikit-learn's bundled breast_cancer data (Street, Wolberg & Mangasarian 1993): the standard
error against the median over random subsets of labelled rows of a batch's size; the note the
same whether or not the batches moved; and its run length against the chart run directly on
batches resampled at the moved prevalence (CUSUM of Page 1954 on the signed roots).
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from scipy.stats import norm
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.report._alarm_chart import baseline_batch_standard_error, batch_alarm
from probwrap.shift import PriorEstimator, cusum_alarms, prior_by_batch

NB = 60  # rows per batch


@pytest.fixture(scope="module")
def case():
    X, y = load_breast_cancer(return_X_y=True)
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=1000))
    cols = [0, 1, 4, 8]  # four features: a moderate model, intervals well inside [0, 1]
    p = cross_val_predict(model, X[:, cols], y, cv=5, method="predict_proba")[:, 0]
    yb = (y == 0).astype(int)  # malignant, the rarer class (212 of 569)
    proba = np.column_stack([1 - p, p])
    rng = np.random.default_rng(0)
    perm = rng.permutation(len(y))
    lab, pool = perm[:300], perm[300:]
    est = PriorEstimator(n_resamples=50, random_state=0).fit(proba[lab], yb[lab])
    return est, proba, yb, lab, pool


def _quiet(f, *a, **kw):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return f(*a, **kw)


def _batches(rng, pool, yb, prevalence, n):
    pos, neg = pool[yb[pool] == 1], pool[yb[pool] == 0]
    out = []
    for _ in range(n):
        k = rng.binomial(NB, prevalence)
        out.append(np.r_[rng.choice(pos, k), rng.choice(neg, NB - k)])
    return out


def test_standard_error_is_that_of_a_batch_at_the_baseline(case):
    est, proba, _, lab, _ = case
    se0 = baseline_batch_standard_error(est, NB)
    rng = np.random.default_rng(1)
    ses = []
    for _ in range(60):
        iv = _quiet(est.estimate, proba[rng.choice(lab, NB, replace=False)]).interval
        ses.append((iv[1, 1] - iv[1, 0]) / (2 * norm.ppf(0.975)))
    assert se0 == pytest.approx(float(np.median(ses)), rel=0.1)


def test_note_does_not_depend_on_whether_the_batches_moved(case):
    est, proba, yb, _, pool = case
    src = float(est.source_prior_[1])
    rng = np.random.default_rng(2)
    tables = [_quiet(prior_by_batch, est, proba[np.concatenate(_batches(rng, pool, yb, prev, 6))],
                     batch_size=NB) for prev in (src, 1.5 * src)]
    new = [_quiet(batch_alarm, t, src, labelled_rows=est.n_source_effective_,
                  estimator=est).batches_to_detect for t in tables]
    old = [_quiet(batch_alarm, t, src, labelled_rows=est.n_source_effective_).batches_to_detect
           for t in tables]
    assert new[0] == pytest.approx(new[1], rel=1e-12)
    assert old[1] > old[0]  # read off the batches' own intervals, wider as the share rose


def test_note_run_length_against_the_chart_run_directly(case):
    est, proba, yb, _, pool = case
    src = float(est.source_prior_[1])
    moved = src + 0.5 * min(src, 1 - src)
    rng = np.random.default_rng(3)
    table = _quiet(prior_by_batch, est,
                   proba[np.concatenate(_batches(rng, pool, yb, moved, 6))], batch_size=NB)
    note = _quiet(batch_alarm, table, src, labelled_rows=est.n_source_effective_,
                  estimator=est).batches_to_detect
    point = copy.copy(est)
    point.n_resamples = 0  # the signed roots need the test only
    delays = []
    for _ in range(60):
        z = []
        for b in _batches(rng, pool, yb, moved, 100):
            res = _quiet(point.estimate, proba[b])
            z.append(np.sign(res.prior[1] - src) * np.sqrt(max(res.shift_statistic, 0.0)))
            chart = cusum_alarms(np.array(z), 0.0, 1.0)
            if chart.alarms.size:
                break
        delays.append(len(z))
    mean = float(np.mean(delays))
    # the note leaves out the labelled rows' shared error (rho = 60/360 here), which moves the
    # delay of one labelled set either way; within a factor of 1.6 of the direct chart
    assert mean / 1.6 < note < 1.6 * mean, (note, mean)
