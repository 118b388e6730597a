"""Prevalence alarms: the CUSUM recursion and its average run lengths."""

from __future__ import annotations

import numpy as np
import pytest

from probwrap.shift import PriorEstimator, cusum_alarms, cusum_run_length, prior_by_batch


def test_cusum_recursion_by_hand():
    # Page (1954) tabular form, worked by hand: z = 0, 1, 3, 2, -1 with k = 0.5, h = 4
    res = cusum_alarms([0.0, 1.0, 3.0, 2.0, -1.0], 0.0, 1.0, reference=0.5, decision_interval=4.0)
    np.testing.assert_allclose(res.upper, [0.0, 0.5, 3.0, 4.5, 0.0])  # restart after the alarm
    np.testing.assert_allclose(res.lower, [0.0, 0.0, 0.0, 0.0, 0.5])
    assert res.alarms.tolist() == [3] and res.direction.tolist() == [1]
    kept = cusum_alarms([0.0, 1.0, 3.0, 2.0, -1.0], 0.0, 1.0, reference=0.5,
                        decision_interval=4.0, restart=False)
    np.testing.assert_allclose(kept.upper, [0.0, 0.5, 3.0, 4.5, 3.0])
    down = cusum_alarms([-3.0, -3.5], 0.0, 1.0)  # S- = 2.5, then 5.5 > h = 5
    assert down.alarms.tolist() == [1] and down.direction.tolist() == [-1]


@pytest.mark.parametrize("h, arl0, arl1", [(4.0, 168, 8.38), (5.0, 465, 10.4)])
def test_run_length_matches_published_table(h, arl0, arl1):
    # Two-sided tabular CUSUM with k = 1/2: in-control ARL 168 (h = 4) and 465 (h = 5), ARL
    # 8.38 and 10.4 for a one-sigma shift (Montgomery, Introduction to Statistical Quality
    # Control, table "ARL performance of the tabular CUSUM with k = 1/2"; values from memory).
    # Tolerance: the table's rounding (half a unit of its last digit, plus 0.5 %).
    assert cusum_run_length(0.0, decision_interval=h, two_sided=True) == pytest.approx(
        arl0, rel=5e-3, abs=0.5)
    assert cusum_run_length(1.0, decision_interval=h, two_sided=True) == pytest.approx(
        arl1, rel=5e-3, abs=0.005 if arl1 < 10 else 0.05)


@pytest.mark.parametrize("shift, n_runs", [(0.0, 4000), (1.0, 4000)])
def test_run_length_agrees_with_simulation(shift, n_runs):
    # Monte Carlo run lengths of the one-sided chart (k = 0.5, h = 3, so runs stay short)
    # against the Brook & Evans (1972) Markov chain: within 3 Monte Carlo standard errors.
    rng = np.random.default_rng(0)
    k, h = 0.5, 3.0
    s = np.zeros(n_runs)
    length = np.zeros(n_runs, dtype=int)
    alive = np.ones(n_runs, dtype=bool)
    step = 0
    while alive.any():
        step += 1
        s[alive] = np.maximum(0.0, s[alive] + rng.normal(shift, 1.0, size=alive.sum()) - k)
        fired = alive & (s > h)
        length[fired] = step
        alive &= ~fired
    mc, se = length.mean(), length.std(ddof=1) / np.sqrt(n_runs)
    chain = cusum_run_length(shift, reference=k, decision_interval=h, n_states=400)
    assert abs(mc - chain) < 3 * se


def test_alarm_on_batch_prevalence_estimates():
    # A series of batches from prior_by_batch: prevalence 10 % for six batches, then 20 %.
    rng = np.random.default_rng(3)

    def draw(n, prior):
        y = (rng.uniform(size=n) < prior).astype(int)
        p1 = 1 / (1 + np.exp(-(2.0 * rng.normal(2.0 * y - 1.0)) - np.log(1 / 9)))
        return np.column_stack([1 - p1, p1]), y

    p_src, y_src = draw(3000, 0.1)
    est = PriorEstimator(random_state=0).fit(p_src, y_src)
    batches = [draw(400, 0.1)[0] for _ in range(6)] + [draw(400, 0.2)[0] for _ in range(4)]
    table = prior_by_batch(est, np.vstack(batches), batch_size=400)
    se = (table["upper"][:, 1] - table["lower"][:, 1]) / (2 * 1.959963984540054)
    res = cusum_alarms(table["prior"][:, 1], est.source_prior_[1], se)
    assert res.alarms.size >= 1 and res.alarms[0] >= 6 and res.direction[0] == 1


def test_bad_input_is_named():
    with pytest.raises(ValueError, match="standard_error"):
        cusum_alarms([0.1, 0.2], 0.1, 0.0)
    with pytest.raises(ValueError, match="decision_interval"):
        cusum_alarms([0.1, 0.2], 0.1, 0.01, decision_interval=-1.0)
    with pytest.raises(ValueError, match="estimates"):
        cusum_alarms([], 0.1, 0.01)
    with pytest.raises(ValueError, match="n_states"):
        cusum_run_length(0.0, n_states=1)


def test_batches_of_dates_out_of_order_warn():
    # scikit-learn's breast-cancer data: a prior-shift estimator fitted on half the rows, the
    # other half monitored by "week" with the export's rows not sorted by week
    import warnings

    from sklearn.datasets import load_breast_cancer
    from sklearn.linear_model import LogisticRegression
    from sklearn.pipeline import make_pipeline
    from sklearn.preprocessing import StandardScaler

    from probwrap import PriorShiftWrapper

    X, y = load_breast_cancer(return_X_y=True)
    model = PriorShiftWrapper(make_pipeline(StandardScaler(), LogisticRegression()),
                              n_resamples=0, random_state=0).fit(X[::2], y[::2])
    Xn = X[1::2][:280]
    weeks = np.repeat(np.datetime64("2026-01-05") + np.arange(4) * np.timedelta64(7, "D"), 70)
    shuffled = weeks[np.r_[70:140, 0:70, 140:280]]
    with pytest.warns(UserWarning, match="not in increasing order.*2026-01-05"):
        table = model.monitor(Xn, batches=shuffled)
    assert table["batch"][0] == np.datetime64("2026-01-12")  # the table follows the rows
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        model.monitor(Xn, batches=weeks)
        model.monitor(Xn, batches=np.where(shuffled == weeks[0], "b", "a"))  # text: no order
        model.monitor(Xn, batch_size=70)


def test_two_sided_run_length_beyond_double_precision_is_infinite():
    # h = 50 standard deviations: in control the chart never sounds in double precision on
    # either side (it raised ZeroDivisionError, which stopped the report with h = 50)
    assert cusum_run_length(0.0, reference=0.5, decision_interval=50.0,
                            two_sided=True) == float("inf")
    # still finite, and the two sides combined as 1 / (1/up + 1/down), where it is
    up = cusum_run_length(0.0, reference=0.5, decision_interval=5.0)
    assert cusum_run_length(0.0, reference=0.5, decision_interval=5.0,
                            two_sided=True) == pytest.approx(up / 2, rel=1e-12)
