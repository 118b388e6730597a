"""The binary report's one-pass bootstrap (from FAST_BOOTSTRAP_ROWS labelled rows on).

Consistency tests against the library's bootstrap_interval with the same seed: the rows are
resampled identically, so the Brier score, log loss and binned calibration error intervals are
the same numbers (up to summation order); the calibration slope and intercept use one Newton
step per resample (Moulton & Zeger 1991) instead of a full refit, so they agree with the full
refits to a small share of the interval's width.
"""

import numpy as np
import pytest

from probwrap.metrics import (
    bootstrap_interval,
    brier_score,
    calibration_slope_intercept,
    expected_calibration_error,
    log_loss,
)
from probwrap.report._content import collect_content
from probwrap.report._fast_metrics import FAST_BOOTSTRAP_ROWS

N_RES = 12


@pytest.fixture(scope="module")
def large():
    rng = np.random.default_rng(3)
    n = FAST_BOOTSTRAP_ROWS + 1000
    p = rng.beta(1.0, 6.0, size=n)
    # a miscalibrated model: the truth is flatter than p, so the slope is clearly below 1
    y = (rng.uniform(size=n) < 0.3 * p + 0.05).astype(int)
    w = rng.integers(1, 3, size=n).astype(float)
    content = collect_content(y_true=y, y_prob=p, sample_weight=w, n_resamples=N_RES,
                              random_state=4)
    seed = np.random.RandomState(4).randint(2**31 - 1)  # the report's bootstrap seed
    return y, p, w, {m.key: m for m in content.metrics}, seed


@pytest.mark.parametrize("key, fn, kw", [("brier", brier_score, {}),
                                         ("log_loss", log_loss, {})])
def test_mean_metrics_equal_the_library_bootstrap(large, key, fn, kw):
    y, p, w, rows, seed = large
    res = bootstrap_interval(fn, y, p, sample_weight=w, n_resamples=N_RES, random_state=seed)
    assert rows[key].value == fn(y, p, sample_weight=w)
    assert np.isclose(rows[key].low, res.confidence_interval.low, rtol=1e-9)
    assert np.isclose(rows[key].high, res.confidence_interval.high, rtol=1e-9)


def test_binned_error_equals_the_library_basic_bootstrap(large):
    y, p, w, rows, seed = large
    res = bootstrap_interval(expected_calibration_error, y, p, sample_weight=w,
                             n_resamples=N_RES, random_state=seed, method="basic", n_bins=10)
    plain = expected_calibration_error(y, p, sample_weight=w, n_bins=10)
    m = rows["ece"]
    assert m.plain_value == plain
    assert np.isclose(m.value, max(2 * plain - np.median(res.bootstrap_distribution), 0.0),
                      rtol=1e-9)
    assert np.isclose(m.low, max(res.confidence_interval.low, 0.0), rtol=1e-9, atol=1e-15)
    assert np.isclose(m.high, max(res.confidence_interval.high, 0.0), rtol=1e-9)
    assert m.low <= m.value <= m.high


def test_one_step_slope_and_intercept_follow_the_full_refits(large):
    y, p, w, rows, seed = large
    fit = calibration_slope_intercept(y, p, sample_weight=w)
    assert rows["slope"].value == fit.slope and rows["intercept"].value == fit.intercept
    assert fit.slope < 0.9  # the miscalibration is visible

    def slope(yt, yp, sample_weight=None):
        return calibration_slope_intercept(yt, yp, sample_weight=sample_weight).slope

    def intercept(yt, yp, sample_weight=None):
        return calibration_slope_intercept(yt, yp, sample_weight=sample_weight).intercept

    for key, fn in (("slope", slope), ("intercept", intercept)):
        res = bootstrap_interval(fn, y, p, sample_weight=w, n_resamples=N_RES,
                                 random_state=seed)
        width = res.confidence_interval.high - res.confidence_interval.low
        # the one-step error is O(1/n); the interval's width O(1/sqrt(n))
        assert abs(rows[key].low - res.confidence_interval.low) < 0.03 * width, key
        assert abs(rows[key].high - res.confidence_interval.high) < 0.03 * width, key
