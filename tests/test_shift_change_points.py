"""Bayesian online change points (Adams & MacKay 2007) on batch estimates.

Reference checks: the run-length posterior equals a brute-force sum over every segmentation of a
short series, each segment's marginal likelihood from scipy.stats.multivariate_normal; on
statsmodels' bundled Nile flow data the change is found where Cobb (1978, Biometrika 65) places
it (the 1898/1899 drop; year cited from memory).
"""

from itertools import product

import numpy as np
import pytest
from scipy import stats

from probwrap.shift import change_point_posterior


def _brute_force(x, s, h, m0, v0):
    n = len(x)
    post = np.zeros((n, n))
    for t in range(n):
        weights = np.zeros(t + 1)
        for cuts in product((0, 1), repeat=t):  # cuts[i] = 1: a segment starts at batch i + 1
            starts = [0] + [i + 1 for i, c in enumerate(cuts) if c]
            prior = np.prod([h if c else 1 - h for c in cuts])
            like = 1.0
            for a, b in zip(starts, starts[1:] + [t + 1], strict=True):
                seg = slice(a, b)
                cov = v0 * np.ones((b - a, b - a)) + np.diag(s[seg] ** 2)
                like *= stats.multivariate_normal(np.full(b - a, m0), cov).pdf(x[seg])
            weights[t - starts[-1]] += prior * like
        post[t, : t + 1] = weights / weights.sum()
    return post


def test_run_length_posterior_equals_brute_force():
    rng = np.random.default_rng(0)
    x = np.r_[rng.normal(0.05, 0.01, 4), rng.normal(0.09, 0.01, 4)]
    s = rng.uniform(0.008, 0.015, 8)
    res = change_point_posterior(x, s, hazard=0.1, prior_mean=0.06, prior_sd=0.03)
    np.testing.assert_allclose(res.run_length, _brute_force(x, s, 0.1, 0.06, 0.03 ** 2),
                               atol=1e-12)
    # the log evidence is the log density of the whole series, summed over segmentations
    assert res.run_length[-1].sum() == pytest.approx(1.0)


def test_nile_change_found_at_the_dam_years():
    import statsmodels.api as sm

    nile = sm.datasets.nile.load_pandas().data  # statsmodels' bundled data, 1871-1970
    volume = nile["volume"].to_numpy(float)
    year = nile["year"].to_numpy(int)
    # noise level from first differences (common practice: sd(diff) / sqrt 2)
    se = np.std(np.diff(volume), ddof=1) / np.sqrt(2)
    res = change_point_posterior(volume, se, hazard=0.01)
    assert year[res.change_at[0]] in (1898, 1899)
    assert year[res.alarms[0]] <= 1902  # found within a few years of the change
    assert year[res.most_likely_start[-1]] in (1898, 1899)


def test_no_alarm_on_a_flat_series_and_alarm_on_a_step():
    rng = np.random.default_rng(2)
    flat = rng.normal(0.04, 0.005, 60)
    assert change_point_posterior(flat, 0.005).alarms.size == 0
    step = np.r_[flat[:30], flat[30:] + 0.03]
    res = change_point_posterior(step, 0.005)
    assert res.change_at.tolist() == [30]
    assert res.recent_change[29] < 0.5 <= res.recent_change[res.alarms[0]]


@pytest.mark.parametrize("kwargs, match", [
    ({"hazard": 1.0}, "hazard"),
    ({"threshold": 0.0}, "threshold"),
    ({"window": 0}, "window"),
    ({"prior_sd": -1.0}, "prior_sd"),
])
def test_bad_arguments_named(kwargs, match):
    with pytest.raises(ValueError, match=match):
        change_point_posterior([0.1, 0.2, 0.3], 0.01, **kwargs)


def test_bad_series_named():
    with pytest.raises(ValueError, match="estimates"):
        change_point_posterior([0.1, np.nan], 0.01)
    with pytest.raises(ValueError, match="standard_error"):
        change_point_posterior([0.1, 0.2], [0.01, 0.0])
    with pytest.raises(ValueError, match="one per estimate"):
        change_point_posterior([0.1, 0.2], [0.01, 0.01, 0.01])
