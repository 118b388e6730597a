"""Order-based maps group scores a few units of rounding apart as ties.

One-vs-rest log-odds of a forest's probabilities are computed with a sum over the other
classes, and the rounding of that sum depends on how it is evaluated (SciPy's ``logsumexp``
changed between 1.12 and later; one call per class or one over all classes). Rows a forest
scores equally then differ in the last bits, and a map that grouped exactly equal scores only
counted them as different scores: binning's bins and its cross-validated loss moved.
Consistency tests (probwrap against itself under rounding-level changes of its input), on
scikit-learn's bundled wine data.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.special import logsumexp
from sklearn.datasets import load_wine
from sklearn.ensemble import RandomForestClassifier

from probwrap.calibration import BinningMap, IsotonicMap, VennAbersMap
from probwrap.calibration._isotonic import _pool_ties


def _forest_scores():
    """Class 1's one-vs-rest log-odds of a 50-tree forest's wine probabilities, computed two
    ways that differ only in rounding, and the labels."""
    X, y = load_wine(return_X_y=True)
    idx = np.random.default_rng(0).permutation(len(y))
    model = RandomForestClassifier(n_estimators=50, random_state=0).fit(X[idx[:60]], y[idx[:60]])
    rows = idx[60:]
    lp = np.log(np.maximum(model.predict_proba(X[rows]), np.nextafter(0.0, 1.0)))
    others = np.delete(lp, 1, axis=1)
    one = lp[:, 1] - logsumexp(others, axis=1)
    # the same sum in the other order of its terms, through exponentials
    two = lp[:, 1] - np.log(np.exp(others[:, 1]) + np.exp(others[:, 0]))
    return one, two, (y[rows] == 1).astype(int)


def test_the_two_computations_differ_only_in_rounding():
    one, two, _ = _forest_scores()
    assert not np.array_equal(one, two)
    # a few units of rounding of the scores' size at most (the forest's scores are ~1)
    assert np.max(np.abs(one - two)) < 8 * np.finfo(float).eps * max(1.0, np.abs(one).max())
    # ... and both computations give the same groups of tied scores
    d1, w1, _ = _pool_ties(one, np.zeros_like(one), np.ones_like(one))
    d2, w2, _ = _pool_ties(two, np.zeros_like(two), np.ones_like(two))
    np.testing.assert_array_equal(w1, w2)
    assert d1.shape[0] < one.shape[0]  # the forest's scores have ties


@pytest.mark.parametrize("make", [BinningMap, IsotonicMap, VennAbersMap])
def test_maps_do_not_move_with_rounding_of_the_scores(make):
    one, two, y = _forest_scores()
    a, b = make().fit(one, y), make().fit(two, y)
    grid = np.linspace(-6.0, 6.0, 97)
    # the groups are the same; each is represented by its smallest score, which moves by an
    # ulp at most, so predictions agree to rounding
    np.testing.assert_allclose(a.predict(grid), b.predict(grid), rtol=1e-12, atol=1e-15)
    if make is not VennAbersMap:  # Venn-Abers' test point is tied to a calibration score only
        # when equal to it (see docs/calibration.md)
        np.testing.assert_allclose(a.predict(one), b.predict(two), rtol=1e-12, atol=1e-15)


def test_near_ties_are_a_few_units_of_rounding_of_the_scores_size():
    # tied: 1 and 1 + 4 ulp; not tied: 1 and 1 + 1e-12; scores of a tiny scale keep their
    # own resolution (the tolerance follows the quartiles' size, here about 1e-300)
    y = np.array([0, 1, 0, 1])
    s = np.array([1.0, 1.0 + 4 * np.finfo(float).eps, 2.0, 2.0 + 1e-12])
    d, w, _ = _pool_ties(s, y, np.ones(4))
    np.testing.assert_array_equal(w, [2.0, 1.0, 1.0])
    tiny = np.array([1e-300, 2e-300, 3e-300, 4e-300])
    d, w, _ = _pool_ties(tiny, y, np.ones(4))
    assert d.shape[0] == 4
