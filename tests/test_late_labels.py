"""Late labels: IPCW outcomes at a horizon.

Reference checks: the censoring curve against statsmodels' Kaplan–Meier (``SurvfuncRight``) on
the reversed status; the weighted share of positives against statsmodels' Kaplan–Meier of the
event itself (Satten & Datta 2001: KM is an IPCW average); the IPCW Brier score against Graf et
al. (1999, eq. 6) written out by hand and against scikit-survival's ``brier_score`` on its
bundled data sets.
"""

import numpy as np
import pytest
import statsmodels.api as sm

from probwrap import CalibrationWrapper
from probwrap.calibration import PlattMap
from probwrap.late_labels import censoring_survival, labels_at_horizon
from probwrap.metrics import brier_score


def follow_up(n, seed=0, rounded=False):
    rng = np.random.default_rng(seed)
    T = rng.exponential(50, n)
    C = rng.uniform(0, 100, n)
    t = np.minimum(T, C)
    if rounded:
        t = np.round(t)  # whole days: ties between events and ends of observation
    return t, (T <= C).astype(int)


def test_censoring_curve_equals_statsmodels_kaplan_meier():
    # continuous times (no ties): G is the Kaplan–Meier curve of the reversed status
    t, e = follow_up(400, seed=1)
    times, g = censoring_survival(t, e)
    ref = sm.SurvfuncRight(t, 1 - e)
    np.testing.assert_allclose(times, ref.surv_times, rtol=0, atol=0)
    np.testing.assert_allclose(g, ref.surv_prob, rtol=1e-12)


def test_weighted_censoring_curve_equals_statsmodels_with_freq_weights():
    t, e = follow_up(300, seed=2)
    w = np.random.default_rng(3).integers(1, 4, 300).astype(float)
    times, g = censoring_survival(t, e, sample_weight=w)
    ref = sm.SurvfuncRight(t, 1 - e, freq_weights=w)
    np.testing.assert_allclose(g, ref.surv_prob, rtol=1e-12)


@pytest.mark.parametrize("horizon", [5.0, 30.0, 70.0])
def test_ipcw_share_is_the_kaplan_meier_event_probability(horizon):
    # Satten & Datta (2001): with G the KM of the censoring (events first at ties), the IPCW
    # mean of I(T <= h) equals the KM estimate 1 - S(h) exactly, and the weights sum to n.
    t, e = follow_up(500, seed=4, rounded=True)
    hl = labels_at_horizon(t, e, horizon)
    ref = sm.SurvfuncRight(t, e)
    s_h = ref.surv_prob[np.searchsorted(ref.surv_times, horizon, side="right") - 1]
    assert hl.sample_weight.sum() == pytest.approx(500, rel=1e-12)
    assert np.average(hl.y, weights=hl.sample_weight) == pytest.approx(1 - s_h, rel=1e-12)


def test_ipcw_brier_equals_graf_formula():
    # Graf, Schmoor, Sauerbrei & Schumacher (1999), eq. 6, with G(T-) (Gerds & Schumacher 2006)
    t, e = follow_up(400, seed=5)
    h = 30.0
    p = np.clip(1 - np.exp(-h / 50) + np.random.default_rng(6).normal(0, 0.05, 400), 0.01, 0.99)
    hl = labels_at_horizon(t, e, h)
    g_minus = hl.still_observed_at(t, left=True)
    g_h = float(hl.still_observed_at(h))
    graf = np.mean(np.where((t <= h) & (e == 1), (1 - p) ** 2 / g_minus, 0.0)
                   + np.where(t > h, p ** 2 / g_h, 0.0))
    assert brier_score(hl.y, p, sample_weight=hl.sample_weight) == pytest.approx(graf, rel=1e-12)


@pytest.mark.parametrize("loader", ["load_veterans_lung_cancer", "load_gbsg2", "load_whas500"])
def test_ipcw_brier_equals_scikit_survival_on_its_bundled_data(loader):
    # scikit-survival (a general survival library) ships these data sets. Its brier_score
    # weights an event by 1/G(T); probwrap by 1/G(T-) (events before ends of observation at tied
    # times). Moving each end of observation 1e-6 later states that tie order in the data, and
    # then the two conventions coincide: exact agreement. On the raw tied times they differ by
    # well under 1 %.
    import sksurv.datasets
    from sksurv.metrics import brier_score as survival_brier

    _, y = getattr(sksurv.datasets, loader)()
    event_name, time_name = y.dtype.names
    t, e = y[time_name].astype(float), y[event_name].astype(int)
    rng = np.random.default_rng(0)
    p = rng.uniform(0.05, 0.95, t.shape[0])  # any predicted probabilities of the event by h
    t_ordered = np.where(e == 1, t, t + 1e-6)
    y_ordered = y.copy()
    y_ordered[time_name] = t_ordered
    for h in np.quantile(t, [0.25, 0.5, 0.7]):
        ref = survival_brier(y_ordered, y_ordered, (1 - p)[:, None], [h])[1][0]
        hl = labels_at_horizon(t_ordered, e, h)
        assert brier_score(hl.y, p, sample_weight=hl.sample_weight) == pytest.approx(
            ref, rel=1e-12)
        raw = survival_brier(y, y, (1 - p)[:, None], [h])[1][0]
        hl_raw = labels_at_horizon(t, e, h)
        assert brier_score(hl_raw.y, p, sample_weight=hl_raw.sample_weight) == pytest.approx(
            raw, rel=1e-2)


def test_without_censoring_before_the_horizon_labels_are_plain():
    rng = np.random.default_rng(7)
    T = rng.exponential(20, 300)
    t = np.where(T < 60, T, 60 + rng.uniform(0, 10, 300))  # nobody leaves before day 60
    e = (T < 60).astype(int)
    hl = labels_at_horizon(t, e, 30)
    np.testing.assert_array_equal(hl.sample_weight, np.ones(300))
    np.testing.assert_array_equal(hl.y, (T <= 30).astype(int))
    assert hl.open_share == 0.0
    X = rng.normal(size=(300, 1)) + hl.y[:, None]
    from sklearn.linear_model import LogisticRegression

    a = CalibrationWrapper(LogisticRegression(), method="platt", random_state=0).fit(X, hl.y)
    b = CalibrationWrapper(LogisticRegression(), method="platt", random_state=0).fit(
        X, hl.y, sample_weight=hl.sample_weight)
    np.testing.assert_allclose(a.predict_proba(X), b.predict_proba(X), rtol=1e-10)


def test_open_rows_get_weight_zero_and_are_counted():
    hl = labels_at_horizon([5, 40, 12, 31, 3], [1, 0, 0, 0, 0], horizon=30)
    np.testing.assert_array_equal(hl.is_open, [False, False, True, False, True])
    np.testing.assert_allclose(hl.sample_weight, [1.25, 1.875, 0, 1.875, 0])  # hand-worked KM
    assert hl.open_share == pytest.approx(0.4)


def test_ipcw_calibration_recovers_probability_where_not_yet_as_no_is_biased():
    # Known truth: exponential event times with rate -log(1 - sigmoid(x)) / h, so that
    # P(T <= h | x) = sigmoid(x) exactly and Platt scaling on x is the right model; observation
    # ends uniformly over 90 days (recent rows are open).
    rng = np.random.default_rng(8)
    n, h = 4000, 30.0
    x = rng.normal(-1.0, 1.5, size=n)
    truth = 1 / (1 + np.exp(-x))
    T = rng.exponential(h / -np.log1p(-truth))
    C = rng.uniform(0, 90, n)
    t, e = np.minimum(T, C), (T <= C).astype(int)
    hl = labels_at_horizon(t, e, h)
    naive = ((t <= h) & (e == 1)).astype(int)
    ipcw = PlattMap().fit(x, hl.y, sample_weight=hl.sample_weight).predict(x)
    plain = PlattMap().fit(x, naive).predict(x)
    # mean absolute error against the truth: 4000 rows fit two parameters to ~0.01 (sampling
    # error only, 0.003-0.011 over five seeds; we allow 0.02); "not yet = no" is off by far more
    assert np.mean(np.abs(ipcw - truth)) < 0.02
    assert np.mean(np.abs(plain - truth)) > 3 * np.mean(np.abs(ipcw - truth))


@pytest.mark.parametrize(
    "time,event,horizon,match",
    [
        ([1, np.nan], [0, 1], 5, "`time` contains NaN"),
        ([1, -2], [0, 1], 5, "`time` must be non-negative"),
        ([1, 2], [0, 2], 5, "`event` must be 1"),
        ([1, 2], [0, 1, 1], 5, "`event` must have the shape"),
        ([1, 2], [0, 1], 0, "`horizon` must be a positive number"),
        ([1, 2], [0, 0], 5, "Every row is still open"),
    ],
)
def test_bad_input_named(time, event, horizon, match):
    with pytest.raises(ValueError, match=match):
        labels_at_horizon(time, event, horizon)
