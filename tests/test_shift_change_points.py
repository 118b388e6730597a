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


def test_stored_columns_and_summaries_equal_brute_force():
    # storing 3 run-length columns keeps the rest as one total; the summaries (most likely
    # start, recent change) still use every run length: all against the brute-force sum over
    # segmentations (scipy.stats.multivariate_normal likelihoods)
    rng = np.random.default_rng(1)
    x = np.r_[rng.normal(0.05, 0.01, 5), rng.normal(0.10, 0.01, 4)]
    s = rng.uniform(0.008, 0.015, 9)
    full = _brute_force(x, s, 0.1, 0.06, 0.03 ** 2)
    res = change_point_posterior(x, s, hazard=0.1, prior_mean=0.06, prior_sd=0.03,
                                 stored_run_lengths=3, window=2)
    assert res.run_length.shape == (9, 3)
    np.testing.assert_allclose(res.run_length, full[:, :3], atol=1e-12)
    np.testing.assert_allclose(res.run_length_beyond, full[:, 3:].sum(axis=1), atol=1e-12)
    t = np.arange(9)
    np.testing.assert_array_equal(res.most_likely_start, t - np.argmax(full, axis=1))
    recent = [full[i, : min(i - 1, 1) + 1].sum() if i >= 1 else 0.0 for i in t]
    np.testing.assert_allclose(res.recent_change, recent, atol=1e-12)


def _step_series(n, seed):
    rng = np.random.default_rng(seed)
    level = np.repeat(rng.normal(0.04, 0.01, n // 50 + 1), 50)[:n]  # a new level every 50
    return level + rng.normal(0.0, 0.005, n)


def test_pruning_gives_the_exact_recursion_answers_with_few_run_lengths():
    # the unpruned recursion (prune_below=0) equals the brute force above; pruning at 1e-12
    # (Adams & MacKay 2007 mention pruning; cited from memory) must give the same alarms, change batches and most
    # likely starts on 600 batches while carrying a fraction of the run lengths
    x = _step_series(600, 3)
    exact = change_point_posterior(x, 0.005, prune_below=0)
    pruned = change_point_posterior(x, 0.005)
    assert exact.kept_run_lengths.tolist() == list(range(1, 601))
    assert exact.pruned_mass.max() == 0.0
    np.testing.assert_array_equal(pruned.alarms, exact.alarms)
    np.testing.assert_array_equal(pruned.change_at, exact.change_at)
    np.testing.assert_array_equal(pruned.most_likely_start, exact.most_likely_start)
    np.testing.assert_allclose(pruned.recent_change, exact.recent_change, atol=1e-8)
    np.testing.assert_allclose(pruned.run_length, exact.run_length, atol=1e-8)
    assert pruned.log_evidence == pytest.approx(exact.log_evidence, abs=1e-6)
    assert pruned.pruned_mass.max() < 1e-9
    assert pruned.kept_run_lengths.max() < 300  # the exact recursion carries up to 600
    assert exact.alarms.size >= 8  # the series has 11 levels: the check is not vacuous


def test_memory_is_bounded_by_the_stored_columns():
    x = _step_series(1500, 4)
    res = change_point_posterior(x, 0.005, stored_run_lengths=100)
    assert res.run_length.shape == (1500, 100)
    np.testing.assert_allclose(res.run_length.sum(axis=1) + res.run_length_beyond, 1.0,
                               atol=1e-12)
    assert res.run_length_beyond.max() > 0.5  # long segments do reach past 100 batches


def test_coarse_pruning_warns_with_the_mass_dropped():
    x = _step_series(200, 5)
    with pytest.warns(UserWarning, match="prune_below=0.01 dropped"):
        res = change_point_posterior(x, 0.005, prune_below=0.01)
    assert res.pruned_mass.max() > 1e-6


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
    ({"prune_below": 1.0}, "prune_below"),
    ({"prune_below": True}, "prune_below"),
    ({"stored_run_lengths": 0}, "stored_run_lengths"),
    ({"stored_run_lengths": 2.5}, "stored_run_lengths"),
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
