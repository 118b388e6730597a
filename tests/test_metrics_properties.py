"""Property tests for probwrap.metrics (hypothesis)."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from probwrap.metrics import (
    brier_decomposition,
    brier_score,
    calibration_slope_intercept,
    classwise_calibration_error,
    expected_calibration_error,
    log_loss,
    net_benefit,
    reliability_table,
)

SETTINGS = settings(max_examples=40, deadline=None)

# forecasts include exact bin edges (0, .25, .5, 1) and repeats, where binning rules matter
PROB = st.one_of(
    st.sampled_from([0.0, 0.1, 0.25, 0.5, 0.75, 1.0]),
    st.floats(0.0, 1.0, allow_nan=False),
)


@st.composite
def binary_data(draw, min_size=2, max_size=30):
    n = draw(st.integers(min_size, max_size))
    p = np.array(draw(st.lists(PROB, min_size=n, max_size=n)))
    y = np.array(draw(st.lists(st.integers(0, 1), min_size=n, max_size=n)))
    w = np.array(draw(st.lists(st.integers(0, 3), min_size=n, max_size=n)))
    assume(w.sum() > 0)
    return y, p, w


@st.composite
def multiclass_data(draw, k=3, max_size=25):
    n = draw(st.integers(2, max_size))
    raw = np.array(
        draw(st.lists(st.sampled_from([0.0, 0.5, 1.0, 2.0, 3.0, 7.0]), min_size=n * k,
                      max_size=n * k))
    ).reshape(n, k)
    raw[:, 0] += 0.25  # no all-zero rows
    p = raw / raw.sum(axis=1, keepdims=True)
    y = np.array(draw(st.lists(st.integers(0, k - 1), min_size=n, max_size=n)))
    w = np.array(draw(st.lists(st.integers(0, 3), min_size=n, max_size=n)))
    assume(w.sum() > 0)
    return y, p, w


def _nb(y, p, sample_weight=None):
    return net_benefit(y, p, [0.1, 0.25, 0.5, 0.9], sample_weight=sample_weight)


def _decomp(**kw):
    def f(y, p, sample_weight=None):
        d = brier_decomposition(y, p, sample_weight=sample_weight, **kw)
        return np.array([d.brier, d.reliability, d.resolution, d.uncertainty,
                         d.within_bin_variance, d.within_bin_covariance])
    return f


def _table(y, p, sample_weight=None):
    t = reliability_table(y, p, n_bins=4, strategy="quantile", sample_weight=sample_weight)
    return np.concatenate([t.lower, t.weight, t.mean_predicted, t.observed_frequency])


def _ece(strategy, n_bins=4):
    def f(y, p, sample_weight=None):
        return expected_calibration_error(y, p, n_bins=n_bins, strategy=strategy,
                                          sample_weight=sample_weight)
    return f


def _classwise(strategy):
    def f(y, p, sample_weight=None):
        return classwise_calibration_error(y, p, n_bins=3, strategy=strategy,
                                           sample_weight=sample_weight)
    return f


METRICS = {
    "ece_uniform": _ece("uniform"),
    "ece_quantile": _ece("quantile"),
    "classwise_uniform": _classwise("uniform"),
    "classwise_quantile": _classwise("quantile"),
    "table": _table,
    "decomposition": _decomp(),
    "decomposition_binned": _decomp(n_bins=4, strategy="quantile"),
    "log_loss": lambda y, p, sample_weight=None: log_loss(y, p, sample_weight=sample_weight,
                                                          clip=1e-6),
    "brier": brier_score,
    "net_benefit": _nb,
}


def _close(a, b):
    np.testing.assert_allclose(np.asarray(a, float), np.asarray(b, float), rtol=1e-9, atol=1e-12)


def _silence(func):
    # log loss warns about floored rows (exact zeros drawn by hypothesis); not under test here
    def wrapped(*args, **kwargs):
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", UserWarning)
            return func(*args, **kwargs)

    return wrapped


@pytest.mark.parametrize("name", sorted(METRICS))
@SETTINGS
@given(data=binary_data())
def test_integer_weight_equals_repeated_rows_binary(name, data):
    # weight c counts a row c times (c = 0 drops it)
    y, p, w = data
    metric = _silence(METRICS[name])
    _close(metric(y, p, sample_weight=w), metric(np.repeat(y, w), np.repeat(p, w)))


@pytest.mark.parametrize(
    "name", ["ece_uniform", "ece_quantile", "classwise_quantile", "table", "decomposition",
             "decomposition_binned", "log_loss", "brier"]
)
@SETTINGS
@given(data=multiclass_data())
def test_integer_weight_equals_repeated_rows_multiclass(name, data):
    y, p, w = data
    metric = _silence(METRICS[name])
    _close(
        metric(y, p, sample_weight=w),
        metric(np.repeat(y, w), np.repeat(p, w, axis=0)),
    )


@pytest.mark.parametrize("name", sorted(METRICS))
@SETTINGS
@given(data=binary_data(), seed=st.integers(0, 2**31 - 1))
def test_row_order_does_not_matter(name, data, seed):
    y, p, w = data
    perm = np.random.default_rng(seed).permutation(len(y))
    metric = _silence(METRICS[name])
    _close(metric(y, p, sample_weight=w), metric(y[perm], p[perm], sample_weight=w[perm]))


@SETTINGS
@given(data=binary_data(), seed=st.integers(0, 2**31 - 1))
def test_slope_intercept_weights_and_order(data, seed):
    y, p, w = data
    p = np.clip(p, 0.01, 0.99)  # keep the clip warning out; exact 0/1 are tested elsewhere
    x = np.log(p / (1 - p))
    pos, neg = (y == 1) & (w > 0), (y == 0) & (w > 0)
    assume(pos.any() and neg.any())
    assume(x[pos].min() < x[neg].max() - 0.05 and x[neg].min() < x[pos].max() - 0.05)
    a = calibration_slope_intercept(y, p, sample_weight=w)
    b = calibration_slope_intercept(np.repeat(y, w), np.repeat(p, w))
    perm = np.random.default_rng(seed).permutation(len(y))
    c = calibration_slope_intercept(y[perm], p[perm], sample_weight=w[perm])
    for other in (b, c):
        assert other.slope == pytest.approx(a.slope, rel=1e-7, abs=1e-9)
        assert other.intercept == pytest.approx(a.intercept, rel=1e-7, abs=1e-9)


@SETTINGS
@given(data=binary_data(), n_bins=st.integers(1, 12),
       strategy=st.sampled_from(["uniform", "quantile"]))
def test_ece_in_unit_interval(data, n_bins, strategy):
    y, p, w = data
    for value in (
        expected_calibration_error(y, p, n_bins=n_bins, strategy=strategy, sample_weight=w),
        classwise_calibration_error(y, p, n_bins=n_bins, strategy=strategy, sample_weight=w),
    ):
        assert 0.0 <= value <= 1.0


@SETTINGS
@given(data=multiclass_data(), n_bins=st.integers(1, 12))
def test_top_label_ece_in_unit_interval(data, n_bins):
    y, p, w = data
    assert 0.0 <= expected_calibration_error(y, p, n_bins=n_bins, sample_weight=w) <= 1.0


@SETTINGS
@given(data=binary_data(max_size=40))
def test_murphy_identity_exact(data):
    # Murphy (1973): grouped by distinct forecast, BS = REL - RES + UNC exactly
    y, p, w = data
    d = brier_decomposition(y, p, sample_weight=w)
    assert abs(d.reliability - d.resolution + d.uncertainty - d.brier) < 1e-12
    assert d.within_bin_variance == 0.0 and d.within_bin_covariance == 0.0
    assert d.brier == pytest.approx(brier_score(y, p, sample_weight=w), abs=1e-15)
    # binned (the two extra terms of Stephenson, Coelho & Jolliffe 2008 close the gap exactly)
    b = brier_decomposition(y, p, sample_weight=w, n_bins=3)
    total = b.reliability - b.resolution + b.uncertainty + b.within_bin_variance
    assert abs(total - b.within_bin_covariance - b.brier) < 1e-12


@SETTINGS
@given(data=multiclass_data())
def test_murphy_identity_exact_multiclass(data):
    y, p, w = data
    d = brier_decomposition(y, p, sample_weight=w)
    assert abs(d.reliability - d.resolution + d.uncertainty - d.brier) < 1e-12


def test_calibrated_forecast_has_small_ece():
    # y drawn from p: in each bin |obar - pbar| has sd <= sqrt(.25 / n_b), so by Jensen
    # E[ECE] <= sum_b (n_b / n) sqrt(.25 / n_b) <= sqrt(.25 * B / n) = 0.011 for n = 20000, B = 10.
    # 0.03 is ~2.7x that bound (seeded). A distorted forecast (p**2) must score far above it.
    rng = np.random.default_rng(2024)
    p = rng.uniform(size=20_000)
    y = (rng.uniform(size=20_000) < p).astype(int)
    for strategy in ("uniform", "quantile"):
        assert expected_calibration_error(y, p, strategy=strategy) < 0.03
        assert expected_calibration_error(y, p**2, strategy=strategy) > 0.1
    # slope and intercept of a calibrated forecast: near 1 and 0 (sd ~ 0.03 at this n)
    res = calibration_slope_intercept(y, np.clip(p, 1e-6, 1 - 1e-6))
    assert res.slope == pytest.approx(1.0, abs=0.1)
    assert res.intercept == pytest.approx(0.0, abs=0.1)


def test_calibrated_multiclass_top_label_ece_small():
    rng = np.random.default_rng(7)
    logits = rng.normal(size=(20_000, 3)) * 1.5
    p = np.exp(logits) / np.exp(logits).sum(axis=1, keepdims=True)
    y = (rng.uniform(size=(20_000, 1)) > np.cumsum(p, axis=1)).sum(axis=1)
    assert expected_calibration_error(y, p) < 0.03
    assert classwise_calibration_error(y, p) < 0.03
    sharpened = p**3 / (p**3).sum(axis=1, keepdims=True)
    assert expected_calibration_error(y, sharpened) > 0.05
