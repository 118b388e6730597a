"""Named calibration methods warn when a class has only a handful of held-out rows.

Behaviour tests (no numbers to check against an outside reference): the warning's class, the
label and row count it names, and that neither the weights' scale nor rows of weight 0 change
it. Data: scikit-learn's bundled wine set, a logistic regression trained on 60 rows.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper
from probwrap._calibration_auto import CALIBRATION_METHODS
from probwrap.calibration import FewClassRowsWarning, PlattMap


def _wine_rows(n_third: int):
    """A frozen model on wine with class labels as strings, and calibration rows holding 12
    rows of 'barolo' and 'grignolino' each and ``n_third`` rows of 'barbera'."""
    X, y = load_wine(return_X_y=True)
    names = np.array(["barolo", "grignolino", "barbera"])[y]
    rng = np.random.default_rng(0)
    idx = rng.permutation(len(y))
    train, rest = idx[:60], idx[60:]
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000))
    model.fit(X[train], names[train])
    cal = np.concatenate([rest[names[rest] == c][:k] for c, k in
                          (("barolo", 12), ("grignolino", 12), ("barbera", n_third))])
    return FrozenEstimator(model), X[cal], names[cal]


def _few_row_warnings(caught):
    return [w for w in caught if issubclass(w.category, FewClassRowsWarning)]


@pytest.mark.parametrize("method", [*CALIBRATION_METHODS, "map instance"])
def test_every_named_method_names_the_class_and_its_rows(method):
    frozen, Xc, yc = _wine_rows(2)
    chosen = PlattMap() if method == "map instance" else method
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        CalibrationWrapper(frozen, method=chosen).fit(Xc, yc)
    few = _few_row_warnings(caught)
    assert len(few) == 1
    assert "'barbera': 2 rows" in str(few[0].message)
    assert "barolo" not in str(few[0].message)  # 12 rows: not named


def test_the_count_is_of_rows_of_positive_weight_whatever_their_scale():
    frozen, Xc, yc = _wine_rows(6)
    w = np.ones(len(yc))
    with warnings.catch_warnings(record=True) as caught:  # 6 rows: no warning
        warnings.simplefilter("always")
        CalibrationWrapper(frozen, method="platt").fit(Xc, yc, sample_weight=w)
    assert not _few_row_warnings(caught)
    w[np.flatnonzero(yc == "barbera")[:3]] = 0.0  # 3 rows of weight > 0 left
    for scale in (1.0, 1e-3, 1e3):
        with pytest.warns(FewClassRowsWarning, match="'barbera': 3 rows"):
            CalibrationWrapper(frozen, method="temperature").fit(Xc, yc, sample_weight=w * scale)


def test_one_row_and_auto():
    frozen, Xc, yc = _wine_rows(1)
    with pytest.warns(FewClassRowsWarning, match="'barbera': 1 row\\)"):
        CalibrationWrapper(frozen, method="isotonic").fit(Xc, yc)
    # auto has its own warning (the fallback to the most regularised map), not this one
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        w = CalibrationWrapper(frozen, method="auto").fit(Xc, yc)
    assert not _few_row_warnings(caught)
    assert w.method_ == "temperature"


def test_auto_says_when_cv_asks_for_more_folds_than_a_class_has_rows():
    frozen, Xc, yc = _wine_rows(6)  # 'barbera' has 6 rows: at most 6 stratified folds
    with pytest.warns(UserWarning, match=r"`cv`=10 .* smallest class has rows \(6\).* 6 stratified"):
        CalibrationWrapper(frozen, method="auto", cv=10, random_state=0).fit(Xc, yc)
    with warnings.catch_warnings(record=True) as caught:  # asked for no more than it can have
        warnings.simplefilter("always")
        CalibrationWrapper(frozen, method="auto", cv=6, random_state=0).fit(Xc, yc)
    assert not [w for w in caught if "`cv`=" in str(w.message)]
