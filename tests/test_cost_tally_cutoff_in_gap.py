"""A tuned cutoff fitted through a Dask tally decides new rows as the in-memory fit does.

Until session 29 the tally path (a set whose rows do not reach the client) moved its tuned
cutoff to a bin's edge on the score scale even when no bin's rows lay on both sides of it:
the held-out rows were decided alike, but new rows falling in the same gap between held-out
rows were not (breast cancer, a frozen forest of 30 trees, 60 held-out rows, seed 0: cutoff
0.3120 in memory, 0.2001 through the tally, 18 of the 409 other rows decided otherwise; a
frozen logistic regression: 15 rows). The tally now carries each bin's smallest and largest
output (``ScoreTally.bin_output_range``) and keeps the cutoff where no bin is split. The
reference is the in-memory fit of the same rows (its rule is checked against outside
references in the files named in tests/test_cost_tally_anchor.py).
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CostPolicyWrapper
from probwrap._cost_policy_rules import _cutoff_at_bin_edge
from probwrap.scale import tally_scores
from probwrap.scale._tally import _tally_block

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")

COSTS = {"fp": 1.0, "fn": 5.0}


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


def _cell(kind: str, seed: int, n_labelled: int):
    X, y = load_breast_cancer(return_X_y=True)
    idx = np.random.default_rng(seed).permutation(y.shape[0])
    fit, lab, new = idx[:100], idx[100:100 + n_labelled], idx[100 + n_labelled:]
    base = (RandomForestClassifier(n_estimators=30, random_state=0) if kind == "forest"
            else make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=1000)))
    return FrozenEstimator(base.fit(X[fit], y[fit])), X[lab], y[lab], X[new]


@pytest.mark.parametrize("kind, seed, n_labelled, moved", [
    ("forest", 0, 60, 18), ("forest", 1, 60, 4), ("logistic", 0, 60, 15),
    ("logistic", 3, 60, 16),
])
def test_tally_cutoff_decides_new_rows_as_in_memory(tally_path, kind, seed, n_labelled, moved):
    model, X, y, X_new = _cell(kind, seed, n_labelled)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        mem = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(X, y)
        tal = CostPolicyWrapper(model, costs=COSTS, strategy="tuned").fit(
            da.from_array(X, chunks=(20, -1)), da.from_array(y, chunks=20))
    assert tal.tally_ is not None and tal.tally_.bin_output_range is not None
    assert tal.cutoff_anchor_ == mem.cutoff_anchor_  # the cells where the anchors agree
    # the same value, so the same decisions on every row (before: `moved` new rows differed)
    assert tal.cutoff_ == mem.cutoff_
    np.testing.assert_array_equal(tal.predict(X_new), mem.predict(X_new))
    np.testing.assert_array_equal(tal.predict(X), mem.predict(X))
    # the rule before session 29 (the tally without its bins' outputs): a bin's edge
    before = copy.copy(tal.tally_)
    before.bin_output_range = None
    p_new = model.predict_proba(X_new)[:, 1]
    old = _cutoff_at_bin_edge(before, tal.cutoff_)
    assert np.count_nonzero((p_new > old) != (p_new > mem.cutoff_)) == moved


def _two_column(p):
    p = np.asarray(p, dtype=float)
    return np.column_stack([1 - p, p])


def _logit(p):
    p = np.asarray(p, dtype=float)
    return np.log(p) - np.log1p(-p)


def test_output_range_is_merged_over_blocks():
    p = np.random.default_rng(0).uniform(0.05, 0.95, 300)
    y = (np.random.default_rng(1).random(300) < p).astype(int)
    whole = _tally_block(_logit(p), y, None, 2, 0.05, outputs=_two_column(p))
    parts = [_tally_block(_logit(p[a:a + 70]), y[a:a + 70], None, 2, 0.05,
                          outputs=_two_column(p[a:a + 70])) for a in range(0, 300, 70)]
    merged = parts[0]
    for part in parts[1:]:
        merged = merged + part
    np.testing.assert_array_equal(merged.bins, whole.bins)
    np.testing.assert_array_equal(merged.bin_output_range, whole.bin_output_range)
    # each bin's range is that of its rows' outputs (bins of width 0.05 on the log-odds)
    b = np.floor(_logit(p) / 0.05 + 0.5).astype(int)
    for i, bin_index in enumerate(whole.bins):
        assert whole.bin_output_range[i].tolist() == [p[b == bin_index].min(),
                                                      p[b == bin_index].max()]


def test_a_split_bin_is_kept_whole_and_scores_alone_keep_the_edge_rule():
    # two rows in one bin of width 1 on the log-odds (outputs 0.40 and 0.45), one far above
    p = np.array([0.40, 0.45, 0.90])
    t = _tally_block(_logit(p), np.array([0, 1, 1]), None, 2, 1.0, outputs=_two_column(p))
    assert t.n_bins == 2
    assert _cutoff_at_bin_edge(t, 0.6) == 0.6  # in the gap: kept
    # 0.43 splits the first bin, whose representative (mean log-odds) lies below it: the
    # cutoff moves to the bin's largest output, so both its rows stay unflagged
    assert _cutoff_at_bin_edge(t, 0.43) == 0.45
    # below the representative: just below the bin's smallest output (both rows flagged)
    assert _cutoff_at_bin_edge(t, 0.41) == np.nextafter(0.40, 0.0)
    # a tally of scores alone (no outputs): the upper edge of the last unflagged bin
    plain = tally_scores(_logit(p), [0, 1, 1], resolution=1.0)
    assert plain.bin_output_range is None
    edge = 1.0 / (1.0 + np.exp(-(plain.bins[0] + 0.5) * 1.0))
    assert _cutoff_at_bin_edge(plain, 0.6) == pytest.approx(edge)
