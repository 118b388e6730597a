"""Multiplying every `sample_weight` by a constant changes no choice (docs/weights.md).

Weights that are not a count table (here: fractions drawn from 0.2-3, as survey or importance
weights) are relative. Before session 28 the choices counted them as they stood whenever they
summed to at least the rows, so x1,000 (a thousand times the evidence) moved `auto`'s map and
the tuned rule's settling: on scikit-learn's wine set with a frozen logistic regression `auto`
chose temperature scaling at x1 and x1e-3 but Platt at x1,000; on breast cancer the tuned
cutoff was 0.200 at x1, 0.230 at x1e-3 and 0.282 at x1,000. A count table's counts, multiplied
by 1,000, share a factor and are read as relative too: the multiclass tuned offsets moved
without the WeightScaleWarning the binary cutoff gives.
"""

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_iris, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, CostPolicyWrapper
from probwrap.calibration import WeightScaleWarning

SCALES = (1.0, 1e-3, 1e3)


def _draw(loader, seed):
    # scikit-learn's bundled sets; 150 labelled rows (half of wine/iris), a frozen logistic
    # regression fitted on other rows
    X, y = loader(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    rng = np.random.default_rng(seed)
    perm = rng.permutation(len(y))
    X, y = X[perm], y[perm]
    n = min(len(y) // 2, 150)
    frozen = FrozenEstimator(LogisticRegression(C=0.3, max_iter=2000).fit(X[n:2 * n], y[n:2 * n]))
    return X[:n], y[:n], frozen, rng


def _fit_quiet(model, X, y, w):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return model.fit(X, y, sample_weight=w)


@pytest.mark.parametrize("loader", [load_breast_cancer, load_wine, load_iris])
@pytest.mark.parametrize("model", ["frozen", "naive_bayes"])
def test_auto_choice_does_not_move_with_the_scale(loader, model):
    X, y, frozen, rng = _draw(loader, 28)
    w = rng.uniform(0.2, 3.0, size=y.shape[0])
    est = frozen if model == "frozen" else GaussianNB()
    chosen = [_fit_quiet(CalibrationWrapper(est, method="auto", cv=3, random_state=0), X, y,
                         w * s).method_ for s in SCALES]
    assert chosen == [chosen[0]] * 3, chosen


@pytest.mark.parametrize("loader", [load_breast_cancer, load_wine, load_iris])
def test_tuned_rule_does_not_move_with_the_scale(loader):
    X, y, frozen, rng = _draw(loader, 28)
    w = rng.uniform(0.2, 3.0, size=y.shape[0])
    k = np.unique(y).shape[0]
    costs = ({"tp": 0, "fp": 1, "fn": 4, "tn": 0} if k == 2
             else (1 - np.eye(k)) * np.arange(1, k + 1)[:, None])
    fits = [_fit_quiet(CostPolicyWrapper(frozen, costs=costs, strategy="tuned", cv=3,
                                         random_state=0), X, y, w * s) for s in SCALES]
    if k == 2:
        assert [f.cutoff_ for f in fits] == pytest.approx([fits[0].cutoff_] * 3, abs=1e-12)
    else:
        for f in fits[1:]:
            np.testing.assert_allclose(f.class_offsets_, fits[0].class_offsets_, atol=1e-12)
    for f in fits[1:]:
        np.testing.assert_array_equal(f.predict(X), fits[0].predict(X))


def test_counts_sharing_a_factor_warn_for_multiclass_offsets():
    X, y, frozen, rng = _draw(load_wine, 28)
    counts = rng.integers(1, 4, size=y.shape[0]).astype(float)
    costs = (1 - np.eye(3)) * np.arange(1, 4)[:, None]
    with pytest.warns(WeightScaleWarning, match="multiple of 1000.*class offsets"):
        CostPolicyWrapper(frozen, costs=costs, strategy="tuned", cv=3,
                          random_state=0).fit(X, y, sample_weight=counts * 1000)
