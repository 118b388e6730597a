"""Aggregated outcomes (k successes out of n trials) against statsmodels' Binomial GLM with
(successes, failures) as the response, on simulated groups with known rates and on statsmodels'
bundled star98 data set."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy.special import expit
from scipy.stats import binom
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.aggregated import (
    binomial_log_likelihood,
    expand_counts,
    rates_to_counts,
    tally_counts,
)
from probwrap.calibration import IsotonicMap, PlattMap
from probwrap.metrics import brier_score

BETA = np.array([0.8, -1.2])
INTERCEPT = -0.5


def _groups(n_groups=300, seed=0):
    rng = np.random.default_rng(seed)
    X = rng.normal(size=(n_groups, 2))
    rate = expit(X @ BETA + INTERCEPT)
    trials = rng.integers(1, 60, size=n_groups).astype(float)
    successes = rng.binomial(trials.astype(int), rate).astype(float)
    return X, successes, trials, rate


def _unpenalised():
    # C this large makes the L2 penalty negligible; Newton steps reach the exact optimum
    return LogisticRegression(C=1e12, solver="newton-cholesky", tol=1e-12, max_iter=200)


def test_weighted_rows_give_the_binomial_glm_on_simulated_groups():
    X, k, n, _ = _groups()
    X_rows, y_rows, w = expand_counts(X, k, n)
    clf = _unpenalised().fit(X_rows, y_rows, sample_weight=w)
    # reference: statsmodels GLM, Binomial family, endog = (successes, failures)
    glm = sm.GLM(np.column_stack([k, n - k]), sm.add_constant(X),
                 family=sm.families.Binomial()).fit()
    np.testing.assert_allclose(clf.intercept_[0], glm.params[0], atol=1e-6)
    np.testing.assert_allclose(clf.coef_[0], glm.params[1:], atol=1e-6)
    p = clf.predict_proba(X)[:, 1]
    # the binomial log-likelihood with its constant is statsmodels' llf
    assert binomial_log_likelihood(k, n, p) == pytest.approx(glm.llf, rel=1e-9)
    # and the known rates are recovered within the GLM's own standard errors
    assert np.all(np.abs(glm.params[1:] - BETA) < 4 * glm.bse[1:])


def test_weighted_rows_give_the_binomial_glm_on_star98():
    data = sm.datasets.star98.load_pandas()
    k = data.endog["NABOVE"].to_numpy()
    n = k + data.endog["NBELOW"].to_numpy()
    X = data.exog
    X_rows, y_rows, w = expand_counts(X, k, n)
    assert isinstance(X_rows, pd.DataFrame) and list(X_rows.columns) == list(X.columns)
    model = make_pipeline(StandardScaler(), _unpenalised())
    model.fit(X_rows, y_rows, logisticregression__sample_weight=w)
    # reference: statsmodels GLM Binomial on the bundled star98 data, (NABOVE, NBELOW) response
    glm = sm.GLM(data.endog[["NABOVE", "NBELOW"]], sm.add_constant(X),
                 family=sm.families.Binomial()).fit()
    p = model.predict_proba(X)[:, 1]
    np.testing.assert_allclose(p, glm.predict(sm.add_constant(X)), atol=1e-6)
    assert binomial_log_likelihood(k, n, p) == pytest.approx(glm.llf, rel=1e-8)


def test_binomial_log_likelihood_equals_scipy():
    X, k, n, rate = _groups(50, seed=3)
    # reference: scipy.stats.binom.logpmf summed over groups
    assert binomial_log_likelihood(k, n, rate) == pytest.approx(
        binom.logpmf(k, n, rate).sum(), rel=1e-12
    )
    no_const = binomial_log_likelihood(k, n, rate, include_constant=False)
    X_rows, y_rows, w = expand_counts(X, k, n)
    p_rows = expit(X_rows @ BETA + INTERCEPT)
    assert no_const == pytest.approx(
        np.sum(w * np.where(y_rows == 1, np.log(p_rows), np.log1p(-p_rows))), rel=1e-12
    )


def test_calibrate_and_evaluate_from_counts():
    rng = np.random.default_rng(4)
    score = rng.normal(size=400)  # a model's log-odds per group
    n = rng.integers(5, 80, size=400).astype(float)
    k = rng.binomial(n.astype(int), expit(0.6 * score + 0.2)).astype(float)
    tally = tally_counts(score, k, n)
    s_rows, y_rows, w = tally.to_rows()
    platt = PlattMap(smooth_targets=False).fit(s_rows, y_rows, sample_weight=w)
    # reference: statsmodels Binomial GLM of (successes, failures) on the score
    glm = sm.GLM(np.column_stack([k, n - k]), sm.add_constant(score),
                 family=sm.families.Binomial()).fit()
    grid = np.linspace(-3, 3, 7)
    np.testing.assert_allclose(platt.predict(grid), glm.predict(sm.add_constant(grid)), atol=1e-5)
    # evaluation from counts: the Brier score of the expanded rows is the per-trial Brier score
    p = platt.predict(score)
    per_trial = np.sum(k * (1 - p) ** 2 + (n - k) * p**2) / n.sum()
    p_rows, y_e, w_e = expand_counts(p, k, n)
    assert brier_score(y_e, p_rows, sample_weight=w_e) == pytest.approx(per_trial, rel=1e-12)
    iso = IsotonicMap().fit(s_rows, y_rows, sample_weight=w)
    assert np.all(np.diff(iso.predict(np.sort(score))) >= 0)


def test_rates_to_counts_and_fractional_successes():
    X, k, n, _ = _groups(100, seed=5)
    rates = np.round(k / n, 3)
    k_frac = rates_to_counts(rates, n)
    X_rows, y_rows, w = expand_counts(X, k_frac, n)
    clf = _unpenalised().fit(X_rows, y_rows, sample_weight=w)
    # reference: statsmodels Binomial GLM with the rates as response and trials as var_weights
    glm = sm.GLM(rates, sm.add_constant(X), family=sm.families.Binomial(), var_weights=n).fit()
    np.testing.assert_allclose(clf.coef_[0], glm.params[1:], atol=1e-6)


@pytest.mark.parametrize(
    ("successes", "trials", "match"),
    [
        ([5, 1], [4, 2], "successes"),  # k > n
        ([-1, 1], [4, 2], "successes"),
        ([1, 1], [0, 2], "trials"),  # n = 0
        ([1, 1, 1], [3, 2], "trials"),  # mismatched lengths
        ([], [], "trials"),
        ([np.nan, 1], [3, 2], "successes"),
    ],
)
def test_bad_counts_name_the_argument(successes, trials, match):
    with pytest.raises(ValueError, match=match):
        expand_counts(np.zeros((len(successes), 1)), successes, trials)


def test_bad_shapes():
    with pytest.raises(ValueError, match="X"):
        expand_counts(np.zeros((3, 1)), [1, 1], [2, 2])
    with pytest.raises(ValueError, match="rates"):
        rates_to_counts([1.5], [2])
    with pytest.raises(ValueError, match="scores"):
        tally_counts([0.1, 0.2, 0.3], [1, 1], [2, 2])
    with pytest.raises(ValueError, match="proba"):
        binomial_log_likelihood([1], [2], [0.5, 0.5])
