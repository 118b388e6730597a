"""NoShiftHarmWarning on more than 20,000 multiclass Dask or Spark rows, as in memory.

``adapt`` warns when it moved the predictions on evidence a no-shift draw gives often (shift
test p >= 0.10) and the move, had the rows' shares not changed, would raise their log loss by
more than 2 % (docs/evidence/prior_shift_log.md, "One draw's harm when nothing moved"). That prediction reads
``null_move_ratio`` (the largest eigenvalue of J Sigma over that of K Sigma); the multiclass
Dask/Spark path beyond 20,000 rows (sums on the workers) did not compute it before 4 December
2026 and never warned. It now reads the same sums as its harm scale (the mean posterior and
the mean of u u' over the rows that predict, one pass).

Data: scikit-learn's bundled digits, the images of 0, 1 and 2 (537), pixel columns 20-29 (a
weak Gaussian naive Bayes, frozen), split into thirds at random (seed 5): the model's rows, 179
labelled and 179 unlabelled rows with no shift. In memory: p = 0.22, 35 % of the move applied,
predicted no-shift harm 5.3 % (warned). The reference is the in-memory estimate of the same rows (its ratio is checked
against scikit-learn's log loss in tests/test_prior_shift_draw_harm.py).
"""

from __future__ import annotations

import copy
import warnings

import numpy as np
import pytest
from sklearn.datasets import load_digits
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB

from probwrap import PriorShiftWrapper
from probwrap.shift import NoShiftHarmWarning

dask = pytest.importorskip("dask")
da = pytest.importorskip("dask.array")


@pytest.fixture(autouse=True)
def _synchronous():
    with dask.config.set(scheduler="synchronous"):
        yield


def weak_digits(seed=5):
    """The fitted wrapper (frozen naive Bayes on ten pixel columns), the unlabelled rows and
    their labels (a third each, no shift)."""
    X, y = load_digits(return_X_y=True)
    X, y = X[y < 3][:, 20:30], y[y < 3]
    a, b, c = np.array_split(np.random.default_rng(seed).permutation(y.shape[0]), 3)
    model = FrozenEstimator(GaussianNB().fit(X[a], y[a]))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        psw = PriorShiftWrapper(model, random_state=0).fit(X[b], y[b])
    return psw, X[c], y[c]


def adapted(psw, X):
    """A copy of ``psw`` adapted to ``X`` and the NoShiftHarmWarnings it raised."""
    psw = copy.deepcopy(psw)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        psw.adapt(X)
    return psw, [str(w.message) for w in caught if issubclass(w.category, NoShiftHarmWarning)]


def in_memory_reference():
    psw, X, _ = weak_digits()
    mem, caught = adapted(psw, X)
    return psw, X, mem, caught


def test_in_memory_cell_warns():
    _, _, mem, caught = in_memory_reference()
    # the move is held by the per-draw cap (p >= 0.10): 0.144 of the way, not the free weight
    assert mem.shift_pvalue_ >= 0.10 and mem.adaptation_weight_ > 0.1
    assert "held" in str(caught[0])
    assert len(caught) == 1
    assert mem.prior_estimate_.null_move_ratio > 0


def test_large_multiclass_dask_warns_as_in_memory(tally_path):
    # tally_path: the rows are read as sums on the workers (the path of more than 20,000 rows)
    psw, X, mem, caught = in_memory_reference()
    dist, dist_caught = adapted(psw, da.from_array(X, chunks=(50, 10)))
    assert dist.prior_estimate_.n_rows == X.shape[0]
    assert dist.prior_estimate_.null_move_ratio == pytest.approx(
        mem.prior_estimate_.null_move_ratio, rel=1e-10)
    assert dist.prior_estimate_.null_harm_scale == pytest.approx(
        mem.prior_estimate_.null_harm_scale, rel=1e-10)
    assert dist.adaptation_weight_ == pytest.approx(mem.adaptation_weight_, rel=1e-9)
    assert len(dist_caught) == len(caught) == 1  # before: no warning (the ratio was None)
    assert dist_caught[0] == caught[0]


def test_large_multiclass_dask_does_not_warn_where_memory_does_not(tally_path):
    # the no-shift draw of seed 0 (p = 0.59, nothing moves) and a shifted one (a third of the
    # zeros kept: p < 1e-4, the move is on firm evidence): neither warns, in memory or Dask
    psw, X, y = weak_digits(0)
    keep = np.flatnonzero((y >= 1) | (np.arange(y.shape[0]) % 3 == 0))
    for rows in (X, X[keep]):
        mem, caught = adapted(psw, rows)
        dist, dist_caught = adapted(psw, da.from_array(rows, chunks=(50, 10)))
        assert dist.prior_estimate_.null_move_ratio == pytest.approx(
            mem.prior_estimate_.null_move_ratio, rel=1e-10)
        assert not caught and not dist_caught
