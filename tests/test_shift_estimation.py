"""Intervals, the shift test, bundled data sets and the per-batch table of probwrap.shift."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
from scipy.stats import norm
from sklearn.datasets import load_breast_cancer, load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler

from probwrap.shift import (
    PriorEstimator,
    binomial_interval,
    prior_by_batch,
    shift_test,
)


def binary_gaussian(n, prior, rng, sep=2.0):
    """Unit-variance classes at 0 and `sep`; exact posteriors under equal priors."""
    y = (rng.uniform(size=n) < prior).astype(int)
    x = rng.normal(sep * y, 1.0)
    d1, d0 = norm.pdf(x, sep, 1.0), norm.pdf(x, 0.0, 1.0)
    p1 = d1 / (d0 + d1)
    return np.column_stack([1 - p1, p1]), y


# -- the likelihood-ratio test -----------------------------------------------------------------
def test_shift_test_rejects_at_about_its_nominal_rate_without_shift():
    # Under "no shift", 2 log LR is asymptotically chi-square(k - 1) (Wilks 1938), so a 5 % test
    # rejects in about 5 % of repeated draws. 400 draws of 300 rows: a 99 % binomial band around
    # 0.05 is [0.022, 0.078].
    rng = np.random.default_rng(20)
    pvals = np.array([shift_test(binary_gaussian(300, 0.5, rng)[0], [0.5, 0.5]).pvalue
                      for _ in range(400)])
    rate = np.mean(pvals < 0.05)
    assert 0.022 <= rate <= 0.078
    assert np.all(np.isfinite(pvals)) and pvals.min() >= 0 and pvals.max() <= 1


def test_shift_test_detects_a_doubled_prevalence():
    rng = np.random.default_rng(21)
    p, _ = binary_gaussian(2000, 0.2, rng)
    # The posteriors are for equal priors; adjust them to a 10 % source, then feed 20 % rows.
    from probwrap.shift import adjust_to_prior

    p_src = adjust_to_prior(p, [0.5, 0.5], [0.9, 0.1])
    res = shift_test(p_src, [0.9, 0.1])
    assert res.pvalue < 1e-6 and res.df == 1
    assert res.prior[1] == pytest.approx(0.2, abs=0.03)


# -- intervals ---------------------------------------------------------------------------------
def test_binomial_interval_matches_statsmodels_clopper_pearson():
    # Reference: statsmodels proportion_confint(method="beta") (Clopper & Pearson 1934).
    smp = pytest.importorskip("statsmodels.stats.proportion")
    for count, n in [(0, 10), (3, 10), (10, 10), (17, 250)]:
        lo, hi = smp.proportion_confint(count, n, alpha=0.05, method="beta")
        np.testing.assert_allclose(binomial_interval(count / n, n), [lo, hi], atol=1e-10)


def test_acc_bootstrap_interval_matches_wald_interval_of_a_proportion():
    # With the confusion matrix held fixed (resample_source=False), binary ACC is the affine map
    # (q - fpr) / (tpr - fpr) of a sample proportion q, so its interval is the Wald interval
    # q +- 1.96 sqrt(q (1 - q) / n) mapped through it (Forman 2008; normal approximation).
    rng = np.random.default_rng(22)
    p_src, y_src = binary_gaussian(4000, 0.5, rng)
    p_new, _ = binary_gaussian(3000, 0.3, rng)
    est = PriorEstimator("acc", calibration=None, n_resamples=1000, resample_source=False,
                         random_state=0).fit(p_src, y_src)
    res = est.estimate(p_new)
    m = est.confusion_ / est.confusion_.sum(0)
    tpr, fpr = m[1, 1], m[1, 0]
    q = np.mean(p_new.argmax(1) == 1)
    half = 1.96 * np.sqrt(q * (1 - q) / len(p_new)) / (tpr - fpr)
    centre = (q - fpr) / (tpr - fpr)
    assert res.prior[1] == pytest.approx(centre, abs=1e-9)
    lo, hi = res.interval[1]
    assert (hi - lo) / 2 == pytest.approx(half, rel=0.12)
    assert lo < centre < hi


def test_em_bootstrap_interval_matches_observed_fisher_information():
    # Maximum-likelihood theory (Fisher information): the standard error of the EM prior is
    # 1 / sqrt(sum_n (a_n - b_n)^2 / (pi a_n + (1 - pi) b_n)^2), with a, b the density ratios
    # p_s(1|x)/pi_s1 and p_s(0|x)/pi_s0. The bootstrap 95 % interval should be about +-1.96 SE.
    rng = np.random.default_rng(23)
    p_src, y_src = binary_gaussian(2000, 0.5, rng)
    p_new, _ = binary_gaussian(2000, 0.25, rng)
    est = PriorEstimator(calibration=None, n_resamples=400, resample_source=False,
                         random_state=1, interval="percentile").fit(p_src, y_src)
    res = est.estimate(p_new)
    src = est.source_prior_
    a, b = p_new[:, 1] / src[1], p_new[:, 0] / src[0]
    pi = res.prior[1]
    se = 1 / np.sqrt(np.sum((a - b) ** 2 / (pi * a + (1 - pi) * b) ** 2))
    lo, hi = res.interval[1]
    assert (hi - lo) / 2 == pytest.approx(1.96 * se, rel=0.15)


def test_resampling_the_source_widens_the_interval():
    rng = np.random.default_rng(24)
    p_src, y_src = binary_gaussian(300, 0.5, rng)
    p_new, _ = binary_gaussian(5000, 0.3, rng)
    widths = []
    for resample in (False, True):
        est = PriorEstimator("bbse", n_resamples=200, resample_source=resample,
                             random_state=2, interval="percentile").fit(p_src, y_src)
        iv = est.estimate(p_new).interval[1]
        widths.append(iv[1] - iv[0])
    assert widths[1] > 1.3 * widths[0]


@pytest.mark.parametrize("method", ["em", "bbse", "bbse_soft", "acc", "pacc"])
def test_every_method_has_an_interval_containing_its_estimate(method):
    rng = np.random.default_rng(25)
    p_src, y_src = binary_gaussian(800, 0.5, rng)
    p_new, _ = binary_gaussian(800, 0.2, rng)
    res = PriorEstimator(method, n_resamples=60, random_state=0).fit(p_src, y_src).estimate(p_new)
    assert res.method == method
    assert res.interval.shape == (2, 2)
    assert np.all(res.interval[:, 0] <= res.prior) and np.all(res.prior <= res.interval[:, 1])
    assert res.prior[1] == pytest.approx(0.2, abs=0.06)
    assert res.shift_pvalue < 1e-3


# -- bundled data sets resampled to known priors -----------------------------------------------
def _resample_to_prior(y, prior, n, rng):
    counts = np.round(np.asarray(prior) * n).astype(int)
    idx = np.concatenate([rng.choice(np.flatnonzero(y == k), size=c, replace=True)
                          for k, c in enumerate(counts)])
    return idx, counts / counts.sum()


def _three_way_split(X, y, seed):
    X_tr, X_rest, y_tr, y_rest = train_test_split(X, y, train_size=0.4, stratify=y,
                                                  random_state=seed)
    X_ho, X_pool, y_ho, y_pool = train_test_split(X_rest, y_rest, train_size=0.5,
                                                  stratify=y_rest, random_state=seed)
    return X_tr, y_tr, X_ho, y_ho, X_pool, y_pool


@pytest.mark.parametrize("target", [0.15, 0.75])
def test_breast_cancer_resampled_to_known_prevalence(target):
    # scikit-learn's bundled Wisconsin breast-cancer data (569 rows, 37 % class 0): the
    # unlabelled pool is resampled (with replacement, by class) to a known prevalence of
    # class 1. Stated tolerance: every method within 0.06 of the true prior; the bootstrap
    # interval of EM covers it.
    X, y = load_breast_cancer(return_X_y=True)
    X_tr, y_tr, X_ho, y_ho, X_pool, y_pool = _three_way_split(X, y, 0)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.3, max_iter=2000))
    model.fit(X_tr, y_tr)
    rng = np.random.default_rng(30)
    idx, truth = _resample_to_prior(y_pool, [1 - target, target], 2000, rng)
    p_new = model.predict_proba(X_pool[idx])
    p_ho = model.predict_proba(X_ho)
    for method in ("em", "bbse", "bbse_soft", "acc", "pacc"):
        est = PriorEstimator(method, n_resamples=100 if method == "em" else 0,
                             random_state=0).fit(p_ho, y_ho)
        res = est.estimate(p_new)
        assert res.prior[1] == pytest.approx(truth[1], abs=0.06), method
        if method == "em":
            assert res.interval[1, 0] <= truth[1] <= res.interval[1, 1]
            # the shift test also carries the error of the ~170 labelled rows, so a move from
            # 63 % to 75 % is detected at 1 %, not at 0.1 %
            assert res.shift_pvalue < 1e-2


def test_digits_ten_classes_resampled_to_known_priors():
    # scikit-learn's bundled digits (1797 rows, 10 classes): the unlabelled pool resampled to a
    # strongly skewed known prior. Stated tolerance: max abs error 0.03 (EM, BBSE, PACC) over
    # the ten classes.
    X, y = load_digits(return_X_y=True)
    X_tr, y_tr, X_ho, y_ho, X_pool, y_pool = _three_way_split(X, y, 1)
    model = make_pipeline(StandardScaler(), LogisticRegression(C=0.05, max_iter=3000))
    model.fit(X_tr, y_tr)
    prior = np.array([0.30, 0.20, 0.12, 0.10, 0.08, 0.06, 0.05, 0.04, 0.03, 0.02])
    rng = np.random.default_rng(31)
    idx, truth = _resample_to_prior(y_pool, prior, 3000, rng)
    p_new = model.predict_proba(X_pool[idx])
    p_ho = model.predict_proba(X_ho)
    for method in ("em", "bbse", "pacc"):
        res = PriorEstimator(method, n_resamples=0).fit(p_ho, y_ho).estimate(p_new)
        assert np.max(np.abs(res.prior - truth)) <= 0.03, (method, res.prior.round(3))
    # no-shift control: the pool resampled at the held-out frequencies is not flagged strongly
    idx0, _ = _resample_to_prior(y_pool, np.bincount(y_ho) / len(y_ho), 600, rng)
    res0 = PriorEstimator(n_resamples=0).fit(p_ho, y_ho).estimate(model.predict_proba(X_pool[idx0]))
    assert res0.shift_pvalue > 1e-3


# -- the per-batch table -----------------------------------------------------------------------
def test_prior_by_batch_flags_the_shifted_batch_only():
    rng = np.random.default_rng(40)
    p_src, y_src = binary_gaussian(2000, 0.2, rng)
    est = PriorEstimator(n_resamples=40, random_state=0).fit(p_src, y_src)
    batches = [binary_gaussian(800, pr, rng)[0] for pr in (0.2, 0.2, 0.45)]
    labels = np.repeat(np.array(["week-1", "week-2", "week-3"]), 800)
    table = prior_by_batch(est, np.vstack(batches), labels)
    assert table["batch"].tolist() == ["week-1", "week-2", "week-3"]
    assert table["n_rows"].tolist() == [800, 800, 800]
    assert table["prior"].shape == (3, 2)
    assert table["shift_pvalue"][2] < 1e-6
    assert table["prior"][2, 1] == pytest.approx(0.45, abs=0.06)
    assert np.all(table["lower"] <= table["prior"]) and np.all(table["prior"] <= table["upper"])
    assert np.all(np.isfinite(table["shift_statistic"]))


def test_prior_by_batch_keeps_first_appearance_order_and_batch_size():
    rng = np.random.default_rng(41)
    p_src, y_src = binary_gaussian(500, 0.5, rng)
    est = PriorEstimator(n_resamples=0).fit(p_src, y_src)
    p_new, _ = binary_gaussian(250, 0.5, rng)
    table = prior_by_batch(est, p_new, batch_size=100)
    assert table["batch"].tolist() == [0, 1, 2] and table["n_rows"].tolist() == [100, 100, 50]
    labels = np.repeat([7, 3], [125, 125])
    assert prior_by_batch(est, p_new, labels)["batch"].tolist() == [7, 3]


# -- bad input and thin data -------------------------------------------------------------------
def test_few_unlabelled_rows_warn_and_give_a_wide_finite_interval():
    rng = np.random.default_rng(50)
    p_src, y_src = binary_gaussian(500, 0.5, rng)
    est = PriorEstimator(n_resamples=50, random_state=0).fit(p_src, y_src)
    with pytest.warns(UserWarning, match="effective unlabelled rows"):
        res = est.estimate(binary_gaussian(5, 0.5, rng)[0])
    assert np.all(np.isfinite(res.interval)) and np.isfinite(res.shift_pvalue)
    # at least the Clopper-Pearson width of 5 labelled rows
    assert np.all(res.interval[:, 1] - res.interval[:, 0] >= 0.4)
    with pytest.warns(UserWarning):
        one = est.estimate(p_src[:1])
    assert np.all(np.isfinite(one.prior)) and np.all(np.isfinite(one.interval))


def test_class_with_zero_predicted_mass_warns_and_stays_finite():
    rng = np.random.default_rng(51)
    p_src, y_src = binary_gaussian(500, 0.5, rng)
    p_new = np.tile([[1.0, 0.0]], (200, 1))
    for method in ("em", "bbse", "acc"):
        est = PriorEstimator(method, calibration=None, n_resamples=20, random_state=0)
        est.fit(p_src, y_src)
        with pytest.warns(UserWarning, match="zero"):
            res = est.estimate(p_new)
        assert np.all(np.isfinite(res.prior)) and np.all(np.isfinite(res.interval))
        assert res.interval[1, 1] > 0.01  # the interval does not collapse onto zero


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"method": "median"}, "`method`"),
        ({"calibration": "platt"}, "`calibration`"),
        ({"n_resamples": -1}, "`n_resamples`"),
        ({"confidence_level": 1.5}, "`confidence_level`"),
        ({"tol": 0}, "`tol`"),
        ({"max_iter": 0}, "`max_iter`"),
    ],
)
def test_bad_parameters_name_the_argument(kwargs, match):
    rng = np.random.default_rng(52)
    p, y = binary_gaussian(100, 0.5, rng)
    with pytest.raises(ValueError, match=match):
        PriorEstimator(**kwargs).fit(p, y)


def test_bad_arrays_name_the_argument():
    from probwrap.shift import adjust_to_prior, bbse_prior, em_prior, shift_cutoff

    p = np.array([[0.2, 0.8], [0.6, 0.4]])
    with pytest.raises(ValueError, match="`target_prior` must sum to one"):
        adjust_to_prior(p, [0.5, 0.5], [0.5, 0.6])
    with pytest.raises(ValueError, match="`target_prior` must be non-negative"):
        adjust_to_prior(p, [0.5, 0.5], [1.2, -0.2])
    with pytest.raises(ValueError, match="`source_prior` must have one entry per class"):
        adjust_to_prior(p, [0.2, 0.3, 0.5], [0.5, 0.5])
    with pytest.raises(ValueError, match="`source_prior` must be strictly positive"):
        em_prior(p, [1.0, 0.0])
    with pytest.raises(ValueError, match="`target_prior` contains NaN"):
        adjust_to_prior(p, [0.5, 0.5], [np.nan, 0.5])
    with pytest.raises(ValueError, match="`proba`"):
        adjust_to_prior([[0.2, 0.9]], [0.5, 0.5], [0.5, 0.5])
    with pytest.raises(ValueError, match="`confusion` must have shape"):
        bbse_prior(p, np.eye(3) / 3, [0.5, 0.5])
    with pytest.raises(ValueError, match="`cutoff`"):
        shift_cutoff(1.5, 0.1, 0.2)
    with pytest.raises(ValueError, match="`y`"):
        PriorEstimator().fit(p, [0, 2])
    with pytest.raises(ValueError, match="`y` has no"):
        PriorEstimator().fit(p, [0, 0])
    est = PriorEstimator(n_resamples=0).fit(np.vstack([p] * 20), [0, 1] * 20)
    with pytest.raises(ValueError, match="`proba` has 3 columns"):
        est.estimate(np.full((4, 3), 1 / 3))
    with pytest.raises(ValueError, match="exactly one of `batches`"):
        prior_by_batch(est, p)


def test_inputs_are_not_modified():
    rng = np.random.default_rng(53)
    p_src, y_src = binary_gaussian(200, 0.5, rng)
    p_new, _ = binary_gaussian(100, 0.3, rng)
    copies = p_src.copy(), y_src.copy(), p_new.copy()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        PriorEstimator(n_resamples=10, random_state=0).fit(p_src, y_src).estimate(p_new)
    np.testing.assert_array_equal(copies[0], p_src)
    np.testing.assert_array_equal(copies[1], y_src)
    np.testing.assert_array_equal(copies[2], p_new)
