"""Consistency tests: multiplying every weight by one constant changes neither ``auto``'s choice
nor any map's probabilities (weights that sum to less than the number of rows are not row
frequencies and are rescaled to Kish's effective sample size; see docs/calibration.md,
"Weights").

Data: small calibration draws of data sets bundled with scikit-learn (breast cancer, wine) and
statsmodels (anes96's vote), with integer weights 1-3 normalised to sum 1e-3 and then
multiplied by 1e-3 and by 1e3 (totals 1e-6, 1e-3 and 1; all below the number of rows, so all
three are rescaled). Integer-ratio weights are the hard case: with them a group of rows often
ends exactly on one of binning's equal-weight bin boundaries, and the last bits of the rescaled
weights decided the bin (before, up to 0.39 apart in probability on 5 of 200 20-row
breast-cancer draws, which also moved ``auto``'s choice between Platt and temperature scaling
through binning's cross-validated score).
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.naive_bayes import GaussianNB
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import CalibrationWrapper
from probwrap.calibration import BinningMap

SCALES = (1e-3, 1.0, 1e3)


def _anes96_vote():
    import statsmodels.api as sm

    d = sm.datasets.anes96.load_pandas().data
    return d.drop(columns="vote").to_numpy(float), d["vote"].to_numpy(int)


def _case(name: str):
    """A frozen model and a small calibration draw (rows never seen by the model)."""
    if name == "breast cancer":
        X, y = load_breast_cancer(return_X_y=True)
        model, n_cal = GaussianNB(), 24
    elif name == "wine":
        X, y = load_wine(return_X_y=True)
        model, n_cal = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)), 36
    else:
        X, y = _anes96_vote()
        model, n_cal = make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)), 30
    idx = np.random.default_rng(3).permutation(len(y))
    train, cal, test = idx[: len(y) // 3], idx[len(y) // 3: len(y) // 3 + n_cal], idx[-200:]
    model.fit(X[train], y[train])
    return FrozenEstimator(model), X[cal], y[cal], X[test]


# anes96 with weight draw 26: binning has the best cross-validated loss there, and before the
# fix its score at the largest scale moved (0.22397 -> 0.22269)
@pytest.mark.parametrize(("name", "weight_seed"), [("breast cancer", 0), ("wine", 0),
                                                   ("anes96 vote", 26)])
def test_auto_choice_and_probabilities_do_not_move_with_the_weights_scale(name, weight_seed):
    frozen, X_cal, y_cal, X_te = _case(name)
    w = np.random.default_rng(weight_seed).integers(1, 4, len(y_cal)).astype(float)
    w0 = w / w.sum() * 1e-3
    fits = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # WeightScaleWarning: the rescaling is the point here
        for c in SCALES:
            fits.append(CalibrationWrapper(frozen, method="auto", random_state=0).fit(
                X_cal, y_cal, sample_weight=w0 * c))
    ref = fits[0]
    for f in fits[1:]:
        assert f.method_ == ref.method_
        assert f.method_scores_.keys() == ref.method_scores_.keys()
        for nm, (loss, se) in ref.method_scores_.items():
            # the rescaled weights differ in their last bits only; 1e-9 leaves room for the
            # solvers' iterations to carry that difference a few orders of magnitude up
            np.testing.assert_allclose(f.method_scores_[nm], (loss, se), rtol=1e-9, atol=1e-12)
        np.testing.assert_allclose(f.predict_proba(X_te), ref.predict_proba(X_te),
                                   rtol=1e-9, atol=1e-12)


def test_binning_bins_do_not_move_with_the_weights_scale():
    # breast-cancer draws of 20 rows with integer weights 1-3; 5 of these 200 moved before
    X, y = load_breast_cancer(return_X_y=True)
    moved = 0
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for seed in range(200):
            rng = np.random.default_rng(seed)
            idx = rng.choice(len(y), 20, replace=False)
            s, yy = (14.0 - X[idx, 0]) / 2.0, y[idx]
            w = rng.integers(1, 4, 20).astype(float)
            a = BinningMap().fit(s, yy, sample_weight=w / w.sum())
            b = BinningMap().fit(s, yy, sample_weight=w * 1e-3)
            moved += not (np.array_equal(a.edges_, b.edges_)
                          and np.allclose(a.predict(s), b.predict(s), rtol=1e-12, atol=0))
    assert moved == 0


def test_binning_integer_weights_still_equal_duplicated_rows():
    # the boundary tolerance must not break "weight 2 == the row twice": exact boundaries fall
    # on the same side for both (consistency test; 0/1 labels from breast cancer)
    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(1)
    idx = rng.choice(len(y), 30, replace=False)
    s, yy = (14.0 - X[idx, 0]) / 2.0, y[idx]
    w = rng.integers(1, 4, 30)
    a = BinningMap().fit(s, yy, sample_weight=w.astype(float))
    b = BinningMap().fit(np.repeat(s, w), np.repeat(yy, w))
    np.testing.assert_array_equal(a.edges_, b.edges_)
    np.testing.assert_allclose(a.predict(s), b.predict(s), rtol=1e-12)


@pytest.mark.parametrize("method", ["platt", "isotonic", "beta"])
def test_normalised_weights_warn_once_not_twice(method):
    # The wrapper rescales weights that sum to less than the rows to Kish's (1965) effective
    # size and warns; the map then received weights already on that scale (their sum is
    # Kish's size, below the rows) and, before 4 December 2026, warned a second time.
    X, y = load_breast_cancer(return_X_y=True)
    w = np.random.default_rng(0).uniform(0.5, 2.0, y.size)
    w /= w.sum()
    model = make_pipeline(StandardScaler(), LogisticRegression(max_iter=5000))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        CalibrationWrapper(model, method=method, cv=3).fit(X, y, sample_weight=w)
    scale = [c for c in caught if "cannot be row frequencies" in str(c.message)]
    assert len(scale) == 1, [str(c.message) for c in scale]
    assert str(scale[0].message).startswith("CalibrationWrapper:")
    # the map on its own still warns: it is the first to rescale there
    from probwrap.calibration import PlattMap

    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        PlattMap().fit(np.linspace(-2, 2, y.size), y, sample_weight=w)
    assert sum("cannot be row frequencies" in str(c.message) for c in caught) == 1
