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


def _rare_positives(n_pos, top=False):
    """FAST_BOOTSTRAP_ROWS rows, ``n_pos`` positives spread over the middle of the forecasts
    (the classes overlap on all rows) and, with ``top``, one more above every negative."""
    rng = np.random.default_rng(0)
    n = FAST_BOOTSTRAP_ROWS
    p = rng.uniform(2e-5, 2e-4, size=n)
    y = np.zeros(n, dtype=int)
    order = np.argsort(p)
    y[order[np.linspace(n // 5, 4 * n // 5, n_pos).astype(int)]] = 1
    if top:
        y[order[-1]] = 1
    return y, p


def _refit_failures(y, p, seed, n_resamples):
    """Resamples on which the full refits fail, by bootstrap_interval with the same seed."""
    from probwrap.metrics._slope import slope_intercept_fit

    def slope(yt, yp, sample_weight=None):
        fit = slope_intercept_fit(yt, yp, sample_weight=sample_weight)
        if fit.notes:
            raise ValueError(fit.notes[0])
        return fit.slope

    def intercept(yt, yp, sample_weight=None):
        return slope_intercept_fit(yt, yp, sample_weight=sample_weight).intercept

    with pytest.warns(UserWarning, match="resamples were left out"):
        return {key: bootstrap_interval(fn, y, p, n_resamples=n_resamples,
                                        random_state=seed).n_failed
                for key, fn in (("slope", slope), ("intercept", intercept))}


def test_resamples_without_the_rare_class_are_dropped_and_the_interval_withheld():
    # one positive in 50,000 rows: a resample misses it with probability (1 - 1/n)^n, about
    # e^-1 = 0.37, so the slope and intercept cannot be computed there (bootstrap_interval's
    # refits raise). The one-pass bootstrap used to give them finite one-step values, count 0
    # dropped resamples and show an interval; now it drops and counts exactly the resamples
    # the refits drop, and more than 10 % dropped withholds the interval, as below 50,000 rows.
    y, p = _rare_positives(1)
    n_res = 40
    with pytest.warns(UserWarning, match="no interval"):
        content = collect_content(y_true=y, y_prob=p, n_resamples=n_res, random_state=4)
    rows = {m.key: m for m in content.metrics}
    seed = np.random.RandomState(4).randint(2**31 - 1)  # the report's bootstrap seed
    failed = _refit_failures(y, p, seed, n_res)
    assert failed["slope"] == failed["intercept"] > 0.1 * n_res
    for key in ("slope", "intercept"):
        assert rows[key].dropped_resamples == failed[key], key
        assert np.isnan(rows[key].low) and np.isnan(rows[key].high), key
        assert rows[key].interval_note.startswith("no interval"), key
        assert np.isfinite(rows[key].value), key
    assert any(n.key == "metric:slope" and "held one class only" in n.message
               for n in content.notes)
    # the mean metrics can be computed on every resample
    assert rows["brier"].dropped_resamples == 0 and np.isfinite(rows["brier"].low)


def test_resamples_whose_classes_separate_drop_the_slope_only():
    # three positives, one above every negative: a resample holding that one alone (of the
    # positives) separates the classes, so its slope is unbounded and dropped while its
    # intercept is computed; a resample holding none drops both. Counts as the refits'.
    from probwrap.report._common import NoteLog
    from probwrap.report._fast_metrics import fast_metric_rows

    y, p = _rare_positives(2, top=True)
    n_res, seed = 60, 11
    labels = {k: k for k in ("brier", "log_loss", "ece", "slope", "intercept")}
    notes = NoteLog()
    with pytest.warns(UserWarning, match="left out"):
        rows = {r.key: r for r in fast_metric_rows(y, p, None, 10, n_res, 0.95, seed, notes,
                                                   labels)}
    failed = _refit_failures(y, p, seed, n_res)
    assert failed["slope"] > failed["intercept"] > 0
    assert rows["slope"].dropped_resamples == failed["slope"]
    assert rows["intercept"].dropped_resamples == failed["intercept"]
    assert any("did not overlap" in n.message for n in notes.about("metric:slope"))
