"""`groups` passed to a wrapper's fit with scikit-learn's metadata routing off.

They go to the splitter, as GridSearchCV's and cross_validate's `groups` do without routing, so
the wrapper is the same as with routing on (where scikit-learn routes them to the splitter).
Before session 28 a group splitter said "The 'groups' parameter should not be None" and with
`cv` a number the model's fit raised a TypeError about an unexpected argument.
"""

import numpy as np
import pytest
import sklearn
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import GroupKFold

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper


@pytest.fixture(scope="module")
def data():
    # scikit-learn's bundled breast-cancer set, 150 rows, 5 features, 9 groups
    X, y = load_breast_cancer(return_X_y=True)
    return X[:150, :5], y[:150], np.arange(150) % 9


def _make(kind, cv):
    est = LogisticRegression(max_iter=2000)
    if kind == "cal":
        return CalibrationWrapper(est, method="platt", cv=cv, random_state=0)
    if kind == "cost":
        return CostPolicyWrapper(est, costs={"tp": 0, "fp": 1, "fn": 5, "tn": 0},
                                 strategy="tuned", cv=cv, random_state=0)
    return PriorShiftWrapper(est, cv=cv, random_state=0)


@pytest.mark.parametrize("kind", ["cal", "cost", "shift"])
def test_groups_reach_the_splitter_without_routing(data, kind):
    X, y, groups = data
    off = _make(kind, GroupKFold(3)).fit(X, y, groups=groups)
    with sklearn.config_context(enable_metadata_routing=True):
        on = _make(kind, GroupKFold(3)).fit(X, y, groups=groups)
    # (the cost wrapper's probabilities are its refitted model's; the folds reach its cutoff)
    out = (lambda m: m.cutoff_) if kind == "cost" else (lambda m: m.predict_proba(X))
    np.testing.assert_allclose(out(off), out(on), atol=1e-12)
    if kind == "cost":
        return  # (its tuned cutoff settles on the plug-in 1/6 with either folds here)
    # and the folds did keep the groups: not the wrapper of the rows split without groups
    rows = _make(kind, 3).fit(X, y)
    assert np.abs(np.asarray(out(off)) - np.asarray(out(rows))).max() > 1e-6


def test_groups_with_stratified_folds_is_an_error(data):
    X, y, groups = data
    with pytest.raises(ValueError, match="`groups` were passed.*GroupKFold"):
        _make("cal", 3).fit(X, y, groups=groups)
