"""The cutoff interval's few-rows warning counts what the bootstrap resamples.

With ``groups`` the draws take whole groups, so a few groups of many rows are few units: 569
rows of scikit-learn's bundled breast-cancer set in 57 groups of ten consecutive rows were
counted as 569 rows (no warning); now as 57 groups. With unequal group sizes the count is
Kish's size (sum W)^2 / sum W^2 of the groups' total weights (Kish 1965, Survey Sampling,
section 11.7 -- cited from memory), the same formula as for weighted rows.
"""
from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_predict

from probwrap.decision import CutoffIntervalCoverageWarning, cutoff_interval


@pytest.fixture(scope="module")
def scores():
    X, y = load_breast_cancer(return_X_y=True)
    p = cross_val_predict(LogisticRegression(max_iter=5000), X, y, cv=5,
                          method="predict_proba")[:, 1]
    return p, y


def _coverage_warnings(*args, **kwargs):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        cutoff_interval(*args, **kwargs)
    return [str(w.message) for w in caught
            if issubclass(w.category, CutoffIntervalCoverageWarning)]


def test_groups_are_counted_not_rows(scores):
    p, y = scores
    costs = {"fp": 1.0, "fn": 5.0}
    kw = dict(score_bounds=(0, 1), n_resamples=30, random_state=0)
    assert _coverage_warnings(p, y, costs, **kw) == []  # 569 rows: no warning
    groups = np.arange(p.shape[0]) // 10
    found = _coverage_warnings(p, y, costs, groups=groups, **kw)
    assert len(found) == 1
    assert "rests on 57 (effective) groups" in found[0]
    assert "(569 rows in 57 groups)" in found[0]


def test_unequal_groups_give_kish_of_group_totals(scores):
    p, y = scores
    n = p.shape[0]
    # 20 groups of 15 rows, then 269 rows on their own: 289 groups, Kish's size 67.9
    groups = np.concatenate([np.repeat(np.arange(20), 15), 20 + np.arange(n - 300)])
    totals = np.bincount(groups).astype(float)
    kish = totals.sum() ** 2 / np.dot(totals, totals)
    assert kish == pytest.approx(n ** 2 / (20 * 15 ** 2 + (n - 300)))
    found = _coverage_warnings(p, y, {"fp": 1.0, "fn": 5.0}, groups=groups,
                               score_bounds=(0, 1), n_resamples=30, random_state=0)
    assert len(found) == 1 and f"rests on {kish:.3g} (effective) groups" in found[0]
    assert "(569 rows in 289 groups)" in found[0]
