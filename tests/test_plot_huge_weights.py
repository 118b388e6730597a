"""Reliability diagrams with weights far from 1 (awkward input, found while sweeping).

Weights are row frequencies. A row of weight ``m`` beyond 2**53 (no longer a whole number in a
double; NumPy's binomial draw stops at 2**63) draws its count of positives in the consistency
band from the binomial's limits: Poisson where few outcomes are expected on the rarer side,
normal otherwise. These tests check both limits against SciPy's quantiles, and that weights
beyond about 1e+-77 are divided by a power of two with a warning, as the wrappers do.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy import stats
from sklearn.datasets import load_breast_cancer
from sklearn.linear_model import LogisticRegression

from probwrap.calibration import WeightScaleWarning
from probwrap.plot import ReliabilityDiagram, consistency_band, wilson_interval


@pytest.fixture(scope="module")
def cancer_forecasts():
    """A logistic regression on five features of scikit-learn's bundled breast-cancer data,
    trained on the first 300 rows and scored on the other 269."""
    X, y = load_breast_cancer(return_X_y=True)
    model = LogisticRegression(max_iter=5000).fit(X[:300, :5], y[:300])
    return y[300:], model.predict_proba(X[300:, :5])[:, 1]


def test_band_normal_limit_matches_scipy_quantiles(cancer_forecasts):
    # Rows of 2**70 each (refused before): a bin's simulated frequency is then normal with
    # mean sum(w p) / sum(w) and sd sqrt(sum(w p (1 - p))) / sum(w) (de Moivre-Laplace).
    _, p = cancer_forecasts
    idx = np.minimum((p * 5).astype(int), 4)
    w = np.full(p.shape[0], 2.0**70)
    low, high = consistency_band(p, idx, 5, sample_weight=w, n_draws=4000, random_state=1)
    for b in range(5):
        pb, wb = p[idx == b], w[idx == b]
        mean = np.sum(wb * pb) / wb.sum()
        sd = np.sqrt(np.sum(wb * pb * (1 - pb))) / wb.sum()
        lo_ref, hi_ref = stats.norm.ppf([0.025, 0.975], loc=mean, scale=sd)
        # 4,000 draws: a 2.5 % quantile's sampling error is about 0.05 sd (common practice:
        # sqrt(q (1 - q) / n) / density); 0.15 sd is three times that
        assert abs(low[b] - lo_ref) < 0.15 * sd
        assert abs(high[b] - hi_ref) < 0.15 * sd
        assert high[b] - low[b] < 1e-9


def test_band_poisson_limit_matches_scipy_quantiles():
    # One bin, one row of 2**60 rows at p = 1e-17: about 11.5 positives expected, so its count
    # is Poisson (the binomial's limit for rare outcomes); the band is its quantiles over m.
    m, p = 2.0**60, 1e-17
    low, high = consistency_band(np.array([p]), np.array([0]), 1, sample_weight=np.array([m]),
                                 n_draws=20_000, random_state=3)
    lam = m * p
    lo_ref, hi_ref = stats.poisson.ppf([0.025, 0.975], lam)
    # the simulated counts are whole numbers: their 2.5 % and 97.5 % quantiles land on SciPy's
    # Poisson quantiles, or on a neighbour when the cumulative probability there is within
    # sampling error of the level
    assert abs(low[0] * m - lo_ref) <= 1.0
    assert abs(high[0] * m - hi_ref) <= 1.0


def test_band_mixed_with_ordinary_rows_keeps_small_bins(cancer_forecasts):
    # Ordinary rows in one bin and huge ones in another: the ordinary bin's band is the band of
    # ordinary rows (the same width within simulation error), the huge bin's collapses.
    _, p = cancer_forecasts
    idx = (p > 0.5).astype(int)
    w = np.where(idx == 1, 2.0**80, 1.0)
    low, high = consistency_band(p, idx, 2, sample_weight=w, n_draws=2000, random_state=0)
    low1, high1 = consistency_band(p, idx, 2, sample_weight=np.ones_like(p), n_draws=2000,
                                   random_state=1)
    # the ordinary bin holds about 90 rows: its band's ends move by about one row's share
    # (1/90) between seeds; two rows' share is allowed
    share = 1.0 / np.count_nonzero(idx == 0)
    assert abs(low[0] - low1[0]) <= 2 * share and abs(high[0] - high1[0]) <= 2 * share
    assert high[1] - low[1] < 1e-9 < high1[1] - low1[1]


def test_wilson_interval_huge_counts_no_overflow():
    # Wilson (1927): the interval shrinks to the observed share as n grows; (z / 2n)**2 no
    # longer overflows on the way for n beyond 1e154
    with np.errstate(over="raise", invalid="raise"):
        low, high = wilson_interval(0.3e200, 1e200)
    assert low == pytest.approx(0.3, rel=1e-15) and high == pytest.approx(0.3, rel=1e-15)
    assert low <= 0.3e200 / 1e200 <= high


@pytest.mark.parametrize("scale", [1e300, 1.7e308, 2.0**-1000])
@pytest.mark.parametrize("band", ["wilson", "consistency"])
def test_diagram_extreme_weights_rescaled_with_warning(cancer_forecasts, scale, band):
    y, p = cancer_forecasts
    base = ReliabilityDiagram.from_predictions(y, p, band=band, n_draws=200)
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        with np.errstate(over="raise", invalid="raise"):
            d = ReliabilityDiagram.from_predictions(
                y, p, band=band, n_draws=200, sample_weight=np.full(p.shape[0], scale))
    assert [type(r.message) for r in rec] == [WeightScaleWarning]
    assert "ReliabilityDiagram" in str(rec[0].message)
    np.testing.assert_allclose(d.table.observed_frequency, base.table.observed_frequency,
                               rtol=0, atol=1e-12)
    assert d.calibration_error == pytest.approx(base.calibration_error, abs=1e-12)
    assert np.all(np.isfinite(d.band_low)) and np.all(np.isfinite(d.band_high))
