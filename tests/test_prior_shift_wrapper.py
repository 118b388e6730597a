"""PriorShiftWrapper: identity, known priors, adaptation, composition and bad input."""

from __future__ import annotations

import pickle
import warnings

import numpy as np
import pytest
from scipy.stats import norm
from sklearn.base import clone
from sklearn.frozen import FrozenEstimator
from sklearn.linear_model import LogisticRegression

from probwrap import CostPolicyWrapper, PriorShiftWrapper
from probwrap.decision import ImpliedPositiveClassWarning
from probwrap.shift import adjust_to_prior


def gaussian_data(n, prior, rng, sep=2.0):
    """One feature, unit-variance classes at 0 and `sep`: logistic regression is well specified."""
    y = (rng.uniform(size=n) < prior).astype(int)
    return rng.normal(sep * y, 1.0)[:, None], y


def true_posterior(X, prior, sep=2.0):
    d1 = norm.pdf(X[:, 0], sep, 1.0) * prior
    d0 = norm.pdf(X[:, 0], 0.0, 1.0) * (1 - prior)
    return d1 / (d0 + d1)


@pytest.fixture(scope="module")
def fitted():
    rng = np.random.default_rng(0)
    X, y = gaussian_data(3000, 0.3, rng)
    model = PriorShiftWrapper(LogisticRegression(), n_resamples=100, random_state=0).fit(X, y)
    return model, rng


def test_identity_before_adapt(fitted):
    # Consistency test of the documented rule: predict_proba always returns the calibrated
    # posteriors, re-weighted only once a prior other than the source prior is in use.
    model, rng = fitted
    X, _ = gaussian_data(50, 0.5, rng)
    calibrated = model.prior_estimator_.calibrate_output(model.estimator_.predict_proba(X))
    np.testing.assert_array_equal(model.predict_proba(X), calibrated)
    np.testing.assert_array_equal(model.applied_prior_, model.source_prior_)
    raw = clone(model).set_params(calibration=None).fit(*gaussian_data(600, 0.3, rng))
    np.testing.assert_array_equal(raw.predict_proba(X), raw.estimator_.predict_proba(X))


def test_adapt_recovers_prior_and_true_posteriors_of_gaussian_classes(fitted):
    # Bayes' rule with the scipy.stats.norm class densities gives the exact target posterior;
    # the adapted wrapper must reproduce it (Saerens et al. 2002, eqs. 2.4 and 2.9-2.10).
    model = clone(fitted[0])
    rng = np.random.default_rng(1)
    X, y = gaussian_data(3000, 0.3, rng)
    model.fit(X, y)
    X_new, _ = gaussian_data(5000, 0.65, rng)
    assert model.adapt(X_new) is model
    assert model.target_prior_[1] == pytest.approx(0.65, abs=0.03)
    lo, hi = model.target_prior_interval_[1]
    assert lo <= 0.65 <= hi and hi - lo < 0.1
    assert model.shift_pvalue_ < 1e-10
    grid = np.linspace(-2, 4, 61)[:, None]
    np.testing.assert_allclose(model.predict_proba(grid)[:, 1], true_posterior(grid, 0.65),
                               atol=0.03)
    # Without adaptation the same model is far off on the target population.
    assert np.max(np.abs(model.estimator_.predict_proba(grid)[:, 1] - true_posterior(grid, 0.65))) > 0.15


def test_known_target_prior_array_dict_and_float_agree():
    rng = np.random.default_rng(2)
    X, y = gaussian_data(1000, 0.4, rng)
    labels = np.where(y == 1, "damaged", "intact")
    X_new, _ = gaussian_data(20, 0.5, rng)
    outs = []
    # classes_ are sorted, ["damaged", "intact"]; a float is the prevalence of classes_[1]
    for tp in ([0.2, 0.8], {"intact": 0.8, "damaged": 0.2}, 0.8):
        m = PriorShiftWrapper(LogisticRegression(), target_prior=tp, random_state=0)
        if isinstance(tp, float):  # names no class: the warning says it is 'intact'
            with pytest.warns(ImpliedPositiveClassWarning, match="treats 'intact' as the"):
                m.fit(X, labels)
        else:
            m.fit(X, labels)
        outs.append(m.predict_proba(X_new))
    np.testing.assert_allclose(outs[0], outs[1], atol=1e-15)
    np.testing.assert_allclose(outs[0], outs[2], atol=1e-15)
    expected = adjust_to_prior(m.calibrator_.predict_output(m.estimator_.predict_proba(X_new)),
                               m.source_prior_, [0.2, 0.8])
    np.testing.assert_allclose(outs[0], expected, atol=1e-15)


def test_known_prior_takes_precedence_over_adapt():
    rng = np.random.default_rng(3)
    X, y = gaussian_data(1000, 0.4, rng)
    m = PriorShiftWrapper(LogisticRegression(), target_prior=[0.5, 0.5], n_resamples=0).fit(X, y)
    before = m.predict_proba(X[:10])
    with pytest.warns(UserWarning, match="keeps adjusting"):
        m.adapt(gaussian_data(500, 0.9, rng)[0])
    np.testing.assert_array_equal(before, m.predict_proba(X[:10]))
    assert m.target_prior_[1] > 0.7


def test_source_prior_is_weighted_and_refit_clears_adaptation():
    rng = np.random.default_rng(4)
    X, y = gaussian_data(600, 0.5, rng)
    w = rng.uniform(0.2, 3.0, size=600)
    m = PriorShiftWrapper(LogisticRegression(), n_resamples=0, random_state=0)
    m.fit(X, y, sample_weight=w)
    assert m.source_prior_[1] == pytest.approx(np.average(y, weights=w), abs=1e-12)
    m.adapt(X)
    assert hasattr(m, "target_prior_")
    m.fit(X, y)
    assert not hasattr(m, "target_prior_")
    np.testing.assert_array_equal(
        m.predict_proba(X[:5]), m.prior_estimator_.calibrate_output(m.estimator_.predict_proba(X[:5]))
    )


def test_frozen_estimator_is_not_refitted_and_rows_are_heldout():
    rng = np.random.default_rng(5)
    X_tr, y_tr = gaussian_data(800, 0.5, rng)
    base = LogisticRegression().fit(X_tr, y_tr)
    coef = base.coef_.copy()
    X_ho, y_ho = gaussian_data(500, 0.2, rng)
    m = PriorShiftWrapper(FrozenEstimator(base), n_resamples=0).fit(X_ho, y_ho)
    np.testing.assert_array_equal(base.coef_, coef)
    assert m.source_prior_[1] == pytest.approx(y_ho.mean())
    # the held-out confusion matrix is that of the frozen model's (calibrated) predictions
    pred = m.calibrator_.predict(base.predict_proba(X_ho)).argmax(1)
    assert m.confusion_matrix_[1, 1] == pytest.approx(np.mean((pred == 1) & (y_ho == 1)))


def test_multiclass_adapt_and_monitor():
    rng = np.random.default_rng(6)
    means = np.array([[0, 0], [3, 0], [0, 3]])

    def draw(n, prior):
        y = rng.choice(3, size=n, p=prior)
        return rng.normal(means[y], 1.0), y

    X, y = draw(3000, [1 / 3, 1 / 3, 1 / 3])
    m = PriorShiftWrapper(LogisticRegression(), method="bbse", n_resamples=30,
                          random_state=0).fit(X, y)
    X_new, _ = draw(3000, [0.6, 0.3, 0.1])
    m.adapt(X_new)
    np.testing.assert_allclose(m.target_prior_, [0.6, 0.3, 0.1], atol=0.04)
    assert m.target_prior_interval_.shape == (3, 2)
    table = m.monitor(X_new, batch_size=1000)
    assert table["prior"].shape == (3, 3) and np.all(table["shift_pvalue"] < 1e-3)
    proba = m.predict_proba(X_new)
    np.testing.assert_allclose(proba.sum(1), 1.0)
    assert np.all(np.isfinite(proba))


def test_pickle_round_trip_keeps_adaptation(fitted):
    model, rng = fitted
    m = clone(model).fit(*gaussian_data(800, 0.3, rng)).adapt(gaussian_data(500, 0.6, rng)[0])
    m2 = pickle.loads(pickle.dumps(m))
    X = gaussian_data(10, 0.5, rng)[0]
    np.testing.assert_array_equal(m.predict_proba(X), m2.predict_proba(X))


def test_cost_policy_actions_move_after_adapt():
    # Decisions move with prevalence: CostPolicyWrapper's Bayes rule reads the inner
    # predict_proba, so after adapt (prevalence 10 % -> 40 %) more rows get the costly action.
    rng = np.random.default_rng(7)
    X, y = gaussian_data(2000, 0.1, rng)
    policy = CostPolicyWrapper(
        PriorShiftWrapper(LogisticRegression(), n_resamples=0, random_state=0),
        costs={"tp": 5.0, "fp": 5.0, "fn": 50.0, "tn": 0.0},
        strategy="bayes",
    ).fit(X, y)
    X_new, y_new = gaussian_data(3000, 0.4, rng)
    before = policy.predict(X_new)
    policy.estimator_.adapt(X_new)
    after = policy.predict(X_new)
    assert np.mean(after == 1) > np.mean(before == 1) + 0.05
    # The Bayes rule on adapted posteriors flags exactly the rows whose unadapted probability
    # clears the cutoff moved by shift_cutoff (odds ratio of the priors).
    from probwrap.shift import shift_cutoff

    inner = policy.estimator_
    raw = inner.calibrator_.predict_output(inner.estimator_.predict_proba(X_new))[:, 1]
    moved = shift_cutoff(policy.cutoff_, inner.source_prior_[1], inner.applied_prior_[1])
    agree = np.mean((raw > moved) == (after == 1))
    assert agree > 0.999


def test_bad_input_names_the_argument():
    rng = np.random.default_rng(8)
    X, y = gaussian_data(200, 0.5, rng)
    cases = [
        ({"target_prior": [0.5, 0.6]}, "`target_prior` must sum to one"),
        ({"target_prior": [1.5, -0.5]}, "`target_prior` must be non-negative"),
        ({"target_prior": [0.2, 0.3, 0.5]}, "`target_prior` must have one entry per class"),
        ({"target_prior": {0: 0.5, 7: 0.5}}, r"`target_prior` has keys \[7\]"),
        ({"target_prior": {0: 1.0}}, "no entry for class"),
        ({"method": "mle"}, "`method`"),
        ({"calibration": "platt"}, "`calibration`"),
    ]
    for params, match in cases:
        with pytest.raises(ValueError, match=match):
            PriorShiftWrapper(LogisticRegression(), **params).fit(X, y)
    m = PriorShiftWrapper(LogisticRegression(), n_resamples=0).fit(X, y)
    with pytest.raises(ValueError, match="`X` passed to adapt has 3 features"):
        m.adapt(np.zeros((10, 3)))
    with pytest.raises(ValueError, match="`X` passed to monitor has 2 features"):
        m.monitor(np.zeros((10, 2)), batch_size=5)


def test_very_few_unlabelled_rows_warn_and_stay_finite(fitted):
    model, rng = fitted
    m = clone(model).set_params(n_resamples=30).fit(*gaussian_data(500, 0.3, rng))
    with pytest.warns(UserWarning, match="effective unlabelled rows"):
        m.adapt(gaussian_data(3, 0.3, rng)[0])
    assert np.all(np.isfinite(m.target_prior_interval_))
    assert m.target_prior_interval_[1, 1] - m.target_prior_interval_[1, 0] > 0.4
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        out = m.predict_proba(gaussian_data(5, 0.3, rng)[0])
    assert np.all(np.isfinite(out))


def test_adapt_weights_are_frequency_weights():
    # A weight of 2 counts as a repeated row in the likelihood: the maximum-likelihood prior is
    # the same. Whole-number weights without a common factor (some above 1) are a count table and
    # count their cases in the shift test too (docs/weights.md; with a model refit here since
    # session 28): the same statistic as the rows repeated. The same weights divided by their sum
    # are relative: the test counts Kish's effective sample size of them, below sum(w), so it
    # sees less evidence.
    rng = np.random.default_rng(9)
    X, y = gaussian_data(800, 0.3, rng)
    m = PriorShiftWrapper(LogisticRegression(), n_resamples=0, random_state=0).fit(X, y)
    X_new, _ = gaussian_data(300, 0.6, rng)
    w = rng.integers(1, 4, size=300)
    weighted = clone(m).fit(X, y).adapt(X_new, sample_weight=w)
    repeated = clone(m).fit(X, y).adapt(np.repeat(X_new, w, axis=0))
    np.testing.assert_allclose(
        weighted.prior_estimate_.ml_prior, repeated.prior_estimate_.ml_prior, atol=1e-6
    )
    np.testing.assert_allclose(weighted.shift_statistic_, repeated.shift_statistic_, rtol=1e-6)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        relative = clone(m).fit(X, y).adapt(X_new, sample_weight=w / w.sum())
    np.testing.assert_allclose(
        relative.prior_estimate_.ml_prior, repeated.prior_estimate_.ml_prior, atol=1e-6
    )
    n_kish = w.sum() ** 2 / np.sum(w**2)
    assert n_kish < w.sum()
    # the test's evidence grows with the count it is based on: fewer effective rows, less
    assert 0 < relative.shift_statistic_ < 0.95 * repeated.shift_statistic_


def test_dataframe_input_reaches_the_estimator_untouched():
    pd = pytest.importorskip("pandas")
    rng = np.random.default_rng(10)
    X, y = gaussian_data(600, 0.3, rng)
    frame = pd.DataFrame(X, columns=["fill_ratio"])
    m = PriorShiftWrapper(LogisticRegression(), n_resamples=0).fit(frame, y)
    assert list(m.feature_names_in_) == ["fill_ratio"]
    new = pd.DataFrame(gaussian_data(400, 0.6, rng)[0], columns=["fill_ratio"])
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no feature-name warning from the inner estimator
        m.adapt(new)
        proba = m.predict_proba(new)
    assert proba.shape == (400, 2) and m.target_prior_[1] > 0.45
