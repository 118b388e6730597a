"""Prior-shift wrapper on small labelled sets of real data: the floor before logarithms is
chosen from the held-out rows (as CalibrationWrapper does), so one labelled row at exactly 0
is not evidence against the whole model."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from sklearn.ensemble import RandomForestClassifier
from sklearn.frozen import FrozenEstimator
from sklearn.metrics import log_loss

from probwrap import CalibrationWrapper, PriorShiftWrapper
from probwrap.shift import BiasCorrectedScaling
from probwrap.shift._calibration import heldout_clip


@pytest.fixture(scope="module")
def anes_forest():
    """statsmodels' bundled anes96 (1996 election survey), target ``vote``; a 50-tree forest
    fitted on 100 rows outputs multiples of 1/50, and exactly 0 for one of the other rows'
    own class."""
    sm = pytest.importorskip("statsmodels.api")
    d = sm.datasets.anes96.load_pandas().data
    X = d.drop(columns="vote").to_numpy(float)
    y = d["vote"].to_numpy(int)
    idx = np.random.default_rng(0).permutation(y.shape[0])
    fit, rest = idx[:100], idx[100:]
    model = RandomForestClassifier(n_estimators=50, random_state=0).fit(X[fit], y[fit])
    own = model.predict_proba(X[rest])[np.arange(rest.shape[0]), y[rest]]
    assert np.count_nonzero(own == 0) >= 1  # the case under test exists
    return X, y, model, rest, own


def test_clip_is_calibration_wrappers_rule(anes_forest):
    # consistency test: the same data-chosen floor as CalibrationWrapper(clip=None)
    X, y, model, rest, _ = anes_forest
    rows = rest[:60]
    cw = CalibrationWrapper(FrozenEstimator(model), method="temperature").fit(X[rows], y[rows])
    assert heldout_clip(model.predict_proba(X[rows])) == cw.clip_
    assert cw.clip_ == pytest.approx(0.01)  # half of the forest's resolution 1/50
    ps = PriorShiftWrapper(FrozenEstimator(model), n_resamples=0).fit(X[rows], y[rows])
    assert ps.calibrator_.clip_ == cw.clip_


def test_one_row_at_zero_does_not_flatten_predictions(anes_forest):
    X, y, model, rest, own = anes_forest
    zero = rest[own == 0][:1]
    ratios = []
    for seed in range(8):
        others = np.random.default_rng(seed).choice(rest[own > 0], 19, replace=False)
        cal = np.concatenate([zero, others])
        test = rest[~np.isin(rest, cal)]
        base = log_loss(y[test], np.clip(model.predict_proba(X[test]), 1e-12, 1))
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            ps = PriorShiftWrapper(FrozenEstimator(model), n_resamples=0).fit(X[cal], y[cal])
        ratios.append(log_loss(y[test], ps.predict_proba(X[test])) / base)
    # with the floor at 1e-12 the single 0 (log-probability -27.6) made the identity test reject
    # and the fitted temperature flatten every prediction: geometric mean 1.9x the model's own
    # test log loss over these draws, every draw above 1.1x. With the forest's own floor the
    # remaining harm is the 20-row calibration's noise (CalibrationWrapper's auto is similar);
    # 1.15 leaves room for that, far below 1.9.
    assert np.exp(np.mean(np.log(ratios))) < 1.15


def test_floor_is_at_least_half_the_maps_output_floor():
    # N labelled rows cannot resolve probabilities below the map's own output floor
    # 1 / (2 (N + 1) (k - 1)) (Krichevsky-Trofimov): the floor before logarithms is at least half
    # of it, whatever the smallest held-out probability (here 1e-30)
    p = np.array([[1 - 1e-30, 1e-30], [0.3, 0.7]] * 10)
    assert heldout_clip(p) == pytest.approx(0.5 / (2 * 21 * 1))
    assert heldout_clip(np.c_[p, np.zeros(20)] * 1.0) == pytest.approx(0.5 / (2 * 21 * 2))
    # weights are counted as rows (frequencies), or by Kish's size where they sum to fewer
    assert heldout_clip(p, np.full(20, 1e-3)) == heldout_clip(p)


def test_naive_bayes_extremes_on_few_rows_do_no_harm():
    # scikit-learn's bundled breast cancer; naive Bayes gives log-odds of hundreds, which the
    # 1e-12 floor turned into a wall of +-27.6: on 20 labelled rows the scale's prior then held
    # the scale near 1 and the biases absorbed the spread (test log loss 2.09x the model's own on
    # this draw, the small-data sweep's one harm cell). With the floor at half the map's output
    # floor the wrapper is no worse than the model (measured 0.48x).
    from sklearn.datasets import load_breast_cancer
    from sklearn.naive_bayes import GaussianNB

    X, y = load_breast_cancer(return_X_y=True)
    rng = np.random.default_rng(0)
    idx = rng.permutation(y.shape[0])
    fit, rest = idx[:189], idx[189:]
    test, pool = rest[:190], rest[190:]
    model = GaussianNB().fit(X[fit], y[fit])
    cal = rng.choice(pool, 20, replace=False)
    base = log_loss(y[test], np.clip(model.predict_proba(X[test]), 1e-12, 1))
    ps = PriorShiftWrapper(FrozenEstimator(model), n_resamples=0).fit(X[cal], y[cal])
    assert ps.calibrator_.clip_ == pytest.approx(0.5 / (2 * 21))
    assert log_loss(y[test], ps.predict_proba(X[test])) / base < 1.0


def test_bias_corrected_scaling_uses_clip_at_predict():
    # the floor chosen in fit is the one applied to new probabilities
    p = np.array([[0.9, 0.1], [0.5, 0.5], [0.2, 0.8], [1.0, 0.0]] * 5)
    y = np.array([0, 0, 1, 1] * 5)
    cal = BiasCorrectedScaling(identity_level=None).fit(p, y)
    assert cal.clip_ == pytest.approx(0.05)  # half the smallest non-zero probability 0.1
    z = np.log(np.maximum(p, 0.05))
    logits = z * cal.scale_ + cal.bias_
    expected = np.exp(logits - np.log(np.exp(logits).sum(1, keepdims=True)))
    floor = cal.floor_
    expected = np.maximum(expected, floor)
    expected /= expected.sum(1, keepdims=True)
    np.testing.assert_allclose(cal.predict(p), expected, rtol=1e-12)


def _diabetes_nb():
    from sklearn.datasets import load_diabetes
    from sklearn.naive_bayes import GaussianNB

    X, target = load_diabetes(return_X_y=True)
    y = (target > np.quantile(target, 0.9)).astype(int)
    return X, y, FrozenEstimator(GaussianNB().fit(X[:200], y[:200]))


@pytest.mark.parametrize("scale", [1.0, 1e-3])
def test_fit_warns_for_a_class_with_one_row(scale):
    # scikit-learn's diabetes, progression above its 90 % quantile: 20 labelled rows, ONE positive
    X, y, model = _diabetes_nb()
    rest = np.arange(200, y.shape[0])
    rows = np.concatenate([rest[y[rest] == 1][:1], rest[y[rest] == 0][:19]])
    w = np.full(rows.shape[0], scale)  # rows are counted, so the weights' scale does not matter
    with pytest.warns(UserWarning, match=r"fewer than 5 labelled rows \(1: 1\)"):
        PriorShiftWrapper(model, n_resamples=0).fit(X[rows], y[rows], sample_weight=w)


def test_fit_silent_with_enough_rows_of_each_class():
    X, y, model = _diabetes_nb()
    rest = np.arange(200, y.shape[0])
    rows = np.concatenate([rest[y[rest] == 1][:5], rest[y[rest] == 0][:15]])
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        PriorShiftWrapper(model, n_resamples=0).fit(X[rows], y[rows])


def _gaussian(n, prevalence, rng, delta):
    y = (rng.uniform(size=n) < prevalence).astype(int)
    return rng.normal(size=(n, 1)) + delta * y[:, None], y


@pytest.mark.parametrize(("delta", "n_new", "wide"), [(0.3, 20, True), (2.0, 2000, False)])
def test_adapt_warns_when_interval_spans_zero_to_one(delta, n_new, wide):
    from sklearn.linear_model import LogisticRegression

    from probwrap.shift import PriorNotIdentifiedWarning

    rng = np.random.default_rng(0)
    X, y = _gaussian(2000, 0.5, rng, delta)
    model = FrozenEstimator(LogisticRegression().fit(X, y))
    X_lab, y_lab = _gaussian(60 if wide else 400, 0.5, rng, delta)
    X_new, _ = _gaussian(n_new, 0.5, rng, delta)
    with warnings.catch_warnings(record=True) as rec:
        warnings.simplefilter("always")
        ps = PriorShiftWrapper(model, random_state=0).fit(X_lab, y_lab).adapt(X_new)
    iv = ps.target_prior_interval_
    spans = bool(np.any((iv[:, 0] <= 1e-6) & (iv[:, 1] >= 1 - 1e-6)))
    assert spans == wide
    hits = [r for r in rec if issubclass(r.category, PriorNotIdentifiedWarning)
            and "not informative" in str(r.message)]
    assert len(hits) == (1 if wide else 0)
