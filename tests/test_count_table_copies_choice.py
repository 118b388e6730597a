"""A count table whose rows, repeated by their counts, would be copies of a row gets the map the
repeated rows get, frozen and cross-fitted (session 27).

An invented parcel scenario: five continuous route measurements, damaged or not, 1,000 labelled
parcel cells each seen 1-5 times, a logistic model. Repeated by their counts
(``np.repeat``), a cell's rows share values found in no other row, so the repeated-rows
handling (``copied_row_cells``) keeps them in one of auto's folds. Before this session the
table's cases of one cell were split among the folds (its rows are distinct, so no copies were
found in the table itself): a step map then met a cell's own cases in training and scored
better than it is; isotonic was chosen in 4 of 4 draws where the repeated rows chose
temperature or beta scaling. The reference is the same rows repeated (scikit-learn's
sample-weight equivalence: a weight of k is k copies of the row).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import make_classification
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper
from probwrap._heldout import copied_case_cells, feature_cells


def _parcels(seed):
    X, y = make_classification(3000, 5, random_state=seed)
    model = LogisticRegression().fit(X[:2000], y[:2000])
    w = np.random.default_rng(seed).integers(1, 6, size=1000)
    return model, X[2000:], y[2000:], w


def _fit(estimator, X, y, w=None):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return CalibrationWrapper(estimator, method="auto", random_state=0).fit(
            X, y, sample_weight=w)


@pytest.mark.parametrize("seed", range(4))
def test_frozen_table_chooses_as_its_repeated_rows(seed):
    model, X, y, w = _parcels(seed)
    table = _fit(FrozenEstimator(model), X, y, w)
    rows = _fit(FrozenEstimator(model), np.repeat(X, w, axis=0), np.repeat(y, w))
    assert table.method_ == rows.method_
    assert table.method_ != "isotonic"  # (old code: isotonic in all four draws)
    for name, (loss, se) in rows.method_scores_.items():
        assert table.method_scores_[name][0] == pytest.approx(loss, rel=1e-9, abs=1e-12)
        assert table.method_scores_[name][1] == pytest.approx(se, rel=1e-9, abs=1e-12)


@pytest.mark.parametrize("seed", [0, 1])
def test_crossfitted_table_gets_the_repeated_rows_folds_and_map(seed):
    _, X, y, w = _parcels(seed)
    table = _fit(LogisticRegression(), X, y, w)
    rows = _fit(LogisticRegression(), np.repeat(X, w, axis=0), np.repeat(y, w))
    assert table.method_ == rows.method_
    Xt = make_classification(3000, 5, random_state=seed)[0][:500]
    np.testing.assert_allclose(table.predict_proba(Xt), rows.predict_proba(Xt), atol=1e-6)


def test_table_copies_are_the_repeated_rows_copies():
    """copied_case_cells on the table marks as copies exactly the cases that copied_row_cells
    marks in the rows repeated (a row of count 1 stays alone; so does a cell of a grid column
    with chance ties)."""
    _, X, y, w = _parcels(0)
    w = w.copy()
    w[:10] = 1
    w[10:15] = 0
    cases = np.repeat(np.arange(w.shape[0]), w)
    rows = feature_cells(np.repeat(X, w, axis=0), None, y[cases])
    copies = copied_case_cells(X, w)
    assert rows is not None and copies is not None
    shared = np.bincount(rows)[rows] >= 2
    np.testing.assert_array_equal(copies[cases] >= 0, shared)
    # the same partition of the copied cases
    pairs = np.unique(np.c_[copies[cases][shared], rows[shared]], axis=0)
    assert pairs.shape[0] == np.unique(rows[shared]).shape[0]
    assert np.unique(pairs[:, 0]).shape[0] == pairs.shape[0]
    # rows on a coarse grid (three whole-number columns of 0-4): their repeats are chance
    # ties, not copies, in the table and in the rows repeated alike
    G = np.random.default_rng(1).integers(0, 5, size=(300, 3)).astype(float)
    g = np.random.default_rng(2).integers(1, 4, size=300)
    yg = np.zeros(300, dtype=int)
    assert copied_case_cells(G, g) is None
    assert feature_cells(np.repeat(G, g, axis=0), None, np.repeat(yg, g)) is None
