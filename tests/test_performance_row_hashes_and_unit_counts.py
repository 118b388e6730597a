"""Work removed from fit paths on 5 December 2026 (docs/performance.md, "Re-measured 5 December
2026, after the count-table checks"): the rows' feature hashes are made once per fit for every
cell check, and
the row counts of unit weights make no row-long temporaries. The results are the same as the
direct definitions (consistency tests, which also pass on the code before); the tests of the
work done (one hashing pass, the traced memory) fail on the code before.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from _memory_helpers import traced_peak
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

import probwrap._heldout as heldout
from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap._heldout import feature_cell_index, feature_cells
from probwrap._predictions import HeldOutPredictions
from probwrap._validation import shared_factor, whole_counts


def _inputs():
    """(name, X, y, weights): distinct rows, copied rows, a count table (a success and a
    failure row per group of identical features) as an array and as a DataFrame, and an input
    that cannot be hashed (a list)."""
    rng = np.random.default_rng(0)
    X = rng.normal(size=(300, 3))
    y = (rng.random(300) < 0.4).astype(int)
    Xc = np.vstack([X, X[:60]])
    yc = np.concatenate([y, y[:60]])
    g = np.round(rng.normal(size=(40, 2)), 1)
    Xt = np.repeat(g, 2, axis=0)
    yt = np.tile([1, 0], 40)
    wt = rng.integers(1, 9, 80).astype(float)
    return [
        ("distinct", X, y, rng.integers(1, 5, 300).astype(float)),
        ("copies", Xc, yc, np.ones(360)),
        ("table", Xt, yt, wt),
        ("table_df", pd.DataFrame(Xt, columns=["a", "b"]), yt, wt),
        ("list", Xt.tolist(), yt, wt),
    ]


@pytest.mark.parametrize("name, X, y, w", _inputs())
@pytest.mark.parametrize("weights", ["none", "given", "equal", "fractional"])
def test_feature_cells_with_a_shared_index_is_the_same(name, X, y, w, weights):
    sw = {"none": None, "given": w, "equal": np.full(len(y), 2.0),
          "fractional": np.asarray(w) / 7.0}[weights]
    index = feature_cell_index(X, len(y))
    direct = feature_cells(X, sw, y)
    shared = feature_cells(X, sw, y, index=index)
    if direct is None:
        assert shared is None
    else:
        np.testing.assert_array_equal(shared, direct)


def test_feature_cell_index_groups_identical_rows_as_numpy_unique_does():
    # reference: NumPy's np.unique over whole rows (axis=0) gives the groups of identical rows
    _, X, _, _ = _inputs()[2][:4]
    index = feature_cell_index(X, X.shape[0])
    _, ref = np.unique(X, axis=0, return_inverse=True)
    ref = np.asarray(ref).ravel()
    # the same partition of the rows (the labels of the groups may differ)
    pairs = set(zip(index.tolist(), ref.tolist(), strict=True))
    assert len(pairs) == len(set(index.tolist())) == len(set(ref.tolist()))
    # every row distinct, or rows that cannot be hashed: no index
    assert feature_cell_index(np.arange(12.0).reshape(6, 2), 6) is None
    assert feature_cell_index([[1.0, 2.0], [1.0, 2.0]], 2) is None


def test_count_table_fit_hashes_the_rows_once(monkeypatch):
    # a frozen model's count table needs its cells and its cases' cells; both come from one
    # hashing of the rows (session 27: before, the rows were hashed once for each)
    rng = np.random.default_rng(1)
    X = rng.normal(size=(2000, 4))
    y = (rng.random(2000) < 0.3).astype(int)
    w = rng.integers(1, 6, 2000).astype(float)
    model = FrozenEstimator(LogisticRegression().fit(X, y))
    calls = []
    original = heldout._row_hashes

    def counted(*args, **kwargs):
        calls.append(1)
        return original(*args, **kwargs)

    monkeypatch.setattr(heldout, "_row_hashes", counted)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        CalibrationWrapper(model, random_state=0).fit(X, y, sample_weight=w)
    assert len(calls) == 1


def _whole_counts_by_definition(w):
    """docs of whole_counts: whole numbers, some above 1, no shared factor above 1, none
    negative, total at most COUNT_TABLE_MAX_CASES."""
    from probwrap._validation import COUNT_TABLE_MAX_CASES

    w = np.asarray(w, dtype=float)
    pos = w[w > 0]
    if not w.size or not pos.size or not np.all(pos == np.round(pos)):
        return None
    if int(np.gcd.reduce(pos.astype(np.int64))) != 1 or not w.max() > 1:
        return None
    if np.any(w < 0) or w.sum() > COUNT_TABLE_MAX_CASES:
        return None
    return np.round(w).astype(np.int64)


@pytest.mark.parametrize("w", [
    np.ones(50), np.full(50, 0.5), np.array([1.0, 0.0, 1.0]), np.array([2.0, 4.0, 6.0]),
    np.array([1.0, 2.0, 3.0]), np.array([0.0, 2.0, 3.0]), np.array([1.5, 2.0]),
    np.array([0.2, 0.9, 1.0]), np.array([3.0, 0.0, 5.0]), np.array([600_000.0, 600_001.0]),
    np.broadcast_to(np.array(1.0), (1000,)),
])
def test_whole_counts_follows_its_definition(w):
    got, ref = whole_counts(w), _whole_counts_by_definition(w)
    if ref is None:
        assert got is None
    else:
        np.testing.assert_array_equal(got, ref)


def _peak(fn):
    return traced_peak(fn)[0]


def test_unit_weights_are_counted_without_row_long_temporaries():
    # unit weights (a read-only view of one value, as the wrappers pass them) are no count
    # table; deciding that and counting the rows per class makes no array as long as the rows
    # (before: the positive weights' copy, its rounding and an int64 and a float array of ones,
    # 8 bytes a row each; the tuned CostPolicyWrapper.fit peaked there at 4.28x the scores at
    # 10^6 rows, above its target of 4)
    n = 200_000
    w = np.broadcast_to(np.array(1.0), (n,))
    y = (np.arange(n) % 3 == 0).astype(np.intp)
    ho = HeldOutPredictions(values=np.zeros((0, 2)), response="predict_proba",
                            classes=np.array([0, 1]), y_index=y, sample_weight=w,
                            fold=np.broadcast_to(np.array(-1), (n,)), n_folds=0, estimator=None)
    assert _peak(lambda: whole_counts(w)) < n
    assert _peak(lambda: ho.class_row_counts(w)) < n
    np.testing.assert_array_equal(ho.class_row_counts(w), np.bincount(y))
    assert shared_factor(np.asarray(w)) == 1


@pytest.mark.parametrize("kind", ["unit", "positive", "zeros", "table", "shared"])
def test_class_row_counts_follow_their_definition(kind):
    # rows of positive weight per class; a count table's cases (whole-number weights)
    rng = np.random.default_rng(3)
    n = 500
    y = rng.integers(0, 3, n)
    w = {"unit": np.ones(n), "positive": rng.uniform(0.1, 3.0, n),
         "zeros": np.where(rng.random(n) < 0.2, 0.0, rng.uniform(0.1, 3.0, n)),
         "table": rng.integers(0, 6, n).astype(float) + (np.arange(n) == 0),
         "shared": 2.0 * rng.integers(1, 4, n)}[kind]
    ho = HeldOutPredictions(values=np.zeros((n, 3)), response="predict_proba",
                            classes=np.arange(3), y_index=y, sample_weight=w,
                            fold=np.full(n, -1), n_folds=0, estimator=None)
    if kind == "table":
        ref = np.array([int(w[y == c].sum()) for c in range(3)])
    else:
        ref = np.array([int(np.sum((y == c) & (w > 0))) for c in range(3)])
    got = ho.class_row_counts(w)
    assert got.dtype == np.int64
    np.testing.assert_array_equal(got, ref)


def test_tuned_fit_on_a_count_table_unchanged_by_the_shared_index():
    # the wrappers' choices on a count table with copied rows and on a DataFrame: the same as
    # with the cells computed by hashing the rows for each check (feature_cells without index)
    rng = np.random.default_rng(4)
    g = np.round(rng.normal(size=(60, 2)), 2)
    m = rng.integers(3, 30, 60)
    k = rng.binomial(m, 1 / (1 + np.exp(-2 * g[:, 0])))
    X = np.repeat(g, 2, axis=0)
    y = np.tile([1, 0], 60)
    w = np.column_stack([k, m - k]).ravel().astype(float)
    results = []
    original = heldout.feature_cells

    def unshared(X, sw, y_index, *, index=None):
        return original(X, sw, y_index)

    for shared in (True, False):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            if not shared:
                heldout.feature_cells = unshared
            try:
                cost = CostPolicyWrapper(LogisticRegression(), costs={"fp": 1, "fn": 3},
                                         strategy="tuned", random_state=0).fit(X, y,
                                                                               sample_weight=w)
                cal = CalibrationWrapper(LogisticRegression(), random_state=0).fit(
                    pd.DataFrame(X, columns=["a", "b"]), y, sample_weight=w)
            finally:
                if not shared:
                    heldout.feature_cells = original
        results.append((cost.cutoff_, cal.method_, cal.predict_proba(
            pd.DataFrame(g, columns=["a", "b"]))))
    assert results[0][0] == results[1][0]
    assert results[0][1] == results[1][1]
    np.testing.assert_array_equal(results[0][2], results[1][2])
