"""bootstrap_interval(groups=): resampling whole groups of expanded counts.

Reference: statsmodels' GLM Binomial on star98's (successes, failures), intercept only, with the
heteroscedasticity-robust covariance HC0: each district is one observation, so its standard
error (delta method to the rate scale) is the group-level (cluster) one.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from probwrap.aggregated import expand_counts
from probwrap.metrics import bootstrap_interval


def _rate(y, p, sample_weight=None):
    return float(np.average(y, weights=sample_weight))


@pytest.fixture(scope="module")
def star98_rows():
    d = sm.datasets.star98.load_pandas()
    k = d.endog["NABOVE"].to_numpy(float)
    n = (d.endog["NABOVE"] + d.endog["NBELOW"]).to_numpy(float)
    _, y, w = expand_counts(np.zeros((k.shape[0], 1)), k, n)
    groups = np.repeat(np.arange(k.shape[0]), 2)[np.column_stack([k, n - k]).ravel() > 0]
    return k, n, y, w, groups


def test_group_bootstrap_matches_statsmodels_robust_standard_error(star98_rows):
    k, n, y, w, groups = star98_rows
    fit = sm.GLM(np.column_stack([k, n - k]), np.ones((k.shape[0], 1)),
                 family=sm.families.Binomial()).fit(cov_type="HC0")
    rate = k.sum() / n.sum()
    se_ref = fit.bse[0] * rate * (1 - rate)  # delta method from the log-odds
    p = np.full(y.shape, 0.5)
    by_group = bootstrap_interval(_rate, y, p, sample_weight=w, n_resamples=1000,
                                  random_state=0, groups=groups)
    # measured 0.96x with 2,000 resamples; Monte-Carlo error of the SE about 2 %
    assert by_group.standard_error == pytest.approx(se_ref, rel=0.1)
    by_row = bootstrap_interval(_rate, y, p, sample_weight=w, n_resamples=1000, random_state=0)
    assert by_row.standard_error > 1.5 * se_ref  # measured 2.07x: rows break the districts


def test_one_group_per_row_is_the_row_bootstrap(star98_rows):
    _, _, y, w, _ = star98_rows
    p = np.full(y.shape, 0.5)
    a = bootstrap_interval(_rate, y, p, sample_weight=w, n_resamples=30, random_state=3)
    b = bootstrap_interval(_rate, y, p, sample_weight=w, n_resamples=30, random_state=3,
                           groups=np.arange(y.shape[0]))
    np.testing.assert_array_equal(a.bootstrap_distribution, b.bootstrap_distribution)


def test_groups_must_match_rows():
    with pytest.raises(ValueError, match="`groups` must be 1-d"):
        bootstrap_interval(_rate, [0, 1, 1], [0.5] * 3, groups=[0, 1])
    with pytest.raises(ValueError, match="`groups` contains NaN"):
        bootstrap_interval(_rate, [0, 1, 1], [0.5] * 3, groups=[0.0, np.nan, 1.0])
