"""A count table gives the same wrapper with scikit-learn's metadata routing on as off.

With routing off, a model whose ``fit`` takes ``sample_weight`` is cross-fitted on a count
table by its cases (docs/weights.md, "The wrappers' cross-fitting folds"). With routing on and
the model requesting the weights (``set_fit_request(sample_weight=True)``) it receives the very
same weights, so the folds must be the same too. Before session 28 routing switched the case
folds off: on 150 breast-cancer rows with counts 1-3 the Platt-calibrated probabilities moved by
up to 0.10 and the tuned cutoff's decisions changed on 6 rows.
"""

import numpy as np
import pytest
import sklearn
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap._heldout import HeldOutClassifierBase


@pytest.fixture(scope="module")
def table():
    # scikit-learn's bundled breast-cancer set: 180 rows, 5 features, counts 1-3 per row
    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(1)
    idx = rng.choice(len(y), 180, replace=False)
    counts = rng.integers(1, 4, size=180).astype(float)
    return X[idx][:, :5], y[idx], counts


def _wrappers(est):
    return [
        CalibrationWrapper(est, method="platt", cv=3, random_state=0),
        CostPolicyWrapper(est, costs={"tp": 0, "fp": 1, "fn": 5, "tn": 0}, strategy="tuned",
                          cv=3, random_state=0),
    ]


def test_count_table_same_with_routing_on_and_off(table):
    X, y, counts = table
    off = [w.fit(X, y, sample_weight=counts) for w in _wrappers(LogisticRegression(max_iter=2000))]
    with sklearn.config_context(enable_metadata_routing=True):
        inner = LogisticRegression(max_iter=2000).set_fit_request(sample_weight=True)
        on = [w.fit(X, y, sample_weight=counts) for w in _wrappers(inner)]
        for a, b in zip(off, on, strict=True):
            np.testing.assert_allclose(b.predict_proba(X), a.predict_proba(X), atol=1e-12)
            np.testing.assert_array_equal(b.predict(X), a.predict(X))
    assert on[1].cutoff_ == pytest.approx(off[1].cutoff_, abs=1e-12)


@pytest.mark.parametrize("request_weights", [True, False, "counts"])
def test_case_folds_only_when_the_model_gets_the_same_weights(table, monkeypatch, request_weights):
    # requested under another name, the model's weights may differ from the wrapper's; not
    # requested, its fold models cannot be fitted on a row's cases left in the training part:
    # either way the rows stay the folds' units (as for a model without weights)
    X, y, counts = table
    calls = []
    original = HeldOutClassifierBase._fit_heldout_table

    def spy(self, *args, **kwargs):
        calls.append(1)
        return original(self, *args, **kwargs)

    monkeypatch.setattr(HeldOutClassifierBase, "_fit_heldout_table", spy)
    with sklearn.config_context(enable_metadata_routing=True):
        inner = LogisticRegression(max_iter=2000).set_fit_request(sample_weight=request_weights)
        w = CalibrationWrapper(inner, method="platt", cv=3, random_state=0)
        params = {"counts": counts} if request_weights == "counts" else {}
        w.fit(X, y, sample_weight=counts, **params)
    assert len(calls) == (1 if request_weights is True else 0)
