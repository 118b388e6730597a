"""Reference tests for the CORP reliability curve and score decomposition.

Sources: Dimitriadis, Gneiting & Jordan (2021, PNAS 118(8) e2016191118) for the construction;
scikit-learn's IsotonicRegression, brier_score_loss and log_loss, SciPy's binomial distribution,
and Murphy's (1973) decomposition for the numbers.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from sklearn import metrics as skm
from sklearn.isotonic import IsotonicRegression

from probwrap.metrics import corp_reliability, score_decomposition


def _data(n=500, seed=0, ties=False):
    rng = np.random.default_rng(seed)
    p = rng.uniform(0.01, 0.99, size=n)
    if ties:
        p = np.round(p, 1).clip(0.05, 0.95)
    y = (rng.uniform(size=n) < p**1.4).astype(int)  # over-forecasting: something to find
    w = rng.integers(1, 4, size=n).astype(float)
    return y, p, w


@pytest.mark.parametrize("ties", [False, True])
def test_curve_equals_sklearn_isotonic_regression(ties):
    y, p, w = _data(ties=ties)
    res = corp_reliability(y, p, sample_weight=w)
    ref = IsotonicRegression().fit(p, y, sample_weight=w)
    # both are weighted PAV with tied forecasts pooled; different summation order only
    np.testing.assert_allclose(res.recalibrated, ref.predict(res.forecast), rtol=0, atol=1e-12)
    np.testing.assert_array_equal(res.forecast, np.unique(p))


@pytest.mark.parametrize("score", ["brier", "log_loss"])
def test_decomposition_adds_up_and_total_matches_sklearn(score):
    y, p, w = _data()
    d = score_decomposition(y, p, score=score, sample_weight=w)
    # MCB - DSC + UNC = S(x) (Dimitriadis et al. 2021, eq. for the CORP decomposition): exact
    # algebra, rounding only
    assert d.miscalibration - d.discrimination + d.uncertainty == pytest.approx(d.total, abs=1e-12)
    ref = (skm.brier_score_loss(y, p, sample_weight=w) if score == "brier"
           else skm.log_loss(y, p, sample_weight=w))
    assert d.total == pytest.approx(ref, rel=1e-12)
    rate = np.average(y, weights=w)
    # UNC is the score of the climatological forecast: r(1-r) for Brier, the binary entropy for
    # the log loss (closed forms)
    unc = rate * (1 - rate) if score == "brier" else -(rate * np.log(rate)
                                                        + (1 - rate) * np.log(1 - rate))
    assert d.uncertainty == pytest.approx(unc, rel=1e-12)
    # the PAV fit is the best isotonic recalibration under every proper score (Dimitriadis et
    # al. 2021), so MCB >= 0 and DSC >= 0; here the forecasts are miscalibrated by construction
    assert d.miscalibration > 1e-3
    assert d.discrimination > 1e-3
    # S(x_hat) equals the score of scikit-learn's isotonic fit
    x_hat = IsotonicRegression().fit(p, y, sample_weight=w).predict(p)
    s_hat = (skm.brier_score_loss(y, x_hat, sample_weight=w) if score == "brier"
             else skm.log_loss(y, np.clip(x_hat, 1e-300, 1 - 1e-16), sample_weight=w))
    assert d.total - d.miscalibration == pytest.approx(s_hat, rel=1e-9)


def test_brier_corp_equals_murphy_when_no_pooling():
    # forecasts on 5 values whose observed rates are already increasing: PAV pools nothing, and
    # CORP's MCB and DSC are Murphy's (1973) reliability and resolution terms:
    # REL = sum_k n_k (f_k - o_k)^2 / N, RES = sum_k n_k (o_k - o)^2 / N
    f = np.array([0.1, 0.3, 0.5, 0.7, 0.9])
    n_k = np.array([20, 30, 25, 15, 10])
    pos = np.array([1, 12, 11, 12, 9])  # rates 0.05, 0.4, 0.44, 0.8, 0.9: increasing
    p = np.repeat(f, n_k)
    y = np.concatenate([np.arange(n) < k for n, k in zip(n_k, pos, strict=True)]).astype(int)
    o_k = pos / n_k
    o = pos.sum() / n_k.sum()
    rel = np.sum(n_k * (f - o_k) ** 2) / n_k.sum()
    res = np.sum(n_k * (o_k - o) ** 2) / n_k.sum()
    d = score_decomposition(y, p)
    assert d.miscalibration == pytest.approx(rel, rel=1e-12)
    assert d.discrimination == pytest.approx(res, rel=1e-12)


def test_consistency_band_matches_binomial_quantiles():
    # one distinct forecast c: the PAV fit of a resample is the resample's share of positives,
    # Binomial(n, c) / n under calibration, so the band's ends are its quantiles (SciPy).
    n, c = 200, 0.3
    y = (np.arange(n) < 70).astype(int)
    res = corp_reliability(y, np.full(n, c), n_resamples=4000, confidence_level=0.9,
                           random_state=0)
    lo, hi = stats.binom.ppf([0.05, 0.95], n, c) / n
    # 4000 resamples: the empirical 5 % quantile of a lattice variable (step 1/200) lands within
    # one lattice step of the true one (its sd is about 0.3 steps)
    assert res.band_low[0] == pytest.approx(lo, abs=1 / n + 1e-12)
    assert res.band_high[0] == pytest.approx(hi, abs=1 / n + 1e-12)
    assert res.recalibrated[0] == pytest.approx(0.35, rel=1e-12)


def test_weights_are_row_frequencies():
    # consistency: weight 2 equals a copied row
    y, p, w = _data(n=200, seed=4)
    a = corp_reliability(y, p, sample_weight=w)
    b = corp_reliability(np.repeat(y, w.astype(int)), np.repeat(p, w.astype(int)))
    np.testing.assert_allclose(a.recalibrated, b.recalibrated, atol=1e-12)
    assert a.log_loss.miscalibration == pytest.approx(b.log_loss.miscalibration, rel=1e-10)


def test_bad_input_names_the_argument():
    with pytest.raises(ValueError, match="`score`"):
        score_decomposition([0, 1], [0.2, 0.7], score="spherical")
    with pytest.raises(ValueError, match="`n_resamples`"):
        corp_reliability([0, 1], [0.2, 0.7], n_resamples=1)
    with pytest.raises(ValueError, match="`confidence_level`"):
        corp_reliability([0, 1], [0.2, 0.7], confidence_level=1.5)


def test_diagram_draws_the_numbers():
    from probwrap.plot import IsotonicReliabilityDiagram

    y, p, w = _data(n=300, seed=2)
    disp = IsotonicReliabilityDiagram.from_predictions(y, p, sample_weight=w, n_resamples=30,
                                                       random_state=0)
    np.testing.assert_array_equal(disp.line_.get_xdata(), disp.result.forecast)
    np.testing.assert_array_equal(disp.line_.get_ydata(), disp.result.recalibrated)
    assert disp.band_artist_ is not None
    assert f"{disp.result.brier.miscalibration:.4f}" in disp.ax_.get_title()
