"""Reference tests for probwrap.metrics: each check names the outside source it relies on."""

from __future__ import annotations

import inspect
import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats
from sklearn import metrics as skm
from sklearn.calibration import calibration_curve
from sklearn.datasets import load_breast_cancer, load_iris
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.naive_bayes import GaussianNB
from sklearn.utils import check_random_state

from probwrap.metrics import (
    bootstrap_interval,
    brier_decomposition,
    brier_score,
    calibration_slope_intercept,
    classwise_calibration_error,
    expected_calibration_error,
    log_loss,
    net_benefit,
    net_benefit_treat_all,
    reliability_table,
)


@pytest.fixture(scope="module")
def cancer_holdout():
    """Held-out probabilities of a naive Bayes model on scikit-learn's bundled breast cancer data.

    Naive Bayes is known to give over-confident probabilities, so the calibration measures have
    something to find.
    """
    X, y = load_breast_cancer(return_X_y=True)
    X_tr, X_te, y_tr, y_te = train_test_split(X, y, test_size=0.5, random_state=0, stratify=y)
    proba = GaussianNB().fit(X_tr, y_tr).predict_proba(X_te)[:, 1]
    return y_te, proba


@pytest.fixture(scope="module")
def iris_holdout():
    """Held-out 3-class probabilities on scikit-learn's bundled iris data."""
    X, y = load_iris(return_X_y=True)
    X_tr, X_te, y_tr, y_te = train_test_split(X, y, test_size=0.5, random_state=1, stratify=y)
    proba = LogisticRegression(C=0.05, max_iter=500).fit(X_tr, y_tr).predict_proba(X_te)
    return y_te, proba


def _weights(n, seed=0):
    return np.random.default_rng(seed).integers(0, 4, size=n).astype(float) + 0.5


# ---------------------------------------------------------------------------------------------
# log loss and Brier score — reference: scikit-learn's log_loss and brier_score_loss
# ---------------------------------------------------------------------------------------------


def test_log_loss_binary_matches_sklearn(cancer_holdout):
    y, p = cancer_holdout
    p = np.clip(p, 1e-9, 1 - 1e-9)  # keep the comparison free of the clip rule
    w = _weights(len(y))
    assert log_loss(y, p) == pytest.approx(skm.log_loss(y, p), rel=1e-12)
    assert log_loss(y, p, sample_weight=w) == pytest.approx(
        skm.log_loss(y, p, sample_weight=w), rel=1e-12
    )


def test_log_loss_exact_zero_matches_sklearn_floor():
    # scikit-learn floors probabilities at float64 machine epsilon, as our default does
    y = np.array([0, 1, 1, 0])
    p = np.array([0.0, 0.0, 0.8, 0.3])  # row 1 gives the observed class probability 0
    with pytest.warns(UserWarning, match="1 row"):
        ours = log_loss(y, p)
    assert ours == pytest.approx(skm.log_loss(y, p), rel=1e-9)
    # by hand: (-log(1) - log(eps) - log(0.8) - log(0.7)) / 4
    eps = np.finfo(float).eps
    assert ours == pytest.approx((-np.log(eps) - np.log(0.8) - np.log(0.7)) / 4, rel=1e-9)


def test_log_loss_multiclass_matches_sklearn(iris_holdout):
    y, p = iris_holdout
    w = _weights(len(y), 1)
    assert log_loss(y, p, sample_weight=w) == pytest.approx(
        skm.log_loss(y, p, sample_weight=w), rel=1e-12
    )
    names = np.array(["setosa", "versicolor", "virginica"])
    assert log_loss(names[y], p, labels=names) == pytest.approx(skm.log_loss(y, p), rel=1e-12)


def test_brier_binary_matches_sklearn(cancer_holdout):
    y, p = cancer_holdout
    w = _weights(len(y), 2)
    assert brier_score(y, p, sample_weight=w) == pytest.approx(
        skm.brier_score_loss(y, p, sample_weight=w), rel=1e-12
    )
    # string labels: the second sorted label ("malignant" > "benign") is the positive class
    lab = np.where(y == 1, "malignant", "benign")
    assert brier_score(lab, p) == pytest.approx(skm.brier_score_loss(y, p), rel=1e-12)


@pytest.mark.skipif(
    "scale_by_half" not in inspect.signature(skm.brier_score_loss).parameters,
    reason="multiclass brier_score_loss needs scikit-learn >= 1.7",
)
def test_brier_multiclass_matches_sklearn(iris_holdout):
    y, p = iris_holdout
    w = _weights(len(y), 3)
    ref = skm.brier_score_loss(y, p, sample_weight=w, labels=[0, 1, 2], scale_by_half=False)
    assert brier_score(y, p, sample_weight=w) == pytest.approx(ref, rel=1e-12)


def test_brier_multiclass_hand_worked():
    # Brier (1950): score = (1/n) sum_i sum_k (p_ik - E_ik)^2 with E the outcome indicator.
    # row 1, class 1 occurred: (.2-0)^2 + (.7-1)^2 + (.1-0)^2 = .04 + .09 + .01 = .14
    # row 2, class 0 occurred: (.4-1)^2 + (.4-0)^2 + (.2-0)^2 = .36 + .16 + .04 = .56
    # mean = .35
    p = np.array([[0.2, 0.7, 0.1], [0.4, 0.4, 0.2]])
    assert brier_score([1, 0], p) == pytest.approx(0.35, abs=1e-15)
    # two columns give twice the single-column form: 2 * ((.3-1)^2 + .2^2)/2 = .53
    assert brier_score([1, 0], [[0.7, 0.3], [0.8, 0.2]]) == pytest.approx(0.53, abs=1e-15)
    assert brier_score([1, 0], [0.3, 0.2]) == pytest.approx(0.265, abs=1e-15)


# ---------------------------------------------------------------------------------------------
# expected calibration error
# ---------------------------------------------------------------------------------------------


def _ece_from_sklearn_curve(y, p, n_bins, strategy):
    """ECE from scikit-learn's calibration_curve, weighting each bin by its row count."""
    prob_true, prob_pred = calibration_curve(y, p, n_bins=n_bins, strategy=strategy)
    if strategy == "uniform":
        counts = np.histogram(p, bins=np.linspace(0, 1, n_bins + 1))[0]
    else:
        counts = np.full(n_bins, len(p) // n_bins)
    counts = counts[counts > 0]
    return float(np.sum(counts / counts.sum() * np.abs(prob_true - prob_pred)))


def test_ece_uniform_matches_sklearn_calibration_curve(cancer_holdout):
    y, p = cancer_holdout
    # scikit-learn closes bins on the right, we close them on the left; keep probabilities off
    # the edges so both conventions bin identically
    p = np.clip(p, 1e-6, 1 - 1e-6)
    edges = np.arange(11) / 10
    assert np.min(np.abs(p[:, None] - edges[None, :])) > 0
    ours = expected_calibration_error(y, p, n_bins=10)
    assert ours == pytest.approx(_ece_from_sklearn_curve(y, p, 10, "uniform"), rel=1e-12)
    assert ours > 0.02  # naive Bayes is visibly miscalibrated here


def test_ece_quantile_matches_sklearn_calibration_curve():
    # 1000 distinct forecasts and 10 bins: both definitions give blocks of 100 consecutive
    # sorted forecasts, so they must agree exactly
    rng = np.random.default_rng(5)
    p = rng.uniform(size=1000)
    y = (rng.uniform(size=1000) < p**1.5).astype(int)
    ours = expected_calibration_error(y, p, n_bins=10, strategy="quantile")
    ref = _ece_from_sklearn_curve(y, p, 10, "quantile")
    assert ours == pytest.approx(ref, rel=1e-12)
    table = reliability_table(y, p, n_bins=10, strategy="quantile")
    np.testing.assert_array_equal(table.weight, np.full(10, 100.0))


def test_ece_binary_hand_worked():
    # Bins [0, .5) and [.5, 1]. p = .5 sits on the inner edge and goes to the upper bin.
    # lower bin: p = .1, .2 with y = 0, 1 -> |0.5 - 0.15| = .35, share 2/5
    # upper bin: p = .5, .8, 1.0 with y = 1, 0, 1 -> |2/3 - 2.3/3| = .3/3 = .1, share 3/5
    # ECE = .35 * .4 + .1 * .6 = .14 + .06 = .20
    y = [0, 1, 1, 0, 1]
    p = [0.1, 0.2, 0.5, 0.8, 1.0]
    assert expected_calibration_error(y, p, n_bins=2) == pytest.approx(0.20, abs=1e-15)
    table = reliability_table(y, p, n_bins=2)
    np.testing.assert_allclose(table.weight, [2, 3])
    np.testing.assert_allclose(table.mean_predicted, [0.15, 2.3 / 3])


def test_ece_top_label_hand_worked():
    # Guo et al. (2017), eq. 3: bin rows by confidence max_k p_k, compare with accuracy.
    # rows (confidence, predicted, true): (.9, 0, 0) (.6, 1, 1) (.6, 1, 2) (.45, 2, 2)
    # 5 uniform bins of width .2: [.4, .6) holds .45 -> |1 - .45| = .55
    # [.6, .8) holds .6, .6 with accuracy 1/2 -> |.5 - .6| = .1; [.8, 1] holds .9 -> |1 - .9| = .1
    # ECE = (.55 * 1 + .1 * 2 + .1 * 1) / 4 = .85 / 4 = .2125
    p = np.array(
        [[0.9, 0.05, 0.05], [0.1, 0.6, 0.3], [0.2, 0.6, 0.2], [0.25, 0.3, 0.45]]
    )
    y = [0, 1, 2, 2]
    assert expected_calibration_error(y, p, n_bins=5) == pytest.approx(0.2125, abs=1e-15)
    assert expected_calibration_error(
        ["a", "b", "c", "c"], p, n_bins=5, labels=["a", "b", "c"]
    ) == pytest.approx(0.2125, abs=1e-15)


def test_classwise_is_mean_of_sklearn_one_vs_rest_curves(iris_holdout):
    # Kull et al. (2019), classwise-ECE: mean over classes of the binned one-vs-rest error.
    y, p = iris_holdout
    p = np.clip(p, 1e-7, 1.0)
    p = p / p.sum(axis=1, keepdims=True)
    edges = np.arange(6) / 5
    assert np.min(np.abs(p[..., None] - edges)) > 1e-12  # off the edges: conventions agree
    ref = np.mean([_ece_from_sklearn_curve((y == j).astype(int), p[:, j], 5, "uniform")
                   for j in range(3)])
    assert classwise_calibration_error(y, p, n_bins=5) == pytest.approx(ref, rel=1e-12)


# ---------------------------------------------------------------------------------------------
# Brier decomposition — Murphy (1973); Stephenson, Coelho & Jolliffe (2008) for the binned terms
# ---------------------------------------------------------------------------------------------


def test_murphy_decomposition_hand_worked():
    # Murphy (1973): BS = REL - RES + UNC with forecasts grouped by value.
    # forecast .2: outcomes 0, 1 (obar .5); forecast .6: outcomes 0, 1, 1 (obar 2/3); ybar = .6
    # REL = (2 (.2 - .5)^2 + 3 (.6 - 2/3)^2) / 5 = (.18 + 1/75) / 5 = .0386667
    # RES = (2 (.5 - .6)^2 + 3 (2/3 - .6)^2) / 5 = (.02 + 1/75) / 5 = .0066667
    # UNC = .6 * .4 = .24; BS = (.04 + .64 + .36 + .16 + .16) / 5 = .272
    d = brier_decomposition([0, 1, 0, 1, 1], [0.2, 0.2, 0.6, 0.6, 0.6])
    assert d.reliability == pytest.approx((0.18 + 1 / 75) / 5, abs=1e-15)
    assert d.resolution == pytest.approx((0.02 + 1 / 75) / 5, abs=1e-15)
    assert d.uncertainty == pytest.approx(0.24, abs=1e-15)
    assert d.brier == pytest.approx(0.272, abs=1e-15)
    assert d.n_groups == 2


def test_murphy_identity_and_brier_on_real_data(cancer_holdout):
    y, p = cancer_holdout
    w = _weights(len(y), 4)
    d = brier_decomposition(y, p, sample_weight=w)
    assert d.brier == pytest.approx(skm.brier_score_loss(y, p, sample_weight=w), rel=1e-12)
    assert d.reliability - d.resolution + d.uncertainty == pytest.approx(d.brier, abs=1e-12)
    ybar = np.average(y, weights=w)
    assert d.uncertainty == pytest.approx(ybar * (1 - ybar), rel=1e-12)


def test_binned_decomposition_stephenson_terms(cancer_holdout):
    # Stephenson, Coelho & Jolliffe (2008), "Two extra components in the Brier score
    # decomposition", Weather and Forecasting 23:752-757, the binned decomposition:
    # BS = REL - RES + UNC + WBV - WBC  (the form recalled from memory of the paper; the algebra
    # is also a direct expansion of (p - y)^2 around the bin means)
    y, p = cancer_holdout
    d = brier_decomposition(y, p, n_bins=10)
    assert d.within_bin_variance > 0
    total = d.reliability - d.resolution + d.uncertainty + d.within_bin_variance
    assert total - d.within_bin_covariance == pytest.approx(d.brier, abs=1e-12)
    # the three classical terms alone no longer add up
    assert abs(d.reliability - d.resolution + d.uncertainty - d.brier) > 1e-6


def test_multiclass_decomposition_sums_classes(iris_holdout):
    y, p = iris_holdout
    d = brier_decomposition(y, p)
    assert d.brier == pytest.approx(brier_score(y, p), rel=1e-12)
    assert d.reliability - d.resolution + d.uncertainty == pytest.approx(d.brier, abs=1e-12)
    # uncertainty of a one-hot outcome: sum_k obar_k (1 - obar_k); iris test split is balanced
    assert d.uncertainty == pytest.approx(3 * (1 / 3) * (2 / 3), rel=1e-12)


# ---------------------------------------------------------------------------------------------
# calibration slope and intercept — reference: statsmodels GLM Binomial (Cox 1958)
# ---------------------------------------------------------------------------------------------


def _sm_slope_intercept(y, p, w=None):
    x = np.log(p) - np.log1p(-p)
    kw = {} if w is None else {"freq_weights": w}
    slope_fit = sm.GLM(y, sm.add_constant(x), family=sm.families.Binomial(), **kw).fit(tol=1e-13)
    icpt_fit = sm.GLM(
        y, np.ones((len(y), 1)), family=sm.families.Binomial(), offset=x, **kw
    ).fit(tol=1e-13)
    return slope_fit.params[1], icpt_fit.params[0], slope_fit.params[0]


def test_slope_intercept_match_statsmodels(cancer_holdout):
    y, p = cancer_holdout
    p = np.clip(p, 1e-9, 1 - 1e-9)  # naive Bayes reaches exact 0/1; keep the clip rule out
    w = _weights(len(y), 6)
    for weights in (None, w):
        res = calibration_slope_intercept(y, p, sample_weight=weights)
        slope, icpt, a = _sm_slope_intercept(y.astype(float), p, weights)
        assert res.slope == pytest.approx(slope, rel=1e-7)
        assert res.intercept == pytest.approx(icpt, abs=1e-7)
        assert res.slope_fit_intercept == pytest.approx(a, abs=1e-7)
    assert res.slope < 0.5  # naive Bayes is over-confident


def test_slope_intercept_simulated_against_statsmodels():
    rng = np.random.default_rng(11)
    x = rng.normal(0, 2, size=500)
    p = 1 / (1 + np.exp(-x))
    y = (rng.uniform(size=500) < 1 / (1 + np.exp(-(0.4 + 0.6 * x)))).astype(float)
    res = calibration_slope_intercept(y, p)
    slope, icpt, a = _sm_slope_intercept(y, p)
    assert res.slope == pytest.approx(slope, rel=1e-8)
    assert res.intercept == pytest.approx(icpt, abs=1e-8)
    assert res.slope_fit_intercept == pytest.approx(a, abs=1e-8)


def test_in_sample_logistic_fit_is_perfectly_recalibrated():
    # For a logistic MLE with an intercept the score equations X'(y - mu) = 0 also hold for the
    # columns [1, X beta], so the in-sample slope is exactly 1 and the intercept exactly 0
    # (Cox 1958). Data: Spector & Mazzeo (1980), bundled with statsmodels.
    data = sm.datasets.spector.load_pandas()
    X = sm.add_constant(data.exog)
    fit = sm.Logit(data.endog, X).fit(disp=0, method="newton", tol=1e-14)
    p = np.asarray(fit.predict(X))
    res = calibration_slope_intercept(np.asarray(data.endog), p)
    assert res.slope == pytest.approx(1.0, abs=1e-6)
    assert res.intercept == pytest.approx(0.0, abs=1e-6)


# ---------------------------------------------------------------------------------------------
# net benefit — Vickers & Elkin (2006); counts from scikit-learn's confusion_matrix
# ---------------------------------------------------------------------------------------------


def test_net_benefit_matches_confusion_matrix(cancer_holdout):
    y, p = cancer_holdout
    w = _weights(len(y), 7)
    thresholds = np.array([0.05, 0.2, 0.5, 0.8, 0.95])
    ours = net_benefit(y, p, thresholds, sample_weight=w)
    for t, nb in zip(thresholds, ours, strict=True):
        tn, fp, fn, tp = skm.confusion_matrix(
            y, (p >= t).astype(int), sample_weight=w, labels=[0, 1]
        ).ravel()
        n = w.sum()
        assert nb == pytest.approx(tp / n - fp / n * t / (1 - t), rel=1e-12)  # V&E 2006 eq.
    assert net_benefit(y, p, 0.3, sample_weight=w) == pytest.approx(
        net_benefit(y, p, [0.3], sample_weight=w)[0], rel=1e-15
    )


def test_net_benefit_hand_worked_and_treat_all():
    # y = 1 0 1 0 0, p = .9 .7 .4 .4 .1; threshold .4 flags p >= .4 (ties flagged):
    # TP = 2, FP = 2, n = 5 -> NB = 2/5 - 2/5 * (.4/.6) = .4 - .266667 = .133333
    y = [1, 0, 1, 0, 0]
    p = [0.9, 0.7, 0.4, 0.4, 0.1]
    assert net_benefit(y, p, 0.4) == pytest.approx(0.4 - 0.4 * (0.4 / 0.6), abs=1e-15)
    # treat all: pi = .4 -> .4 - .6 * (.25 / .75) = .2
    assert net_benefit_treat_all(y, 0.25) == pytest.approx(0.2, abs=1e-15)
    # below the smallest forecast every row is flagged, so the model equals treat-all
    np.testing.assert_allclose(
        net_benefit(y, p, [0.05, 0.08]), net_benefit_treat_all(y, [0.05, 0.08]), atol=1e-15
    )


# ---------------------------------------------------------------------------------------------
# bootstrap — reference: scipy.stats.bootstrap (paired, percentile and basic)
# ---------------------------------------------------------------------------------------------


def _scipy_seed(seed):
    # SciPy >= 1.15 names the seed `rng`; older releases call it `random_state`
    if "rng" in inspect.signature(stats.bootstrap).parameters:
        return {"rng": np.random.default_rng(seed)}
    return {"random_state": np.random.default_rng(seed)}


@pytest.mark.parametrize("method", ["percentile", "basic"])
def test_bootstrap_agrees_with_scipy(cancer_holdout, method):
    y, p = cancer_holdout
    B = 2000
    ours = bootstrap_interval(
        brier_score, y, p, n_resamples=B, method=method, random_state=0
    )
    ref = stats.bootstrap(
        (y, p), lambda a, b: skm.brier_score_loss(a, b), paired=True, vectorized=False,
        n_resamples=B, method=method, confidence_level=0.95, **_scipy_seed(1),
    )
    se = ref.standard_error
    # Monte-Carlo tolerance: with B = 2000 the 2.5% / 97.5% quantile estimates have a sampling
    # sd of about sqrt(.025 * .975 / B) / phi(1.96) ~= 0.06 SE each, so the gap between two
    # independent runs has sd ~0.085 SE; 0.35 SE is about 4 sd. The SE estimate itself has a
    # relative sd of ~1 / sqrt(2B) ~= 1.6%; we allow 8%.
    assert ours.statistic == pytest.approx(skm.brier_score_loss(y, p), rel=1e-12)
    assert abs(ours.confidence_interval.low - ref.confidence_interval.low) < 0.35 * se
    assert abs(ours.confidence_interval.high - ref.confidence_interval.high) < 0.35 * se
    assert ours.standard_error == pytest.approx(se, rel=0.08)
    assert ours.bootstrap_distribution.shape == (B,)


def test_bootstrap_weights_equal_explicit_resampling():
    # The documented draw: resample r uses check_random_state(seed).randint(0, n, n) in order.
    # Evaluating the metric on the copied rows must give the same distribution.
    rng = np.random.default_rng(3)
    p = rng.uniform(size=60)
    y = (rng.uniform(size=60) < p).astype(int)
    res = bootstrap_interval(
        expected_calibration_error, y, p, n_resamples=50, random_state=7, strategy="quantile",
        n_bins=4,
    )
    draw = check_random_state(7)
    explicit = []
    for _ in range(50):
        idx = draw.randint(0, 60, size=60)
        explicit.append(expected_calibration_error(y[idx], p[idx], strategy="quantile", n_bins=4))
    np.testing.assert_allclose(res.bootstrap_distribution, explicit, rtol=1e-12, atol=1e-15)
    lo, hi = np.quantile(explicit, [0.025, 0.975])  # linear interpolation, as scipy
    assert res.confidence_interval == pytest.approx((lo, hi), rel=1e-12)


def test_bootstrap_metric_ignoring_weights_gets_copied_rows():
    # Regression: a metric that accepts but ignores sample_weight gave every resample the full-
    # data value, a zero-width interval, silently. Now it is detected, warned about, and the rows
    # are copied: the result equals the explicit row bootstrap with the documented draws.
    rng = np.random.default_rng(4)
    p = rng.uniform(size=80)
    y = (rng.uniform(size=80) < p).astype(int)

    def mean_forecast(y_true, y_prob, sample_weight=None):  # ignores the weights
        return float(np.mean(y_prob))

    with pytest.warns(UserWarning, match="does not treat `sample_weight` as row frequencies"):
        res = bootstrap_interval(mean_forecast, y, p, n_resamples=100, random_state=2)
    draw = check_random_state(2)
    explicit = [np.mean(p[draw.randint(0, 80, size=80)]) for _ in range(100)]
    np.testing.assert_allclose(res.bootstrap_distribution, explicit, rtol=1e-12)
    assert res.confidence_interval.high - res.confidence_interval.low > 0.05


def test_bootstrap_frequency_weighted_metric_raises_no_warning(cancer_holdout):
    y, p = cancer_holdout
    with warnings.catch_warnings():
        warnings.simplefilter("error", UserWarning)
        bootstrap_interval(brier_score, y, p, n_resamples=20, random_state=0)


def test_bootstrap_vector_statistic_net_benefit(cancer_holdout):
    y, p = cancer_holdout
    res = bootstrap_interval(net_benefit, y, p, threshold=[0.1, 0.5], n_resamples=200,
                             random_state=0)
    assert res.bootstrap_distribution.shape == (2, 200)
    np.testing.assert_allclose(res.statistic, net_benefit(y, p, [0.1, 0.5]))
    assert np.all(res.confidence_interval.low < res.statistic)
    assert np.all(res.statistic < res.confidence_interval.high)
