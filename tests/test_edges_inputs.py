"""Inputs as an awkward user passes them to the wrappers: labels scikit-learn would refuse with an
unclear message, and row weights far from 1.

Reference data: scikit-learn's bundled breast cancer set (569 rows), with a logistic regression
fitted once and frozen, so no test refits anything. The checks are behaviour (the error names
the argument and the row; a warning is raised) and exact consistency: weights divided by a power
of two give bit-identical fits (division by 2**k is exact in binary floating point).
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from sklearn.datasets import load_breast_cancer
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CalibrationWrapper, CostPolicyWrapper, PriorShiftWrapper
from probwrap._heldout import rescale_extreme_weights
from probwrap._validation import check_sample_weight, check_target_labels
from probwrap.calibration import WeightScaleWarning


@pytest.fixture(scope="module")
def cancer():
    X, y = load_breast_cancer(return_X_y=True)
    X = X[:, :5]
    model = LogisticRegression(max_iter=5000).fit(X, y)
    return X, y, model


WRAPPERS = {
    "calibration": lambda m: CalibrationWrapper(FrozenEstimator(m), method="platt"),
    "cost": lambda m: CostPolicyWrapper(FrozenEstimator(m), costs={"fp": 1, "fn": 5},
                                        strategy="tuned"),
    "shift": lambda m: PriorShiftWrapper(FrozenEstimator(m)),
}


@pytest.mark.parametrize("wrapper", sorted(WRAPPERS))
@pytest.mark.parametrize(
    "labels, message",
    [
        # scikit-learn: "'<' not supported between instances of 'int' and 'str'"
        (lambda y: np.array([1 if v else "no" for v in y], dtype=object),
         r"`y` mixes label types \(number, string\)"),
        # scikit-learn: "Unknown label type: unknown" (its estimator checks want those words)
        (lambda y: y.astype(object),
         r"Unknown label type: `y` holds numbers in an object array.*astype\(int\)"),
        (lambda y: np.where(np.arange(y.size) == 3, None, np.where(y == 1, "a", "b")),
         r"`y` contains 1 missing label\(s\) \(None or NaN; first at row 3\)"),
        (lambda y: pd.Series(np.where(np.arange(y.size) == 7, None, y), dtype="Int64"),
         r"`y` contains 1 NaN label\(s\) \(first at row 7\)"),
        (lambda y: pd.Series(pd.Categorical(np.where(np.arange(y.size) == 0, None,
                                                     np.where(y == 1, "a", "b")))),
         r"missing label\(s\) \(None or NaN; first at row 0\)"),
    ],
    ids=["mixed", "object-numbers", "none", "nullable-int-na", "categorical-nan"],
)
def test_unclear_labels_are_refused_naming_y_and_the_row(cancer, wrapper, labels, message):
    X, y, model = cancer
    with pytest.raises(ValueError, match=message):
        WRAPPERS[wrapper](model).fit(X, labels(y))


def test_label_types_accepted_as_before():
    check_target_labels(np.array(["a", "b"], dtype=object))
    check_target_labels(np.array([0.0, 1.0]))
    check_target_labels(np.array([True, False]))


@pytest.mark.parametrize("exponent", [1000, -1000, 1023, -1074])
def test_weights_far_from_one_are_rescaled_exactly_with_a_warning(cancer, exponent):
    """All weights 2**k: divided by 2**k they are exactly 1, so every wrapper must give exactly
    the unweighted fit. Before, 2**1000 made isotonic predict exact 0 and `auto` stop with a
    ZeroDivisionError; 2**1023 gave PriorShiftWrapper a NaN prior."""
    X, y, model = cancer
    w = np.full(y.size, 2.0**exponent)
    for make in [lambda m: CalibrationWrapper(FrozenEstimator(m), method="isotonic"),
                 lambda m: CalibrationWrapper(FrozenEstimator(m), method="auto", random_state=0),
                 *WRAPPERS.values()]:
        plain_fit = make(model).fit(X, y)
        with pytest.warns(WeightScaleWarning, match=r"divided by 2\*\*"):
            weighted = make(model).fit(X, y, sample_weight=w)
        np.testing.assert_array_equal(weighted.predict_proba(X), plain_fit.predict_proba(X))


def test_weight_rescale_keeps_ratios_and_leaves_input_alone():
    w = check_sample_weight(np.array([1e300, 2e300, 0.0, 4e299]), 4)
    before = w.copy()
    with pytest.warns(WeightScaleWarning, match="Demo: `sample_weight` reaches 2e\\+300"):
        out = rescale_extreme_weights(w, "Demo")
    np.testing.assert_array_equal(w, before)
    assert 1.0 <= out.max() < 2.0
    # division by a power of two is exact: the ratios are those of the input, bit for bit
    np.testing.assert_array_equal(out / out[0], w / w[0])
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # ordinary weights: no warning, unchanged values
        np.testing.assert_array_equal(rescale_extreme_weights(np.array([1e-70, 3.0, 1e70]), "D"),
                                      [1e-70, 3.0, 1e70])


@pytest.mark.parametrize(
    "labels, row",
    [(np.array(["a", "b", None, "a"], dtype=object), 2),
     (pd.Series(["a", "b", "a", None], dtype="string"), 3)],
)
def test_metrics_name_the_row_of_a_missing_label(labels, row):
    """Before: "`y_true` mixes label types (NoneType, string)"."""
    from probwrap.metrics import brier_score

    with pytest.raises(ValueError, match=rf"`y_true` contains 1 missing label\(s\) \(None or "
                                         rf"NaN; first at row {row}\)"):
        brier_score(labels, [0.1, 0.8, 0.3, 0.2], labels=["a", "b"])
    # numbers in an object array are fine for the metrics (nothing goes to scikit-learn)
    assert brier_score(np.array([0, 1, 1, 0], dtype=object), [0.0, 1.0, 1.0, 0.0]) == 0.0


@pytest.mark.parametrize("wrapper", sorted(WRAPPERS))
def test_unfitted_frozen_model_is_named(cancer, wrapper):
    """Before: AttributeError "'LogisticRegression' object has no attribute 'classes_'"."""
    X, y, _ = cancer
    with pytest.raises(ValueError, match="FrozenEstimator around an unfitted LogisticRegression"):
        WRAPPERS[wrapper](LogisticRegression()).fit(X, y)


def test_cv_prefit_points_to_frozen_estimator(cancer):
    """scikit-learn's older spelling for a fitted model; before, probwrap passed on check_cv's
    "Expected `cv` as an integer, ..." without saying what to use instead."""
    X, y, model = cancer
    with pytest.raises(ValueError, match="wrap it in sklearn.frozen.FrozenEstimator"):
        CalibrationWrapper(model, cv="prefit").fit(X, y)


@pytest.mark.parametrize("method", ["auto", "temperature"])
def test_frozen_model_class_without_heldout_rows_warns(method):
    """scikit-learn's wine set, class 2 left out of the held-out rows: temperature scaling (and
    `auto`, which chose it) fitted on the other classes without a word."""
    from sklearn.datasets import load_wine
    from sklearn.preprocessing import StandardScaler

    X, y = load_wine(return_X_y=True)
    X = StandardScaler().fit_transform(X)
    model = LogisticRegression().fit(X, y)
    keep = y != 2
    with pytest.warns(UserWarning, match=r"class\(es\) 2 of the frozen model have no held-out "
                                         r"rows in `y`"):
        CalibrationWrapper(FrozenEstimator(model), method=method).fit(X[keep], y[keep])


@pytest.mark.parametrize("exponent", [1000, -1000])
def test_adapt_rescales_weights_far_from_one_exactly(cancer, exponent):
    """PriorShiftWrapper.adapt with all weights 2**k: divided by 2**k they are exactly 1, so
    the estimate and the returned probabilities equal the unweighted adapt, bit for bit. Before,
    weights of 1e300 stopped adapt with NumPy's bare 'SVD did not converge'."""
    X, y, model = cancer
    plain_fit = PriorShiftWrapper(FrozenEstimator(model)).fit(X, y).adapt(X)
    with pytest.warns(WeightScaleWarning, match=r"PriorShiftWrapper\.adapt: .*divided by 2\*\*"):
        weighted = PriorShiftWrapper(FrozenEstimator(model)).fit(X, y).adapt(
            X, sample_weight=np.full(y.size, 2.0**exponent))
    np.testing.assert_array_equal(weighted.target_prior_, plain_fit.target_prior_)
    np.testing.assert_array_equal(weighted.predict_proba(X), plain_fit.predict_proba(X))


def test_target_prior_with_a_zero_share_warns_and_gives_exact_zero(cancer):
    """A target prior of 0 for a class is honoured (Bayes' rule with that prior, Saerens,
    Latinne & Decaestecker 2002, eq. 2.4, gives exactly 0), but never silently."""
    X, y, model = cancer
    with pytest.warns(UserWarning, match=r"gives class\(es\) \[0\] a share of 0.*exactly 1"):
        m = PriorShiftWrapper(FrozenEstimator(model), target_prior=[0.0, 1.0]).fit(X, y)
    proba = m.predict_proba(X)
    assert np.all(proba[:, 0] == 0.0) and np.all(proba[:, 1] == 1.0)
    with warnings.catch_warnings():
        warnings.simplefilter("error", UserWarning)  # a positive share: no such warning
        PriorShiftWrapper(FrozenEstimator(model), target_prior=[0.01, 0.99]).fit(X, y)
