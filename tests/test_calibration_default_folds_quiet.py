"""``method="auto"`` on a frozen model scores its candidate maps on stratified folds of the
held-out rows; where the smallest class has fewer rows than ``cv``, the folds are cut to that
count. That warning ("`cv`=5 asks for more folds ...") fired for every small frozen fit, though
nobody had set ``cv`` (the session-29 hunt counted it among the warnings that read as noise).
It now fires only for a number of folds other than the default; the map is the same either way.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper


@pytest.fixture(scope="module")
def small_heldout():
    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(3)
    fit = rng.choice(y.size, 300, replace=False)
    rest = np.setdiff1d(np.arange(y.size), fit)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05)).fit(X[fit], y[fit])
    # 40 held-out rows, 3 of them malignant (class 0): fewer than the default 5 folds
    rows = np.concatenate([rng.choice(rest[y[rest] == 0], 3, replace=False),
                           rng.choice(rest[y[rest] == 1], 37, replace=False)])
    return model, X[rows], y[rows], X[rest]


def _fit(model, X, y, **kw):
    with warnings.catch_warnings(record=True) as ws:
        warnings.simplefilter("always")
        wrapper = CalibrationWrapper(FrozenEstimator(model), method="auto", random_state=0,
                                     **kw).fit(X, y)
    return wrapper, [str(w.message) for w in ws]


def test_default_folds_cut_without_the_folds_warning(small_heldout):
    model, X, y, X_new = small_heldout
    wrapper, said = _fit(model, X, y)
    assert not [m for m in said if "asks for more folds" in m], said
    # the same folds and map as cv=3 (the smallest class's rows), asked for explicitly
    same, _ = _fit(model, X, y, cv=3)
    assert wrapper.method_ == same.method_
    np.testing.assert_allclose(wrapper.predict_proba(X_new), same.predict_proba(X_new),
                               rtol=0, atol=1e-12)


def test_a_chosen_number_of_folds_that_cannot_be_kept_still_warns(small_heldout):
    model, X, y, _ = small_heldout
    _, said = _fit(model, X, y, cv=10)
    assert [m for m in said if "`cv`=10 asks for more folds than the smallest class has rows (3)"
            in m], said
