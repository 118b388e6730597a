"""Bad input to probwrap.metrics: clear ValueErrors naming the argument; inputs left untouched."""

from __future__ import annotations

import numpy as np
import pytest

from probwrap.metrics import (
    bootstrap_interval,
    brier_decomposition,
    brier_score,
    calibration_slope_intercept,
    classwise_calibration_error,
    expected_calibration_error,
    log_loss,
    net_benefit,
    net_benefit_treat_all,
    reliability_table,
)

Y = np.array([0, 1, 0, 1, 1, 0])
P = np.array([0.2, 0.7, 0.4, 0.3, 0.9, 0.1])
P2 = np.array([[0.7, 0.2, 0.1], [0.1, 0.8, 0.1], [0.3, 0.3, 0.4]])
Y2 = np.array([0, 1, 2])


def _nb(y, p, **kw):
    return net_benefit(y, p, 0.3, **kw)


BINARY_METRICS = [
    expected_calibration_error,
    classwise_calibration_error,
    reliability_table,
    brier_decomposition,
    calibration_slope_intercept,
    log_loss,
    brier_score,
    _nb,
]


@pytest.mark.parametrize("metric", BINARY_METRICS)
@pytest.mark.parametrize(
    "bad, match",
    [
        ([0.2, 0.7, 1.4, 0.3, 0.9, 0.1], r"`y_prob` must contain probabilities in \[0, 1\]"),
        ([0.2, 0.7, -0.1, 0.3, 0.9, 0.1], r"`y_prob` must contain probabilities"),
        ([0.2, np.nan, 0.4, 0.3, 0.9, 0.1], r"`y_prob` contains NaN"),
        ([0.2, 0.7, 0.4], r"`y_true` has 6 rows but `y_prob` has 3"),
    ],
)
def test_bad_probabilities(metric, bad, match):
    with pytest.raises(ValueError, match=match):
        metric(Y, bad)


@pytest.mark.parametrize("metric", BINARY_METRICS)
def test_non_binary_labels_for_1d_forms(metric):
    with pytest.raises(ValueError, match=r"`y_true` has 3 distinct labels"):
        metric([0, 1, 2, 1, 0, 1], P)


@pytest.mark.parametrize("metric", BINARY_METRICS)
def test_all_zero_weights(metric):
    with pytest.raises(ValueError, match=r"`sample_weight` is zero for every row"):
        metric(Y, P, sample_weight=np.zeros(6))


@pytest.mark.parametrize("metric", BINARY_METRICS)
def test_negative_or_misshaped_weights(metric):
    with pytest.raises(ValueError, match=r"`sample_weight` must be non-negative"):
        metric(Y, P, sample_weight=[1, 1, -1, 1, 1, 1])
    with pytest.raises(ValueError, match=r"`sample_weight` has 2 entries"):
        metric(Y, P, sample_weight=[1, 1])


@pytest.mark.parametrize("metric", BINARY_METRICS)
def test_single_non_01_label_needs_labels(metric):
    with pytest.raises(ValueError, match=r"single label 'yes'.*labels=\[negative, positive\]"):
        metric(["yes"] * 6, P)


def test_single_01_label_is_accepted_and_labels_resolve_others():
    # all-positive 0/1 labels are unambiguous: Brier = mean (1 - p)^2
    assert brier_score(np.ones(6), P) == pytest.approx(np.mean((1 - P) ** 2))
    assert brier_score(["yes"] * 6, P, labels=["no", "yes"]) == pytest.approx(
        np.mean((1 - P) ** 2)
    )
    with pytest.raises(ValueError, match=r"`y_true` contains labels \['maybe'\]"):
        brier_score(["yes"] * 5 + ["maybe"], P, labels=["no", "yes"])
    with pytest.raises(ValueError, match=r"`labels` must list 2 classes"):
        brier_score(Y, P, labels=[0, 1, 2])


@pytest.mark.parametrize("metric", [expected_calibration_error, classwise_calibration_error,
                                    reliability_table, brier_decomposition])
def test_unknown_strategy_and_bad_n_bins(metric):
    with pytest.raises(ValueError, match=r"`strategy` must be one of \['uniform', 'quantile'\]"):
        metric(Y, P, n_bins=3, strategy="equal")
    for bad in (0, -2, 2.5, True):
        with pytest.raises(ValueError, match=r"`n_bins` must be a whole number >= 1"):
            metric(Y, P, n_bins=bad)


@pytest.mark.parametrize("bad", [0.0, 1.0, -0.2, 1.5, np.nan, [0.2, 1.0]])
def test_threshold_outside_open_unit_interval(bad):
    with pytest.raises(ValueError, match=r"`threshold` must lie strictly between 0 and 1"):
        net_benefit(Y, P, bad)
    with pytest.raises(ValueError, match=r"`threshold` must lie strictly between 0 and 1"):
        net_benefit_treat_all(Y, bad)


def test_multiclass_label_checks():
    with pytest.raises(ValueError, match=r"`y_true` must hold column indices 0..2"):
        log_loss([0, 1, 3], P2)
    with pytest.raises(ValueError, match=r"`y_true` holds labels of type"):
        expected_calibration_error(["a", "b", "c"], P2)
    with pytest.raises(ValueError, match=r"`labels` must list 3 classes"):
        brier_score(["a", "b", "c"], P2, labels=["a", "b"])
    with pytest.raises(ValueError, match=r"Each row of `y_prob` must sum to one"):
        log_loss(Y2, [[0.5, 0.2, 0.1], [0.1, 0.8, 0.1], [0.3, 0.3, 0.4]])
    with pytest.raises(ValueError, match=r"`y_prob` must be 1-d positive-class probabilities"):
        net_benefit(Y2, P2, 0.5)


def test_slope_needs_both_classes_and_overlap():
    with pytest.raises(ValueError, match=r"`y_true` must contain both classes"):
        calibration_slope_intercept([1, 1, 1], [0.2, 0.5, 0.7])
    with pytest.raises(ValueError, match=r"`y_true` must contain both classes"):
        calibration_slope_intercept([0, 1, 1], [0.2, 0.5, 0.7], sample_weight=[0, 1, 1])
    with pytest.warns(UserWarning, match=r"do not overlap in logit\(`y_prob`\)"):
        res = calibration_slope_intercept([0, 0, 1, 1], [0.1, 0.2, 0.6, 0.7])
    assert np.isnan(res.slope) and np.isfinite(res.intercept)


def test_clip_warnings_and_bad_clip():
    with pytest.warns(UserWarning, match=r"2 row\(s\) of `y_prob` lie closer than `clip`"):
        res = calibration_slope_intercept([0, 1, 0, 1, 1, 0], [0.0, 0.7, 0.4, 0.3, 1.0, 0.6])
    assert np.isfinite(res.slope) and np.isfinite(res.intercept)
    with pytest.raises(ValueError, match=r"`clip` must be a number in \(0, 0.5\)"):
        log_loss(Y, P, clip=0.0)
    with pytest.raises(ValueError, match=r"`clip` must be a number in \(0, 0.5\)"):
        calibration_slope_intercept(Y, P, clip=0.7)


def test_bootstrap_argument_checks():
    with pytest.raises(ValueError, match=r"`metric` must be callable"):
        bootstrap_interval("brier", Y, P)
    with pytest.raises(ValueError, match=r"`n_resamples` must be a whole number >= 2"):
        bootstrap_interval(brier_score, Y, P, n_resamples=1)
    with pytest.raises(ValueError, match=r"`confidence_level` must be in \(0, 1\)"):
        bootstrap_interval(brier_score, Y, P, confidence_level=95)
    with pytest.raises(ValueError, match=r"`method` must be one of"):
        bootstrap_interval(brier_score, Y, P, method="bca")
    with pytest.raises(ValueError, match=r"`y_prob` has 3 rows but `y_true` has 6"):
        bootstrap_interval(brier_score, Y, P[:3])


def test_bootstrap_warns_about_unusable_resamples():
    # 6 rows with one positive: resamples without the positive (about (5/6)^6 = 33%) make the
    # calibration slope undefined; they are left out with a warning, never silently
    y = np.array([0, 0, 0, 1, 0, 0])
    p = np.array([0.1, 0.5, 0.3, 0.4, 0.6, 0.2])
    with pytest.warns(UserWarning, match=r"resamples were left out"):
        res = bootstrap_interval(
            lambda a, b, sample_weight=None: calibration_slope_intercept(
                a, b, sample_weight=sample_weight
            ).slope,
            y, p, n_resamples=60, random_state=0,
        )
    assert res.n_failed > 0
    assert res.bootstrap_distribution.shape == (60 - res.n_failed,)
    assert np.all(np.isfinite(res.bootstrap_distribution))


@pytest.mark.parametrize("metric", BINARY_METRICS)
def test_inputs_not_modified(metric):
    y, p, w = Y.copy(), P.copy(), np.arange(1.0, 7.0)
    metric(y, p, sample_weight=w)
    np.testing.assert_array_equal(y, Y)
    np.testing.assert_array_equal(p, P)
    np.testing.assert_array_equal(w, np.arange(1.0, 7.0))


def test_multiclass_inputs_not_modified():
    p = P2.copy()
    brier_score(Y2, p)
    log_loss(Y2, p)
    expected_calibration_error(Y2, p, strategy="quantile", n_bins=2)
    brier_decomposition(Y2, p, n_bins=2)
    np.testing.assert_array_equal(p, P2)
