"""Ugly but legitimate input types a user meets: estimator settings that name classes during
cross-fitting, pandas containers read by label, one-column probability frames, length
mismatches, weights a model cannot take, group columns of dates, 0-d cutoffs and mixed action
labels. References: scikit-learn's ``cross_val_predict`` and ``log_loss``."""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.dummy import DummyClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import log_loss as sk_log_loss
from sklearn.model_selection import StratifiedKFold, cross_val_predict
from sklearn.neighbors import KNeighborsClassifier
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.svm import LinearSVC

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap.calibration import PlattMap
from probwrap.metrics import brier_score, calibration_by_group, log_loss


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    return X[:300], y[:300]


def _lr(class_weight=None):
    return make_pipeline(StandardScaler(), LogisticRegression(C=0.1, class_weight=class_weight))


# -- cross-fitting keeps the labels as given ------------------------------------------------
def test_heldout_predictions_with_named_class_weights_match_scikit_learn(cancer):
    """class_weight keyed by the user's labels: the held-out probabilities equal scikit-learn's
    cross_val_predict on 0/1 codes with the same weights keyed by code (same folds)."""
    X, y = cancer
    names = np.where(y == 1, "benign", "malignant")  # sorted: benign (code 0), malignant (1)
    splits = list(StratifiedKFold(3, shuffle=True, random_state=0).split(X, y))
    wrapper = CalibrationWrapper(
        _lr({"malignant": 5.0, "benign": 1.0}), method="platt", cv=splits
    )
    ho = wrapper._fit_heldout(X, names)
    codes = (names == "malignant").astype(int)
    lr = make_pipeline(StandardScaler(), LogisticRegression(C=0.1, class_weight={1: 5.0, 0: 1.0}))
    ref = cross_val_predict(lr, X, codes, cv=splits, method="predict_proba")
    np.testing.assert_allclose(ho.values, ref, rtol=0, atol=1e-12)
    np.testing.assert_array_equal(wrapper.classes_, ["benign", "malignant"])


@pytest.mark.parametrize("wrapper_type", [CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper])
def test_every_wrapper_cross_fits_a_model_whose_settings_name_labels(cancer, wrapper_type):
    X, y = cancer
    signed = np.where(y == 1, 1, -1)
    kwargs = {"costs": {"fp": 1, "fn": 5}, "strategy": "tuned"} if (
        wrapper_type is CostPolicyWrapper) else {}
    model = wrapper_type(_lr({1: 5.0, -1: 1.0}), cv=3, random_state=0, **kwargs)
    model.fit(X, signed)
    np.testing.assert_array_equal(model.classes_, [-1, 1])
    assert set(np.unique(model.predict(X))) <= {-1, 1}


def test_constant_dummy_named_by_label_is_cross_fitted(cancer):
    X, y = cancer
    names = np.where(y == 1, "yes", "no")
    model = CalibrationWrapper(
        DummyClassifier(strategy="constant", constant="no"), method="platt", cv=3
    ).fit(X, names)
    proba = model.predict_proba(X[:5])
    assert np.all((proba > 0) & (proba < 1))


def test_multiclass_decision_function_with_a_class_missing_from_a_fold():
    """A class absent from a training part scores 50 below the row's lowest score."""
    X, y = load_digits(n_class=4, return_X_y=True)
    rare = np.flatnonzero(y == 3)[:2]
    keep = np.r_[np.flatnonzero(y != 3), rare]
    X, y = X[keep], y[keep]
    rare = np.flatnonzero(y == 3)
    rest = np.setdiff1d(np.arange(y.size), rare)
    parts = np.array_split(np.r_[rare, rest], 3)  # both rows of class 3 in the first test part
    splits = [(np.setdiff1d(np.arange(y.size), part), part) for part in parts]
    wrapper = CalibrationWrapper(make_pipeline(StandardScaler(), LinearSVC()), cv=splits)
    with pytest.warns(UserWarning, match="absent from the training part"):
        ho = wrapper._fit_heldout(X, y, response="decision_function")
    first = parts[0]
    np.testing.assert_array_equal(ho.values[first, 3], ho.values[first, :3].min(axis=1) - 50.0)
    assert np.all(ho.values[parts[1], 3] > ho.values[parts[1], :3].min(axis=1) - 50.0)


# -- lengths, weights and warnings -------------------------------------------------------------
@pytest.mark.parametrize("make", [
    lambda m: CalibrationWrapper(FrozenEstimator(m)),
    lambda m: CalibrationWrapper(FrozenEstimator(m), method="platt"),
    lambda m: CostPolicyWrapper(FrozenEstimator(m), costs={"fp": 1, "fn": 3}),
    lambda m: CostPolicyWrapper(FrozenEstimator(m), costs={"fp": 1, "fn": 3}, strategy="tuned"),
    lambda m: PriorShiftWrapper(FrozenEstimator(m)),
])
def test_x_and_y_of_different_lengths_are_refused_by_name(cancer, make):
    X, y = cancer
    model = _lr().fit(X[:100], y[:100])
    with pytest.raises(ValueError, match=r"`X` has 200 rows but `y` has 199 labels"):
        make(model).fit(X[100:], y[100:299])


def test_weights_a_model_cannot_take_are_said_to_be_ignored_under_the_plugin_rule(cancer):
    X, y = cancer
    w = np.where(y == 1, 1.0, 3.0)
    model = CostPolicyWrapper(KNeighborsClassifier(), costs={"fp": 1, "fn": 4})
    with pytest.warns(UserWarning, match="`sample_weight` is ignored: `estimator` "
                                         r"\(KNeighborsClassifier\) does not accept it"):
        model.fit(X, y, sample_weight=w)
    plain_fit = CostPolicyWrapper(KNeighborsClassifier(), costs={"fp": 1, "fn": 4}).fit(X, y)
    np.testing.assert_array_equal(model.predict(X), plain_fit.predict(X))


def test_no_probability_advice_for_log_odds_the_wrapper_made(cancer):
    """A weak model's log-odds all lie in [0, 1]; PlattMap's hint to convert probabilities
    first is for callers of the map, not for users of the wrapper, who passed a model."""
    X, y = cancer  # 60 % benign (class 1) in rows 100-299
    weak = make_pipeline(StandardScaler(), LogisticRegression(C=1e-5)).fit(X[100:], y[100:])
    odds = np.log(weak.predict_proba(X[:200])[:, 1] / weak.predict_proba(X[:200])[:, 0])
    assert 0 <= odds.min() and odds.max() <= 1  # the case of the test
    for method in ("platt", "auto"):
        with warnings.catch_warnings(record=True) as seen:
            warnings.simplefilter("always")
            model = CalibrationWrapper(FrozenEstimator(weak), method=method, random_state=0)
            model.fit(X[:200], y[:200])
        assert not [w for w in seen if "look like probabilities" in str(w.message)]
        assert not any("look like probabilities" in note
                       for note in (getattr(model, "method_notes_", None) or {}).values())
    with pytest.warns(UserWarning, match="look like probabilities"):
        PlattMap().fit(odds, y[:200])  # the map itself still says so


# -- pandas containers ---------------------------------------------------------------------
def test_target_prior_series_is_read_by_label(cancer):
    X, y = cancer
    names = pd.Series(np.where(y == 1, "yes", "no"))
    base = PriorShiftWrapper(FrozenEstimator(_lr().fit(X[:100], names[:100])))
    wanted = pd.Series({"yes": 0.7, "no": 0.3})  # not in classes_ order (no, yes)
    by_series = base.set_params(target_prior=wanted).fit(X[100:], names[100:])
    np.testing.assert_allclose(by_series.known_prior_, [0.3, 0.7])
    by_dict = PriorShiftWrapper(FrozenEstimator(by_series.estimator.estimator),
                                target_prior={"no": 0.3, "yes": 0.7}).fit(X[100:], names[100:])
    np.testing.assert_allclose(by_series.predict_proba(X[:20]), by_dict.predict_proba(X[:20]))
    positional = PriorShiftWrapper(FrozenEstimator(by_series.estimator.estimator),
                                   target_prior=pd.Series([0.3, 0.7])).fit(X[100:], names[100:])
    np.testing.assert_allclose(positional.known_prior_, [0.3, 0.7])
    with pytest.raises(ValueError, match="not class labels"):
        PriorShiftWrapper(FrozenEstimator(by_series.estimator.estimator),
                          target_prior=pd.Series({"yes": 0.7, "maybe": 0.3})
                          ).fit(X[100:], names[100:])


def test_one_column_probability_frame_is_the_positive_class(cancer):
    """scikit-learn's log_loss reads (n, 1) as the positive class's probabilities."""
    X, y = cancer
    p = _lr().fit(X[:150], y[:150]).predict_proba(X[150:])[:, 1]
    frame = pd.DataFrame({"risk": p})
    assert log_loss(y[150:], frame[["risk"]]) == pytest.approx(
        sk_log_loss(y[150:], p.reshape(-1, 1)), rel=1e-12)
    assert brier_score(y[150:], frame[["risk"]]) == pytest.approx(brier_score(y[150:], p))


def test_groups_of_dates_keep_their_type_and_mixed_groups_are_refused(cancer):
    X, y = cancer
    p = _lr().fit(X[:150], y[:150]).predict_proba(X[150:])[:, 1]
    days = pd.to_datetime(np.where(np.arange(150) % 2 == 0, "2024-01-01", "2024-02-01"))
    checks = calibration_by_group(y[150:], p, groups=pd.Series(days), n_resamples=0)
    labels = {c.group for c in checks.groups}
    assert labels == {np.datetime64("2024-01-01", "ns"), np.datetime64("2024-02-01", "ns")}
    mixed = np.array([1, "a"] * 75, dtype=object)
    with pytest.raises(ValueError, match="`groups` mixes label types"):
        calibration_by_group(y[150:], p, groups=mixed, n_resamples=0)


# -- parameters of the cost rule -----------------------------------------------------------
def test_zero_d_array_cutoff_and_mixed_action_labels(cancer):
    X, y = cancer
    model = _lr().fit(X[:150], y[:150])
    a = CostPolicyWrapper(FrozenEstimator(model), strategy="fixed", cutoff=np.array(0.3))
    b = CostPolicyWrapper(FrozenEstimator(model), strategy="fixed", cutoff=0.3)
    np.testing.assert_array_equal(a.fit(X[150:], y[150:]).predict(X[150:]),
                                  b.fit(X[150:], y[150:]).predict(X[150:]))
    with pytest.raises(ValueError, match="`cutoff`"):
        CostPolicyWrapper(FrozenEstimator(model), strategy="fixed",
                          cutoff=np.array([0.3, 0.4])).fit(X[150:], y[150:])
    mixed = CostPolicyWrapper(FrozenEstimator(model), costs={"fp": 1, "fn": 4},
                              actions=["ship", 1]).fit(X[150:], y[150:])
    out = mixed.predict(X[150:])
    assert {type(v) for v in out.tolist()} <= {str, int}
    assert set(out.tolist()) <= {"ship", 1} and 1 in out.tolist()


def test_tuned_rule_on_a_model_that_does_not_rank_the_rows_says_so():
    """A constant model (every held-out row the same probability): the least-cost rule can only
    act on all rows or none, and a warning says which (scikit-learn's
    TunedThresholdClassifierCV refuses such a model)."""
    X = np.zeros((100, 2))
    y = np.r_[np.zeros(80), np.ones(20)].astype(int)
    cross = CostPolicyWrapper(DummyClassifier(strategy="prior"), costs={"fp": 1, "fn": 10},
                              strategy="tuned", cv=3)
    with pytest.warns(UserWarning, match=r"the same probability within each fold .*acts on "
                                         r"all of them"):
        cross.fit(X, y)
    assert np.all(cross.predict(X) == 1)  # 0.2 * 10 > 0.8 * 1: acting on all is cheaper
    frozen = CostPolicyWrapper(FrozenEstimator(DummyClassifier(strategy="prior").fit(X, y)),
                               costs={"fp": 1, "fn": 2}, strategy="tuned")
    with pytest.warns(UserWarning, match=r"the same probability \(0.2\).*acts on none"):
        frozen.fit(X, y)
    assert np.all(frozen.predict(X) == 0)  # 0.2 * 2 < 0.8 * 1
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # a model that ranks the rows: no such warning
        X2, y2 = load_breast_cancer(return_X_y=True)
        CostPolicyWrapper(_lr(), costs={"fp": 1, "fn": 3}, strategy="tuned", cv=3,
                          random_state=0).fit(X2[:300], y2[:300])
