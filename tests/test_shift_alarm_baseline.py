"""The prevalence alarm with an estimated baseline, and what it standardises.

* The run length given the baseline's error (``cusum_run_length(spread=)``,
  ``baseline_error_run_length``, ``decision_interval_for_run_length``) against direct NumPy
  simulation of the two-sided CUSUM (seeded; Monte Carlo standard errors stated), and the
  exact-baseline design against the published two-sided CUSUM table (k = 1/2, h = 5: 465;
  Montgomery, Introduction to Statistical Quality Control; value from memory).
* On scikit-learn's bundled data: digits ("is an 8") in batches of 5-10 rows, where the old
  recipe's standardised values spread with sd 0.1-0.2 and could not sound; breast_cancer with 150
  labelled rows and batches of 200, where the shared error of the labelled rows makes the run
  means vary far more than independent values would.
"""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.stats import chi2
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap import PriorShiftWrapper
from probwrap.report._alarm_chart import batch_alarm
from probwrap.shift import (
    baseline_error_run_length,
    cusum_alarms,
    cusum_run_length,
    decision_interval_for_run_length,
    labelled_share_of_variance,
    signed_shift_scores,
)


def _two_sided_run_lengths(mean, sd, k, h, n_runs, rng, cap=20000):
    """Run lengths of the two-sided tabular CUSUM (Page 1954) on N(mean, sd^2) values,
    simulated directly, ``n_runs`` at a time."""
    up = np.zeros(n_runs)
    down = np.zeros(n_runs)
    length = np.zeros(n_runs, dtype=int)
    alive = np.ones(n_runs, dtype=bool)
    step = 0
    while alive.any() and step < cap:
        step += 1
        z = rng.normal(mean, sd, size=alive.sum())
        up[alive] = np.maximum(0.0, up[alive] + z - k)
        down[alive] = np.maximum(0.0, down[alive] - z - k)
        fired = alive & ((up > h) | (down > h))
        length[fired] = step
        alive &= ~fired
    assert not alive.any()
    return length


@pytest.mark.parametrize("delta, sd", [(0.0, 0.8), (0.5, np.sqrt(0.7)), (-0.9, 0.6)])
def test_run_length_with_spread_matches_simulation(delta, sd):
    # z ~ N(delta, sd^2): the chart with k, h equals the chart on z / sd with k / sd, h / sd.
    # Two-sided, k = 0.5, h = 4, 3000 simulated runs; within 3 Monte Carlo standard errors
    # plus 2 % for the combination 1/L = 1/L+ + 1/L- (Lucas & Crosier 1982, an approximation).
    rng = np.random.default_rng(11)
    runs = _two_sided_run_lengths(delta, sd, 0.5, 4.0, 3000, rng)
    mc, se = runs.mean(), runs.std(ddof=1) / np.sqrt(runs.size)
    chain = cusum_run_length(delta, reference=0.5, decision_interval=4.0, two_sided=True,
                             spread=sd)
    assert abs(mc - chain) < 3 * se + 0.02 * chain, (mc, se, chain)
    # and it is not the unit-spread run length (the old in-control claim)
    assert abs(chain - cusum_run_length(delta, decision_interval=4.0, two_sided=True)) > 5 * se


def test_run_length_distribution_over_the_baseline_error():
    # delta ~ N(0, rho), the chart's values N(delta, 1 - rho): the share of draws whose
    # conditional ARL is shorter than L is below_probability, and ``assured`` is exceeded by
    # ``probability`` of them. 1500 seeded draws of delta; Monte Carlo se <= 0.013.
    rho, k, h, below = 0.3, 0.5, 4.0, 60.0
    res = baseline_error_run_length(rho, reference=k, decision_interval=h, probability=0.9,
                                    below=below)
    rng = np.random.default_rng(5)
    delta = rng.normal(0.0, np.sqrt(rho), size=1500)
    arl = np.array([cusum_run_length(d, reference=k, decision_interval=h, two_sided=True,
                                     spread=np.sqrt(1 - rho), n_states=120) for d in delta])
    se = np.sqrt(0.25 / delta.size)
    assert abs(np.mean(arl < below) - res.below_probability) < 3 * se
    assert abs(np.mean(arl >= res.assured) - 0.9) < 3 * se
    assert abs(np.mean(arl >= res.median) - 0.5) < 3 * se
    # an exact baseline: the classic value
    assert baseline_error_run_length(0.0).assured == pytest.approx(465, abs=0.5)


def test_false_alarms_within_a_horizon_follow_the_baseline_error_model():
    # End to end, simulated: one baseline offset per run (delta ~ N(0, rho)), 50 batches of
    # N(delta, 1 - rho). With rho = 0.5 and h = 5 many runs alarm within 50 batches (the iid
    # model's 0.09 does not describe them); with the h of decision_interval_for_run_length, the
    # share of runs whose conditional in-control ARL falls below 465 is about 0.1.
    rng = np.random.default_rng(2)
    rho, n = 0.5, 600
    delta = rng.normal(0.0, np.sqrt(rho), size=n)
    hits = sum(cusum_alarms(rng.normal(d, np.sqrt(1 - rho), size=50), 0.0, 1.0).alarms.size > 0
               for d in delta)
    iid = sum(cusum_alarms(rng.normal(0.0, 1.0, size=50), 0.0, 1.0).alarms.size > 0
              for _ in range(n))
    se = np.sqrt(0.25 / n)
    assert hits / n > iid / n + 6 * se
    h = decision_interval_for_run_length(465.0, labelled_share=rho, probability=0.9)
    check = baseline_error_run_length(rho, decision_interval=h, below=465.0)
    assert check.below_probability == pytest.approx(0.1, abs=1e-4)
    assert check.assured == pytest.approx(465.0, rel=1e-4)
    # an exact baseline: h = 5 gives 465 (Montgomery's table; value from memory)
    assert decision_interval_for_run_length(465.0) == pytest.approx(5.0, abs=0.02)


def test_labelled_share_and_bad_input():
    np.testing.assert_allclose(labelled_share_of_variance([200, 300], 150), [200 / 350, 300 / 450])
    assert labelled_share_of_variance(50, np.inf).tolist() == 0.0
    with pytest.raises(ValueError, match="labelled_share"):
        baseline_error_run_length(1.0)
    with pytest.raises(ValueError, match="probability"):
        baseline_error_run_length(0.2, probability=1.0)
    with pytest.raises(ValueError, match="spread"):
        cusum_run_length(0.0, spread=0.0)
    with pytest.raises(ValueError, match="run_length"):
        decision_interval_for_run_length(1.0)
    with pytest.raises(ValueError, match="labelled_rows"):
        labelled_share_of_variance(10, 0.0)


def _digits_monitor(batch, seed):
    d = load_digits()
    X, y = d.data, (d.target == 8).astype(int)
    rng = np.random.default_rng(seed)
    idx = rng.permutation(len(y))
    lab, pool = idx[:600], idx[600:]
    model = PriorShiftWrapper(make_pipeline(StandardScaler(), LogisticRegression(max_iter=2000)),
                              random_state=seed).fit(X[lab], y[lab])
    pos, neg = pool[y[pool] == 1], pool[y[pool] == 0]
    rows = []
    for b in range(70):  # 40 batches at the source share (about 0.10), then 30 at 0.30
        npos = rng.binomial(batch, 0.10 if b < 40 else 0.30)
        rows += list(rng.choice(pos, npos)) + list(rng.choice(neg, batch - npos))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the per-batch "few rows" warnings
        table = model.monitor(X[np.array(rows)], batch_size=batch)
    return table, float(model.source_prior_[1])


@pytest.mark.parametrize("batch", [5, 10])
def test_small_batches_standardise_to_unit_spread_and_sound(batch):
    table, src = _digits_monitor(batch, seed=batch)
    z = signed_shift_scores(table, src)
    # in control (the first 40 batches) the values spread like a standard normal: 40 values,
    # a 99.8 % chi-square band for their variance
    lo, hi = chi2.ppf([0.001, 0.999], 39) / 39
    assert lo < np.var(z[:40], ddof=1) < hi
    # the old recipe, the shrunk estimate over the unshrunk estimate's standard error, spread
    # far less (measured 0.09 and 0.21), so a tripled prevalence could not reach h = 5
    se = (table["upper"][:, 1] - table["lower"][:, 1]) / (2 * 1.959964)
    old = (table["prior"][:, 1] - src) / se
    assert np.std(old[:40]) < 0.5
    chart = cusum_alarms(z, 0.0, 1.0)
    up = chart.alarms[(chart.alarms >= 40) & (chart.direction == 1)]
    assert up.size and up[0] - 39 <= 15  # measured: a median of 3-6 batches


def test_breast_cancer_runs_share_the_labelled_rows_error():
    # repro of the no-shift setting: 150 labelled rows and batches of 200, all iid draws from
    # breast_cancer. The run means of the standardised values vary with variance
    # rho + (1 - rho) / 30, rho = 200 / 350, not 1 / 30 (independent batches): checked with a
    # chi-square band for the variance of 16 run means (99.8 %; the labelled share is a model,
    # the band allows its rough fit, measured 0.68 against 0.76 over 40 runs).
    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(0)
    n_lab, batch, n_batches, runs = 150, 200, 30, 16
    means, pooled = [], []
    table = src = None
    for run in range(runs):
        lab = rng.choice(len(y), n_lab, replace=True)
        model = PriorShiftWrapper(make_pipeline(StandardScaler(),
                                                LogisticRegression(max_iter=2000)),
                                  random_state=run).fit(X[lab], y[lab])
        table = model.monitor(X[rng.choice(len(y), batch * n_batches)], batch_size=batch)
        src = float(model.source_prior_[1])
        z = signed_shift_scores(table, src)
        means.append(z.mean())
        pooled.append(z)
    rho = float(labelled_share_of_variance(batch, n_lab))
    model_var = rho + (1 - rho) / n_batches
    ratio = np.var(means, ddof=1) / model_var
    lo, hi = chi2.ppf([0.001, 0.999], runs - 1) / (runs - 1)
    assert lo < ratio < hi
    # independent batches (the old claim) are far off
    assert np.var(means, ddof=1) / (1 / n_batches) > hi
    # the marginal spread of the values is about 1
    assert 0.8 < np.std(np.concatenate(pooled)) < 1.2
    # the report's alarm quotes the run length given the labelled rows, and says why
    with pytest.warns(UserWarning, match="same labelled rows"):
        alarm = batch_alarm(table, src, labelled_rows=float(n_lab))
    assert alarm.labelled_share == pytest.approx(rho)
    assert alarm.in_control_run_length == baseline_error_run_length(rho).assured
    assert alarm.in_control_run_length < 20 < 465 == round(alarm.exact_baseline_run_length)
